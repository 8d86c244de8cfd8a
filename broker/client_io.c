/* client_io.c: the clients endpoint (see client_io.h). Owns no state beyond
 * the pending ACCEPTED list in broker_t; runs and evaluations belong to their
 * modules. */
#include "client_io.h"

#include <assert.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "access.h"
#include "backlog.h"
#include "cache.h"
#include "common/alloc.h"
#include "common/log.h"
#include "envelope.h"
#include "key.h"
#include "params.h"
#include "quota.h"
#include "stats.h"
#include "status.h"
#include "version.h"

#define S_REFUSAL_QUIET_MS 10000

/* One log line per refusal, except that the same kind of refusal (code) to
 * the same connection again within S_REFUSAL_QUIET_MS is counted, not
 * logged: a flood of refused SUBMITs (100,000 in the memory tests) must not
 * fill the disk with the log. The count is logged with the next line, or
 * by s_refusal_flush once the window is over. */
static struct {
    uint8_t rid[BROKER_RID_MAX];
    size_t rid_len;
    uint32_t code;
    int64_t since_ms;
    uint64_t quiet;
} s_last_refusal;

/* 1 if this refusal is to be logged; logs the count of quiet ones first. */
static int s_refusal_logged(const broker_t *b, const uint8_t *rid, size_t rid_len, uint32_t code)
{
    int same = s_last_refusal.rid_len == rid_len && memcmp(s_last_refusal.rid, rid, rid_len) == 0 &&
               s_last_refusal.code == code;
    if (same && b->now_ms - s_last_refusal.since_ms < S_REFUSAL_QUIET_MS) {
        s_last_refusal.quiet++;
        return 0;
    }
    if (s_last_refusal.quiet) {
        char hex[BROKER_RID_HEX];
        LOG_INFO("(%" PRIu64 " more refusals with code %u to client %s not logged)",
                 s_last_refusal.quiet, s_last_refusal.code,
                 broker_rid_hex(s_last_refusal.rid, s_last_refusal.rid_len, hex));
    }
    memcpy(s_last_refusal.rid, rid, rid_len);
    s_last_refusal.rid_len = rid_len;
    s_last_refusal.code = code;
    s_last_refusal.since_ms = b->now_ms;
    s_last_refusal.quiet = 0;
    return 1;
}

/* Once the quiet window is over, the count of refusals not logged goes out
 * even if no other refusal follows. */
static void s_refusal_flush(const broker_t *b)
{
    if (s_last_refusal.quiet && b->now_ms - s_last_refusal.since_ms >= S_REFUSAL_QUIET_MS) {
        char hex[BROKER_RID_HEX];
        LOG_INFO("(%" PRIu64 " more refusals with code %u to client %s not logged)",
                 s_last_refusal.quiet, s_last_refusal.code,
                 broker_rid_hex(s_last_refusal.rid, s_last_refusal.rid_len, hex));
        s_last_refusal.quiet = 0;
    }
}

/* Refuses a SUBMIT; item names the one request it is about (NULL: the
 * whole batch), so the client needs no text parsing to name the genome. */
static void s_send_refused(broker_t *b, const uint8_t *rid, size_t rid_len, uint32_t code,
                           uint64_t batch_tag, const char *run_id, const proto_item_t *item,
                           const char *text);

static void s_refuse_item(broker_t *b, const uint8_t *rid, size_t rid_len, uint32_t code,
                          uint64_t batch_tag, const char *run_id, const proto_item_t *item,
                          const char *text)
{
    char hex[BROKER_RID_HEX];
    if (s_refusal_logged(b, rid, rid_len, code))
        LOG_INFO("refused batch %" PRIu64 " of run %s from client %s: %s", batch_tag,
                 run_id ? run_id : "", broker_rid_hex(rid, rid_len, hex), text);
    s_send_refused(b, rid, rid_len, code, batch_tag, run_id, item, text);
}

/* While the store cannot write every batch is refused for the same reason,
 * and a retrying client sends one a second: one log line per
 * STORE_REFUSAL_LOG_MS with the count of the ones not logged. */
#define STORE_REFUSAL_LOG_MS 5000

static void s_refuse_store(broker_t *b, const uint8_t *rid, size_t rid_len, uint64_t batch_tag,
                           const char *run_id)
{
    static int s_logged;
    static int64_t s_logged_ms;
    static uint64_t s_unlogged;
    char text[1200];
    broker_store_describe(b->store, text, sizeof text);
    if (!s_logged || b->now_ms - s_logged_ms >= STORE_REFUSAL_LOG_MS) {
        s_logged = 1;
        char hex[BROKER_RID_HEX];
        LOG_INFO("refused batch %" PRIu64 " of run %s from client %s: %s (%" PRIu64
                 " more batches refused for this since the last such line)",
                 batch_tag, run_id ? run_id : "", broker_rid_hex(rid, rid_len, hex), text,
                 s_unlogged);
        s_logged_ms = b->now_ms;
        s_unlogged = 0;
    } else {
        s_unlogged++;
    }
    s_send_refused(b, rid, rid_len, PROTO_REFUSE_STORE, batch_tag, run_id, NULL, text);
}

