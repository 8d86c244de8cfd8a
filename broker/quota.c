/* quota.c: the memory caps and their bookkeeping (see quota.h). Owns the
 * per-key totals (b->key_use, one broker_keyuse_t per owner with runs in
 * RAM); reads runs' counts; drops idle runs and rebuilds them from the store. */
#include "quota.h"

#include <assert.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/log.h"

const void *broker_keyuse_key(const void *value, size_t *len)
{
    const broker_keyuse_t *u = value;
    *len = strlen(u->owner);
    return u->owner;
}

static broker_keyuse_t *s_use(broker_t *b, const char *owner, int create)
{
    broker_keyuse_t *u = broker_table_get(b->key_use, owner, strlen(owner));
    if (!u && create) {
        u = common_xcalloc(1, sizeof *u);
        snprintf(u->owner, sizeof u->owner, "%s", owner);
        broker_table_put(b->key_use, u->owner, strlen(u->owner), u);
    }
    return u;
}

void broker_quota_attach(broker_t *b, broker_run_t *run)
{
    assert(!run->use);
    broker_keyuse_t *u = s_use(b, run->owner, 1);
    u->runs++;
    u->outstanding += run->outstanding;
    u->genome_bytes += run->genome_bytes;
    run->use = u;
}

void broker_quota_detach(broker_t *b, broker_run_t *run)
{
    broker_keyuse_t *u = run->use;
    if (!u)
        return;
    assert(u->runs > 0 && u->outstanding >= run->outstanding &&
           u->genome_bytes >= run->genome_bytes);
    u->runs--;
    u->outstanding -= run->outstanding;
    u->genome_bytes -= run->genome_bytes;
    run->use = NULL;
    if (u->runs == 0) {
        broker_table_delete(b->key_use, u->owner, strlen(u->owner));
        free(u);
    }
}

/* What a queued evaluation holds: its record and its genome (evals.c). */
static uint64_t s_cost(uint32_t genome_len)
{
    return (uint64_t)BROKER_EVAL_QUEUED_BYTES + genome_len;
}

void broker_quota_charge(broker_t *b, broker_run_t *run, broker_eval_t *e)
{
    assert(!e->live->charged);
    uint64_t c = s_cost(e->live->genome_len);
    e->live->charged = run;
    run->genome_bytes += c;
    if (run->use)
        run->use->genome_bytes += c;
    b->queued_bytes += c;
}

void broker_quota_release(broker_t *b, broker_eval_t *e)
{
    broker_run_t *run = e->live ? e->live->charged : NULL;
    if (!run)
        return;
    uint64_t c = s_cost(e->live->genome_len);
    assert(run->genome_bytes >= c && b->queued_bytes >= c);
    run->genome_bytes -= c;
    if (run->use)
        run->use->genome_bytes -= c;
    b->queued_bytes -= c;
    e->live->charged = NULL;
}

int broker_quota_check(const broker_t *b, const char *who, const broker_run_t *run,
                       const proto_submit_t *s, char *text, size_t n)
{
    /* The owner's totals carry the run, whoever submits to it (a shared key
     * spends the owner's budget). */
    const broker_keyuse_t *u =
        run ? run->use : broker_table_get(b->key_use, who, strlen(who));
    uint64_t key_runs = u ? u->runs : 0, key_out = u ? u->outstanding : 0,
             key_bytes = u ? u->genome_bytes : 0;
    uint64_t held = broker_table_size(b->runs.by_id);
    if (!run && held >= b->max_runs) {
        snprintf(text, n,
                 "too many runs: the broker holds %" PRIu64 " runs in RAM and its cap is %" PRIu64
                 " (--max-runs); a run leaves RAM %d s after its last results are "
                 "acknowledged; finish or acknowledge runs, or submit to an existing one",
                 held, b->max_runs, BROKER_RUN_IDLE_MS / 1000);
        return -1;
    }
    if (!run && key_runs >= b->max_runs_per_key) {
        snprintf(text, n,
                 "too many runs: this client key has %" PRIu64 " runs in RAM and the broker's "
                 "cap is %" PRIu64 " per key (--max-runs-per-key); a run leaves RAM %d s after "
                 "its last results are acknowledged",
                 key_runs, b->max_runs_per_key, BROKER_RUN_IDLE_MS / 1000);
        return -1;
    }
    uint64_t in_run = run ? run->outstanding : 0;
    if (in_run + s->n_items > b->max_queued_per_run) {
        snprintf(text, n,
                 "queue full: run %s has %" PRIu64 " requests waiting and this batch adds %u; "
                 "the broker's cap is %" PRIu64 " per run (--max-queued-per-run); wait for "
                 "results and submit again",
                 s->run_id, in_run, s->n_items, b->max_queued_per_run);
        return -1;
    }
    if (key_out + s->n_items > b->max_queued_per_client) {
        snprintf(text, n,
                 "queue full: this client key has %" PRIu64 " requests waiting and this batch "
                 "adds %u; the broker's cap is %" PRIu64 " per key "
                 "(--max-queued-per-key); wait for results and submit again",
                 key_out, s->n_items, b->max_queued_per_client);
        return -1;
    }
    uint64_t add = 0;
    for (uint32_t i = 0; i < s->n_items; i++)
        add += s_cost(s->items[i].genome_len);
    uint64_t run_bytes = run ? run->genome_bytes : 0;
    const char *scope = NULL, *flag = NULL;
    uint64_t have = 0, cap = 0;
    if (run_bytes + add > b->max_queued_bytes_per_run) {
        scope = "run";
        flag = "--max-queued-bytes-per-run";
        have = run_bytes;
        cap = b->max_queued_bytes_per_run;
    } else if (key_bytes + add > b->max_queued_bytes_per_key) {
        scope = "client key";
        flag = "--max-queued-bytes-per-key";
        have = key_bytes;
        cap = b->max_queued_bytes_per_key;
    } else if (b->queued_bytes + add > b->max_queued_bytes) {
        scope = "broker";
        flag = "--max-queued-bytes";
        have = b->queued_bytes;
        cap = b->max_queued_bytes;
    }
    if (scope) {
        snprintf(text, n,
                 "queue full: this %s holds %" PRIu64 " bytes of queued evaluations and this "
                 "batch adds up to %" PRIu64 " (genomes plus %zu bytes each); the cap is %" PRIu64
                 " (%s); wait for results and submit again",
                 scope, have, add, (size_t)BROKER_EVAL_QUEUED_BYTES, cap, flag);
        return -1;
    }
    return 0;
}

broker_run_t *broker_quota_find_run(broker_t *b, const char *id)
{
    broker_run_t *run = broker_runs_get(&b->runs, id);
    /* A full broker does not bring runs back (the SUBMIT is then refused as
     * a new run would be, "too many runs"). */
    if (run || !b->store || broker_table_size(b->runs.by_id) >= b->max_runs)
        return run;
    uint64_t seed = 0;
    uint32_t mode = 0;
    char owner[BROKER_KEY_TEXT] = "";
    if (!broker_store_find_run(b->store, id, &seed, &mode, owner, sizeof owner))
        return NULL;
    run = broker_runs_new(&b->runs, id, seed, mode, owner);
    /* Unused until a SUBMIT is accepted: a refused one (another key's
     * probe) leaves it idle, and the next sweep drops it again. */
    run->last_used_ms = b->now_ms - BROKER_RUN_IDLE_MS;
    broker_quota_attach(b, run);
    /* It left RAM with nothing owed; whatever the store says it owes (a
     * request acknowledged back to 0 meanwhile) is paged back all the same. */
    broker_runs_owe_all(&b->runs, run);
    b->runs_reloaded++;
    return run;
}

void broker_quota_sweep(broker_t *b, int64_t idle_ms, int force)
{
    if (!force && b->now_ms < b->next_sweep_ms)
        return;
    b->next_sweep_ms = b->now_ms + BROKER_RUN_SWEEP_MS;
    size_t n = broker_table_size(b->runs.by_id), k = 0, cur = 0;
    if (n == 0)
        return;
    /* Collected first: the table must not change while it is walked. */
    broker_run_t **idle = common_xcalloc(n, sizeof *idle);
    broker_run_t *run;
    while ((run = broker_table_next(b->runs.by_id, &cur)))
        if (broker_runs_idle(run) && b->now_ms - run->last_used_ms >= idle_ms)
            idle[k++] = run;
    for (size_t i = 0; i < k; i++) {
        broker_quota_detach(b, idle[i]);
        broker_runs_drop(&b->runs, idle[i]);
    }
    free(idle);
    b->runs_dropped += k;
    if (k)
        LOG_DEBUG("%zu idle runs left RAM (the store keeps them); %zu runs held", k,
                  broker_table_size(b->runs.by_id));
}

void broker_quota_fini(broker_t *b)
{
    size_t cur = 0;
    broker_keyuse_t *u;
    while ((u = broker_table_next(b->key_use, &cur)))
        free(u);
    broker_table_destroy(&b->key_use);
}