static void s_send_refused(broker_t *b, const uint8_t *rid, size_t rid_len, uint32_t code,
                           uint64_t batch_tag, const char *run_id, const proto_item_t *item,
                           const char *text)
{
    broker_stats_refused(&b->stats, code);
    if (!b->clients)
        return;
    proto_msg_t msg = {.type = PROTO_REFUSED};
    msg.u.refused.code = code;
    msg.u.refused.batch_tag = batch_tag;
    msg.u.refused.run_id = (char *)(run_id ? run_id : "");
    msg.u.refused.text = (char *)text;
    msg.u.refused.has_tag = item != NULL;
    msg.u.refused.tag = item ? item->tag : 0;
    broker_envelope_send(b->clients, rid, rid_len, &msg);
}

static void s_refuse(broker_t *b, const uint8_t *rid, size_t rid_len, uint32_t code,
                     uint64_t batch_tag, const char *run_id, const char *text)
{
    s_refuse_item(b, rid, rid_len, code, batch_tag, run_id, NULL, text);
}

/* 1 when a recorded answer e (done) is to be evaluated again for a resumed
 * request of SUBMIT s: a crash or time-out, never in a replay, and either
 * the client asked (PROTO_SUBMIT_RETRY_FAILED) or, for a time-out, it now
 * allows more time than the recorded evaluation had (0 there meant the
 * worker's default, so any explicit limit counts as more). */
static int s_retry_recorded(const proto_submit_t *s, const broker_eval_t *e)
{
    if (s->flags & PROTO_SUBMIT_REPLAY)
        return 0;
    if (e->status != PROTO_STATUS_CRASHED && e->status != PROTO_STATUS_TIMEOUT)
        return 0;
    if (s->flags & PROTO_SUBMIT_RETRY_FAILED)
        return 1;
    return e->status == PROTO_STATUS_TIMEOUT && s->timeout_ms > 0 &&
           (broker_eval_time_limit(e) == 0 || s->timeout_ms > broker_eval_time_limit(e));
}

/* Request (run, tag of it) joins the re-evaluation of DONE evaluation e:
 * the one in flight (single flight), else a new fresh one, queued with the
 * submit's time limit and attempts. Returns it. */
static broker_eval_t *s_join_fresh(broker_t *b, broker_run_t *run, const proto_submit_t *s,
                                   broker_eval_t *e, const proto_item_t *it, uint64_t seed)
{
    broker_eval_t *f = broker_eval_again(e);
    if (f) {
        broker_eval_add_waiter(f, run, it->tag, seed);
        broker_runs_adopt(&b->runs, run, f);
        return f;
    }
    f = broker_evals_new_fresh(&b->evals, e, it->genome, it->genome_len);
    broker_quota_charge(b, run, f);
    f->live->timeout_ms = s->timeout_ms;
    f->live->max_attempts = (uint16_t)(s->attempts > UINT16_MAX ? UINT16_MAX : s->attempts);
    broker_eval_add_waiter(f, run, it->tag, seed);
    broker_runs_enqueue(&b->runs, run, f, 0);
    return f;
}

/* 0 when the store certainly records no request tag of run (runs.h,
 * tags_end): a new tag past the run's last needs no lookup. */
static int s_tag_may_be_recorded(broker_t *b, broker_run_t *run, uint64_t tag)
{
    if (!run->tags_known) {
        run->tags_end = broker_store_request_tags_end(b->store, run->id);
        run->tags_known = 1;
    }
    return run->tags_end == UINT64_MAX || tag < run->tags_end;
}

/* Notes a new request (run, tag) in the store. A tag below the run's last
 * recorded one fills a gap, which may lie below the run's acknowledgement
 * mark (store_sql.c): the mark comes down first so the request is owed. */
static void s_note_request(broker_t *b, broker_run_t *run, const proto_submit_t *s,
                           const proto_item_t *it, const broker_eval_t *e, int cached)
{
    if (!run->tags_known || run->tags_end == UINT64_MAX || it->tag < run->tags_end)
        broker_store_note_request_below(b->store, run, it->tag);
    broker_store_note_request(b->store, run, it->tag, s->batch_tag, it->replicate, e, cached);
    if (run->tags_known && it->tag >= run->tags_end)
        run->tags_end = it->tag == UINT64_MAX ? UINT64_MAX : it->tag + 1;
}

/* 1 when request (run, tag) already waits on e. */
static int s_waits(broker_eval_t *e, const broker_run_t *run, uint64_t tag)
{
    for (uint32_t i = 0; i < e->live->n_waiters; i++) {
        const broker_waiter_t *w = broker_eval_waiter(e, i);
        if (w->run == run && w->tag == tag)
            return 1;
    }
    return 0;
}

static void s_queue_accept(broker_t *b, const uint8_t *rid, size_t rid_len, broker_run_t *run,
                           uint64_t batch_tag, uint32_t n)
{
    if (b->n_accepts == b->cap_accepts) {
        b->cap_accepts = b->cap_accepts ? b->cap_accepts * 2 : 16;
        b->accepts = common_xrealloc(b->accepts, b->cap_accepts, sizeof *b->accepts);
    }
    broker_accept_t *a = &b->accepts[b->n_accepts++];
    memcpy(a->rid, rid, rid_len);
    a->rid_len = (uint8_t)rid_len;
    a->run = run;
    a->batch_tag = batch_tag;
    a->n_accepted = n;
    a->told_store = 0;
}

/* Seed and key of one item, recomputed here: the client's word is not taken.
 * stochastic is broker_plugin_stochastic for these params (once per SUBMIT:
 * it parses the params). The seed is derived either way: the worker gets it
 * and the result reports it, even when the key leaves it out. */
static void s_item_key(const broker_plugin_t *plugin, const char *params, int stochastic,
                       uint64_t run_seed, uint32_t seed_mode, const proto_item_t *it,
                       uint64_t *seed, uint8_t key[PROTO_KEY_BYTES])
{
    *seed = proto_seed_derive(run_seed, (int)seed_mode, it->genome, it->genome_len, it->replicate);
    proto_key_input_t in = {
        .plugin = plugin->name,
        .version = plugin->version,
        .params = params,
        .genome = it->genome,
        .genome_len = it->genome_len,
        .stochastic = stochastic,
        .seed = *seed,
        .digest = NULL,
    };
    if (proto_key_compute(&in, key) != 0)
        abort(); /* libsodium cannot initialise: nothing sensible can follow */
}

/* A re-sent request past the delivery cap stays owed from the store. */
static void s_redeliver(broker_t *b, broker_run_t *run, uint64_t tag, uint64_t seed,
                        broker_eval_t *e, int cached)
{
    if (!broker_runs_redeliver(&b->runs, run, tag, seed, e, cached))
        broker_store_note_unack(b->store, run, tag);
}

/* A recorded no-cache request asked again (resume or replay): it is answered
 * with its own re-evaluation, not the cached result: from the unacknowledged
 * delivery when there is one, else from the results history. */
static void s_redeliver_fresh(broker_t *b, broker_run_t *run, uint64_t tag, uint64_t seed,
                              broker_eval_t *e)
{
    broker_delivery_t *d = broker_table_get(run->unacked, &tag, sizeof tag);
    if (d && d->fresh) {
        broker_delivery_t copy = *d; /* the push copies fitness and error */
        if (!broker_runs_redeliver_copy(&b->runs, run, &copy))
            broker_store_note_unack(b->store, run, tag);
        return;
    }
    double fit[PROTO_MAX_OBJECTIVES];
    uint32_t status = 0, nf = 0;
    char err[1024];
    if (!broker_store_find_fresh_result(b->store, run->id, e->key, &status, fit, &nf, err,
                                        sizeof err)) {
        s_redeliver(b, run, tag, seed, e, 0); /* a store from before the history */
        return;
    }
    broker_delivery_t t = {.tag = tag, .seed = seed, .status = (uint8_t)status, .fresh = 1,
                           .n_fitness = nf, .fitness = fit, .error = err};
    memcpy(t.key, e->key, PROTO_KEY_BYTES);
    if (!broker_runs_redeliver_copy(&b->runs, run, &t))
        broker_store_note_unack(b->store, run, tag);
}

int broker_client_submit(broker_t *b, const uint8_t *rid, size_t rid_len, const char *who,
                         const proto_submit_t *s)
{
    int rc = 0;
    char *canon = NULL, *given = NULL; /* given: as sent, when defaults completed canon */
    uint8_t(*keys)[PROTO_KEY_BYTES] = NULL;
    uint64_t *seeds = NULL;
    uint8_t *recorded = NULL; /* per item: 0 new, 1 recorded, 2 recorded cached, 3 recorded no-cache */
    char text[2048];
    char hex[BROKER_RID_HEX];

    if (b->stopping) {
        rc = PROTO_REFUSE_SHUTTING_DOWN;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, "the broker is shutting down");
        goto cleanup;
    }
    if (broker_store_failing(b->store)) {
        /* Nothing could be made durable, so nothing may be accepted: the
         * client is told why, and accepted work still waits in memory. */
        rc = PROTO_REFUSE_STORE;
        s_refuse_store(b, rid, rid_len, s->batch_tag, s->run_id);
        goto cleanup;
    }
    if (!s->run_id || !*s->run_id || s->seed_mode > PROTO_SEED_COMMON) {
        rc = PROTO_REFUSE_BAD_MESSAGE;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id,
                 !s->run_id || !*s->run_id ? "the run id is empty" : "unknown seed mode");
        goto cleanup;
    }
    /* "name" or "name@constraint", resolved here once: the key names the
     * version, so every request of the batch is bound to it (catalog.h). */
    char pname[PROTO_MAX_NAME_BYTES + 1];
    const char *constraint = NULL;
    if (proto_plugin_ref_split(s->plugin, pname, sizeof pname, &constraint, text,
                               sizeof text) != 0) {
        rc = PROTO_REFUSE_UNKNOWN_PLUGIN;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
        goto cleanup;
    }
    broker_plugin_t *plugin = broker_catalog_resolve(&b->catalog, pname, constraint);
    if (!plugin && constraint && broker_catalog_first(&b->catalog, pname)) {
        char versions[1024];
        broker_catalog_versions(&b->catalog, pname, versions, sizeof versions);
        snprintf(text, sizeof text,
                 "no worker has offered plugin %s at a version matching %s (a version that is "
                 "%s or starts with %s.); known versions: %s",
                 pname, constraint, constraint, constraint, versions);
        rc = PROTO_REFUSE_UNKNOWN_PLUGIN;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
        goto cleanup;
    }
    if (!plugin) {
        char names[1024];
        broker_catalog_names(&b->catalog, names, sizeof names);
        if (names[0])
            snprintf(text, sizeof text,
                     "no worker in the pool carries plugin '%s'; the pool has: %s", pname,
                     names);
        else
            snprintf(text, sizeof text,
                     "no worker in the pool carries plugin '%s'; the pool has no workers yet",
                     pname);
        rc = PROTO_REFUSE_UNKNOWN_PLUGIN;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
        goto cleanup;
    }
    char perr[256] = "";
    if (proto_params_canonical(s->params, &canon, perr, sizeof perr) != 0 ||
        strcmp(canon, s->params ? s->params : "") != 0) {
        if (canon)
            snprintf(text, sizeof text, "params are not in canonical form (expected %.1500s)",
                     canon);
        else
            snprintf(text, sizeof text, "bad params: %s", perr);
        rc = PROTO_REFUSE_BAD_PARAMS;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
        goto cleanup;
    }
    if (plugin->param_defaults) {
        /* Key what the plugin will compute: {} and its explicit defaults,
         * or 10 and 10.0, are one evaluation (params.h). */
        char *full = NULL;
        if (proto_params_with_defaults(canon, plugin->param_defaults, &full, perr,
                                       sizeof perr) != 0) {
            snprintf(text, sizeof text, "params with plugin %s's defaults: %s", plugin->name,
                     perr);
            rc = PROTO_REFUSE_BAD_PARAMS;
            s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
            goto cleanup;
        }
        given = canon; /* kept for requests recorded before defaults were known */
        canon = full;
    }
    broker_run_t *run = broker_quota_find_run(b, s->run_id); /* RAM, else the store */
    broker_access_t access = run ? broker_access_may_use(b, run, who) : BROKER_ACCESS_OWNER;
    if (!who || access == BROKER_ACCESS_NO) {
        /* First, before anything that reads the run: the refusal is the same
         * sentence for every run this key may not use (access.h). */
        char name[COMMON_KEY_FINGERPRINT + 8];
        if (s_refusal_logged(b, rid, rid_len, PROTO_REFUSE_NOT_PERMITTED))
            LOG_WARN("refused batch %" PRIu64 " of run %s from client %s (%s): %s", s->batch_tag,
                     s->run_id, broker_rid_hex(rid, rid_len, hex), broker_access_name(who, name),
                     who ? "the run belongs to another key and is not shared with this one"
                         : "the message carries no client key");
        snprintf(text, sizeof text, BROKER_ACCESS_REFUSAL, s->run_id);
        rc = PROTO_REFUSE_NOT_PERMITTED;
        s_send_refused(b, rid, rid_len, (uint32_t)rc, s->batch_tag, s->run_id, NULL, text);
        goto cleanup;
    }
    if (run && (run->seed != s->run_seed || run->seed_mode != s->seed_mode)) {
        snprintf(text, sizeof text,
                 "run %s exists with seed %" PRIu64 " and seed mode %u, not seed %" PRIu64
                 " and seed mode %u",
                 run->id, run->seed, run->seed_mode, s->run_seed, s->seed_mode);
        rc = PROTO_REFUSE_RUN_MISMATCH;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
        goto cleanup;
    }
    for (uint32_t i = 0; i < s->n_items; i++) {
        if (s->items[i].tag > BROKER_TAG_MAX) {
            snprintf(text, sizeof text, "item %u: request tag %" PRIu64 ", limit %" PRIu64, i,
                     s->items[i].tag, BROKER_TAG_MAX);
            rc = PROTO_REFUSE_BAD_MESSAGE;
            s_refuse_item(b, rid, rid_len, rc, s->batch_tag, s->run_id, &s->items[i], text);
            goto cleanup;
        }
        if (s->items[i].replicate >= PROTO_MAX_REPLICATES) {
            snprintf(text, sizeof text, "item %u: replicate %u, limit %u", i,
                     s->items[i].replicate, PROTO_MAX_REPLICATES);
            rc = PROTO_REFUSE_BAD_MESSAGE;
            s_refuse_item(b, rid, rid_len, rc, s->batch_tag, s->run_id, &s->items[i], text);
            goto cleanup;
        }
    }

    if (broker_quota_check(b, who, run, s, text, sizeof text) != 0) {
        rc = PROTO_REFUSE_QUEUE_FULL;
        s_refuse(b, rid, rid_len, rc, s->batch_tag, s->run_id, text);
        goto cleanup;
    }

    /* Keys first, so a replay can be refused before anything changes. */
    keys = common_xcalloc(s->n_items ? s->n_items : 1, sizeof *keys);
    seeds = common_xcalloc(s->n_items ? s->n_items : 1, sizeof *seeds);
    int stochastic = broker_plugin_stochastic(plugin, canon);
    for (uint32_t i = 0; i < s->n_items; i++)
        s_item_key(plugin, canon, stochastic, s->run_seed, s->seed_mode, &s->items[i], &seeds[i],
                   keys[i]);
    /* Request identity is (run, tag): a tag the store already holds must ask
     * for the same key (a resumed client re-sends the same requests); it is
     * then answered from the record, never evaluated again. */
    recorded = common_xcalloc(s->n_items ? s->n_items : 1, 1);
    for (uint32_t i = 0; run && i < s->n_items; i++) {
        uint8_t old[PROTO_KEY_BYTES];
        int cached = 0, fresh = 0;
        if (!s_tag_may_be_recorded(b, run, s->items[i].tag) ||
            !broker_store_find_request(b->store, run->id, s->items[i].tag, old, &cached, &fresh)) {
            if (s->flags & PROTO_SUBMIT_REPLAY)
                break; /* refused below, naming this request */
            continue;
        }
        if (memcmp(old, keys[i], PROTO_KEY_BYTES) != 0 && given) {
            /* Recorded by a broker that did not know the plugin's defaults
             * (an older store): the run's resume and replay keep its key. */
            uint8_t legacy[PROTO_KEY_BYTES];
            uint64_t unused;
            s_item_key(plugin, given, broker_plugin_stochastic(plugin, given), s->run_seed,
                       s->seed_mode, &s->items[i], &unused, legacy);
            if (memcmp(old, legacy, PROTO_KEY_BYTES) == 0)
                memcpy(keys[i], legacy, PROTO_KEY_BYTES);
        }
        if (memcmp(old, keys[i], PROTO_KEY_BYTES) != 0) {
            if (s->flags & PROTO_SUBMIT_REPLAY)
                break; /* other content under a recorded tag: never seen, refused below */
            /* Another version of the plugin (a constraint that now resolves
             * higher) says so, naming the version that resumes the run. */
            broker_eval_t *was = broker_cache_lookup(b, old);
            if (was && was->plugin != plugin && strcmp(was->plugin->name, plugin->name) == 0)
                snprintf(text, sizeof text,
                         "run %s request %" PRIu64 " (item %u of the batch) was recorded with "
                         "plugin %s version %s, and %s now means version %s; resume it with "
                         "the version it was recorded with (%s@%s)",
                         run->id, s->items[i].tag, i, was->plugin->name, was->plugin->version,
                         s->plugin, plugin->version, was->plugin->name, was->plugin->version);
            else
                snprintf(text, sizeof text,
                         "run %s request %" PRIu64 " (item %u of the batch) was recorded with "
                         "another genome or params; one client per run at a time, and a "
                         "resumed run must send the same requests in the same order",
                         run->id, s->items[i].tag, i);
            rc = PROTO_REFUSE_RUN_MISMATCH;
            s_refuse_item(b, rid, rid_len, rc, s->batch_tag, s->run_id, &s->items[i], text);
            goto cleanup;
        }
        recorded[i] = (uint8_t)(fresh ? 3 : 1 + (cached != 0));
    }
    if (s->flags & PROTO_SUBMIT_REPLAY) {
        /* Replay answers only what this run recorded, in the order it was
         * recorded: a request the run never saw (its tag unknown, or known
         * with other content, refused above) stops the replay, so nothing is
         * ever simulated. A recorded request still in flight is waited for. */
        for (uint32_t i = 0; i < s->n_items; i++) {
            broker_eval_t *e = run && recorded[i] ? broker_cache_lookup(b, keys[i]) : NULL;
            if (!run || !recorded[i] || !e) {
                snprintf(text, sizeof text,
                         "replay: run %s never recorded request tag %" PRIu64
                         " (item %u of the batch)%s",
                         s->run_id, s->items[i].tag, i, run ? "" : "; the run is unknown");
                rc = PROTO_REFUSE_NOT_RECORDED;
                s_refuse_item(b, rid, rid_len, rc, s->batch_tag, s->run_id, &s->items[i], text);
                goto cleanup;
            }
        }
    }

    char name[COMMON_KEY_FINGERPRINT + 8];
    if (!run) {
        run = broker_runs_new(&b->runs, s->run_id, s->run_seed, s->seed_mode, who);
        /* Neither RAM nor the store knows it (broker_quota_find_run looked):
         * it has no recorded requests. */
        run->tags_known = 1;
        run->tags_end = 0;
        broker_quota_attach(b, run);
        LOG_INFO("run %s started by client %s (%s): seed %" PRIu64 ", plugin %s %s%s%s", run->id,
                 broker_rid_hex(rid, rid_len, hex), broker_access_name(who, name), run->seed,
                 plugin->name, plugin->version, constraint ? ", asked as " : "",
                 constraint ? s->plugin : "");
    } else {
        if (access == BROKER_ACCESS_CLAIM) {
            broker_quota_detach(b, run);
            snprintf(run->owner, sizeof run->owner, "%s", who);
            broker_quota_attach(b, run);
            LOG_WARN("run %s had no owner recorded (a store from before run ownership): now "
                     "owned by %s, the first key to use it",
                     run->id, broker_access_name(who, name));
        }
        int other = run->client_len != rid_len || memcmp(run->client, rid, rid_len) != 0;
        if (other && run->client_len) {
            char old_hex[BROKER_RID_HEX];
            LOG_INFO("run %s taken over by client %s (%s%s): a reconnect; the previous "
                     "connection %s gets nothing more",
                     run->id, broker_rid_hex(rid, rid_len, hex), broker_access_name(who, name),
                     access == BROKER_ACCESS_SHARED ? ", shared" : ", its owner",
                     broker_rid_hex(run->client, run->client_len, old_hex));
        }
        if (other || s->n_items == 0) {
            /* The client came back (new connection) or asks to resume: what
             * it has not acknowledged goes out again; it drops duplicates by tag. */
            size_t n = broker_runs_resend(&b->runs, run);
            if (n)
                LOG_INFO("run %s resumed by client %s: re-sending %zu unacknowledged results",
                         run->id, broker_rid_hex(rid, rid_len, hex), n);
        }
    }
    broker_run_set_client(run, rid, rid_len, who);
    run->last_used_ms = b->now_ms;
    run->weight = s->weight ? s->weight : 1;
    broker_store_note_run(b->store, run);

    const char *params = broker_intern(&b->intern, canon);
    int no_cache = (s->flags & PROTO_SUBMIT_NO_CACHE) != 0;
    broker_runs_take_begin(&b->runs, run);
    for (uint32_t i = 0; i < s->n_items; i++) {
        const proto_item_t *it = &s->items[i];
        broker_eval_t *e = broker_cache_lookup(b, keys[i]); /* RAM, else the store */
        if (recorded[i] && e) {
            broker_eval_t *again = broker_eval_again(e);
            if (again && s_waits(again, run, it->tag)) {
                continue; /* a no-cache request still waiting on its re-evaluation */
            } else if (recorded[i] == 3 && e->state == BROKER_EVAL_DONE) {
                s_redeliver_fresh(b, run, it->tag, seeds[i], e);
            } else if (e->state == BROKER_EVAL_DONE && s_retry_recorded(s, e)) {
                /* A crash or time-out this run recorded, retried on resume
                 * (--retry-failed, or a larger time limit for a time-out):
                 * evaluated again as a no-cache request is, and from now on
                 * the request (and the run's replay) reads that result. */
                broker_store_note_request_fresh(b->store, run, it->tag);
                broker_run_count_request(run);
                s_join_fresh(b, run, s, e, it, seeds[i]);
            } else if (e->state == BROKER_EVAL_DONE) {
                s_redeliver(b, run, it->tag, seeds[i], e, recorded[i] == 2);
            } else if (!s_waits(e, run, it->tag)) {
                broker_run_count_request(run);
                broker_eval_add_waiter(e, run, it->tag, seeds[i]);
                broker_runs_adopt(&b->runs, run, e);
            }
            continue;
        }
        broker_run_count_request(run);
        /* A crash or a time-out says more about that night's machine than
         * about the genome: it answered the run that got it (and that run's
         * resume and replay read it again, above), but a new request for
         * the key is evaluated again, as a no-cache one is, so one bad
         * night never poisons a genome for later runs. */
        int transient = e && e->state == BROKER_EVAL_DONE &&
                        (e->status == PROTO_STATUS_CRASHED || e->status == PROTO_STATUS_TIMEOUT);
        if (e && e->state == BROKER_EVAL_DONE && !no_cache && !transient) {
            s_note_request(b, run, s, it, e, 1);
            broker_runs_answer(&b->runs, run, it->tag, seeds[i], e, 1);
            continue;
        }
        if (!e) {
            e = broker_evals_new(&b->evals, keys[i], plugin, params, seeds[i], it->genome,
                                 it->genome_len);
            broker_quota_charge(b, run, e);
            e->live->timeout_ms = s->timeout_ms;
            e->live->max_attempts = (uint16_t)(s->attempts > UINT16_MAX ? UINT16_MAX : s->attempts);
            broker_eval_add_waiter(e, run, it->tag, seeds[i]);
            broker_runs_enqueue(&b->runs, run, e, 0);
            broker_store_note_eval(b->store, e);
        } else if (e->state == BROKER_EVAL_DONE) {
            /* No-cache: evaluate again, keeping the cached result (evals.h,
             * "Re-evaluations"); no-cache requests for the key share one. */
            e = s_join_fresh(b, run, s, e, it, seeds[i]);
        } else {
            broker_eval_add_waiter(e, run, it->tag, seeds[i]); /* single flight */
            broker_runs_adopt(&b->runs, run, e);
        }
        s_note_request(b, run, s, it, e, 0);
        assert(broker_eval_check(&b->evals, e));
    }
    broker_runs_take_end(&b->runs, run);
    s_queue_accept(b, rid, rid_len, run, s->batch_tag, s->n_items);

cleanup:
    free(canon);
    free(given);
    free(keys);
    free(seeds);
    free(recorded);
    return rc;
}

/* An ACK counts only from a key that may use the run; it never moves the
 * run's stream to this connection (only a SUBMIT does, access.h). */
static void s_on_ack(broker_t *b, const uint8_t *rid, size_t rid_len, const char *who,
                     const proto_ack_t *a)
{
    broker_run_t *run = broker_runs_get(&b->runs, a->run_id);
    char hex[BROKER_RID_HEX];
    if (!run) {
        LOG_WARN("ignored ACK for unknown run %s from client %s", a->run_id,
                  broker_rid_hex(rid, rid_len, hex));
        return;
    }
    broker_access_t access = broker_access_may_use(b, run, who);
    if (access == BROKER_ACCESS_NO || access == BROKER_ACCESS_CLAIM) {
        char name[COMMON_KEY_FINGERPRINT + 8];
        b->dropped_msgs++;
        LOG_WARN("ignored ACK of %u results of run %s from client %s (%s): not a run this key "
                 "may use",
                 a->n_tags, a->run_id, broker_rid_hex(rid, rid_len, hex),
                 broker_access_name(who, name));
        return;
    }
    run->last_used_ms = b->now_ms;
    /* Consecutive tags that were owed go to the store as one range. */
    uint64_t first = 0, last = 0;
    int open = 0;
    for (uint32_t i = 0; i < a->n_tags; i++) {
        uint64_t tag = a->tags[i];
        if (!broker_runs_ack(&b->runs, run, tag))
            continue;
        if (open && last != UINT64_MAX && tag == last + 1) {
            last = tag;
            continue;
        }
        if (open)
            broker_store_note_ack(b->store, run, first, last);
        first = last = tag;
        open = 1;
    }
    if (open)
        broker_store_note_ack(b->store, run, first, last);
}

/* Lists the pool and the runs who may use (no other key's run, access.h). */
static void s_on_status(broker_t *b, const uint8_t *rid, size_t rid_len, const char *who)
{
    proto_msg_t msg = {.type = PROTO_STATUS};
    broker_status_fill(b, who, 0, &msg.u.status);
    if (b->clients)
        broker_envelope_send(b->clients, rid, rid_len, &msg);
    broker_status_clear(&msg.u.status);
}

void broker_client_on_message(broker_t *b, const uint8_t *rid, size_t rid_len,
                              const char *user_id, const uint8_t *body, size_t len)
{
    const char *who = broker_access_who(b, user_id);
    proto_msg_t *msg = NULL;
    proto_err_t err = {0};
    char hex[BROKER_RID_HEX];
    if (proto_msg_decode(body, len, &b->limits, &msg, &err) != PROTO_OK) {
        b->dropped_msgs++;
        LOG_WARN("dropped a bad message from client %s: %s", broker_rid_hex(rid, rid_len, hex),
                 err.text[0] ? err.text : "undecodable");
        return;
    }
    switch (msg->type) {
    case PROTO_SUBMIT:
        broker_client_submit(b, rid, rid_len, who, &msg->u.submit);
        break;
    case PROTO_ACK:
        s_on_ack(b, rid, rid_len, who, &msg->u.ack);
        break;
    case PROTO_STATUS_REQ:
        s_on_status(b, rid, rid_len, who);
        break;
    case PROTO_HEARTBEAT: {
        proto_msg_t hb = {.type = PROTO_HEARTBEAT};
        if (b->clients)
            broker_envelope_send(b->clients, rid, rid_len, &hb);
        break;
    }
    default:
        b->dropped_msgs++;
        LOG_WARN("dropped a %s message from client %s: not a message clients send",
                 proto_type_name((int)msg->type), broker_rid_hex(rid, rid_len, hex));
        break;
    }
    proto_msg_destroy(&msg);
}

static void s_flush_run(broker_t *b, broker_run_t *run)
{
    uint32_t done = 0;
    while (done < run->n_outbox) {
        uint32_t n = 0;
        size_t bytes = 0;
        while (done + n < run->n_outbox && n < BROKER_RESULTS_PER_MSG &&
               bytes < BROKER_MSG_SOFT_BYTES) {
            const broker_delivery_t *d = &run->outbox[done + n];
            proto_result_t *r = &b->results[n++];
            r->tag = d->tag;
            r->status = d->status;
            r->cached = d->cached;
            r->seed = d->seed;
            memcpy(r->key, d->key, PROTO_KEY_BYTES);
            r->n_fitness = d->n_fitness;
            r->fitness = d->fitness;
            r->error = d->error ? d->error : (char *)"";
            r->worker = (char *)(d->prov.worker ? d->prov.worker : "");
            r->host = (char *)(d->prov.host ? d->prov.host : "");
            r->cpu_seconds = d->prov.cpu_seconds;
            r->peak_rss_kb = d->prov.peak_rss_kb;
            r->finished_at = d->prov.finished_at;
            bytes += 96 + (size_t)d->n_fitness * 9 + (d->error ? strlen(d->error) : 0);
        }
        if (b->clients && run->client_len) {
            proto_msg_t msg = {.type = PROTO_RESULTS};
            msg.u.results.run_id = run->id;
            msg.u.results.n_results = n;
            msg.u.results.results = b->results;
            broker_envelope_send(b->clients, run->client, run->client_len, &msg);
        }
        done += n;
    }
    b->results_sent += run->n_outbox;
    broker_runs_sent(&b->runs, run);
}

void broker_client_tell_store_failing(broker_t *b)
{
    char text[1200];
    int described = 0;
    for (size_t i = 0; i < b->n_accepts; i++) {
        broker_accept_t *a = &b->accepts[i];
        if (a->told_store)
            continue;
        if (!described) {
            broker_store_describe(b->store, text, sizeof text);
            described = 1;
        }
        a->told_store = 1;
        s_send_refused(b, a->rid, a->rid_len, PROTO_REFUSE_STORE, a->batch_tag, a->run->id,
                       NULL, text);
    }
}

void broker_client_flush(broker_t *b)
{
    for (size_t i = 0; i < b->n_accepts; i++) {
        broker_accept_t *a = &b->accepts[i];
        if (!b->clients)
            continue;
        proto_msg_t msg = {.type = PROTO_ACCEPTED};
        msg.u.accepted.run_id = a->run->id;
        msg.u.accepted.batch_tag = a->batch_tag;
        msg.u.accepted.n_accepted = a->n_accepted;
        broker_envelope_send(b->clients, a->rid, a->rid_len, &msg);
    }
    b->n_accepts = 0;
    broker_run_t *run;
    while ((run = broker_runs_take_dirty(&b->runs)))
        s_flush_run(b, run);
    /* Then what runs owe from the store, as far as their caps have room. */
    b->backlog_more = broker_backlog_turn(b);
    while ((run = broker_runs_take_dirty(&b->runs)))
        s_flush_run(b, run);
    /* Nothing holds a run pointer between turns: idle runs may leave RAM. */
    broker_quota_sweep(b, BROKER_RUN_IDLE_MS, 0);
    s_refusal_flush(b);
}
