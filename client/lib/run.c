/* run.c: the core of the client library: runs, and everything between a
 * batch and the messages: tags, SUBMIT chunks, ACCEPTED/REFUSED answers,
 * storing RESULTS exactly once, ACKs, re-sending after a reconnect. No I/O:
 * it is fed decoded messages (client_runs_on_message) and emits the
 * messages to send into the core's outbox (client_core_emit, core.h); the
 * transport (client.c) moves them, the blocking calls (blocking.c) wait. It
 * never sees the client object or a socket.
 *
 * Tags. Slot s (= genome index * replicates + replicate) of a batch has tag
 * tag_base + s; a run hands out tag ranges from a counter, so tags are unique
 * within the run and a result maps back to (batch, index, replicate) by a
 * binary search over the run's batches. The counter starts at 0 and counts
 * genome x replicate in submission order, so tags are deterministic: a
 * process that resumes a run id and submits the same genomes in the same
 * order sends the same tags, and the broker (whose request identity is run
 * id and tag) answers them from its store without evaluating them again. It
 * also means one client per run at a time: the broker refuses a recorded tag
 * that comes with another genome.
 *
 * Not here: the socket and the pump (client.c), waiting (blocking.c),
 * result storage (batch.c). */
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/clock.h"
#include "key.h"
#include "ring.h"
#include "run.h"

#define CLIENT_RETRY_EVERY_MS 1000   /* re-send refused re-sends this often ... */
#define CLIENT_RETRY_FOR_MS 60000    /* ... for this long (workers re-register) */

static void s_resend(fitfarm_run_t *run);

fitfarm_run_t *client_run_find(const client_core_t *core, const char *run_id)
{
    for (fitfarm_run_t *run = core->runs; run; run = run->next)
        if (strcmp(run->id, run_id) == 0)
            return run;
    return NULL;
}

int client_run_new(client_core_t *core, fitfarm_client_t *client,
                   const fitfarm_run_options_t *options, fitfarm_run_t **out)
{
    *out = NULL;
    if (options->seed_mode != PROTO_SEED_GENOME && options->seed_mode != PROTO_SEED_COMMON)
        return client_core_fail(core, FITFARM_EINVAL, "seed_mode %d is neither 0 (per genome) "
                                "nor 1 (common random numbers)", options->seed_mode);
    if (options->weight > PROTO_MAX_WEIGHT)
        return client_core_fail(core, FITFARM_EINVAL, "a run's weight is 1 to %u, not %u",
                                PROTO_MAX_WEIGHT, options->weight);
    if (options->run_id) {
        size_t len = strlen(options->run_id);
        if (len == 0 || len > PROTO_MAX_NAME_BYTES)
            return client_core_fail(core, FITFARM_EINVAL,
                                    "a run id must have 1 to %u bytes, not %zu",
                                    PROTO_MAX_NAME_BYTES, len);
        if (client_run_find(core, options->run_id))
            return client_core_fail(core, FITFARM_EINVAL,
                                    "run \"%s\" is already open in this client",
                                    options->run_id);
    }
    if (sodium_init() < 0)
        return client_core_fail(core, FITFARM_ESYSTEM, "libsodium failed to initialise");
    fitfarm_run_t *run = calloc(1, sizeof *run);
    if (!run)
        return client_core_fail(core, FITFARM_ENOMEM, "out of memory opening a run");
    if (options->run_id) {
        run->id = strdup(options->run_id);
    } else {
        uint8_t raw[8];
        char hex[17];
        randombytes_buf(raw, sizeof raw);
        proto_hex(raw, sizeof raw, hex);
        run->id = malloc(4 + sizeof hex);
        if (run->id)
            snprintf(run->id, 4 + sizeof hex, "run-%s", hex);
    }
    if (!run->id) {
        free(run);
        return client_core_fail(core, FITFARM_ENOMEM, "out of memory opening a run");
    }
    run->core = core;
    run->client = client;
    run->seed = options->seed;
    run->seed_mode = (uint32_t)options->seed_mode;
    run->flags = (options->no_cache ? PROTO_SUBMIT_NO_CACHE : 0) |
                 (options->replay ? PROTO_SUBMIT_REPLAY : 0) |
                 (options->retry_failed ? PROTO_SUBMIT_RETRY_FAILED : 0);
    run->timeout_s = options->timeout_s;
    run->attempts = options->attempts;
    run->weight = options->weight ? options->weight : 1;
    run->next_tag = 0; /* deterministic tags: see the top of this file */
    run->next = core->runs;
    core->runs = run;
    *out = run;
    return FITFARM_OK;
}

void client_runs_detach(client_core_t *core)
{
    for (fitfarm_run_t *run = core->runs; run; run = run->next) {
        run->core = NULL;
        run->client = NULL;
    }
    core->runs = NULL;
}

void client_runs_resend_due(client_core_t *core, int64_t now_ms, int all)
{
    for (fitfarm_run_t *run = core->runs; run; run = run->next)
        if (all || (run->retry_at_ms != 0 && now_ms >= run->retry_at_ms))
            s_resend(run);
}

int64_t client_runs_next_retry(const client_core_t *core)
{
    int64_t next = -1;
    for (const fitfarm_run_t *run = core->runs; run; run = run->next)
        if (run->retry_at_ms != 0 && (next < 0 || run->retry_at_ms < next))
            next = run->retry_at_ms;
    return next;
}

FITFARM_API int fitfarm_run_stats(const fitfarm_run_t *run, fitfarm_run_stats_t *out)
{
    if (!run || !out || out->size == 0)
        return FITFARM_EINVAL;
    fitfarm_run_stats_t full = run->stats;
    full.size = out->size;
    full.duplicates = run->n_duplicates;
    full.resent = run->n_resent;
    CLIENT_COPY_OUT(out, full);
    return FITFARM_OK;
}

FITFARM_API int fitfarm_refusal(const fitfarm_run_t *run, fitfarm_refusal_t *out)
{
    if (!run || !out || out->size == 0)
        return FITFARM_EINVAL;
    fitfarm_refusal_t full = {.size = out->size,
                              .code = run->refusal_code,
                              .has_request = run->refusal_has_request,
                              .batch = run->refusal_batch,
                              .text = run->refusal_text};
    if (run->refusal_has_request && run->refusal_batch) {
        full.index = run->refusal_slot / run->refusal_batch->replicates;
        full.replicate = (unsigned)(run->refusal_slot % run->refusal_batch->replicates);
    }
    CLIENT_COPY_OUT(out, full);
    return FITFARM_OK;
}

FITFARM_API const char *fitfarm_run_id(const fitfarm_run_t *run)
{
    return run ? run->id : "";
}

static void s_chunk_free(client_chunk_t *chunk)
{
    free(chunk->slots);
    free(chunk->refuse_text);
    memset(chunk, 0, sizeof *chunk);
}

/* Removes chunks matching (batch or any, background or any) by compaction. */
static void s_chunks_remove_if(fitfarm_run_t *run, const fitfarm_batch_t *batch, int only_answered,
                               int only_background)
{
    size_t w = 0;
    for (size_t i = 0; i < run->n_chunks; i++) {
        client_chunk_t *c = &run->chunks[i];
        int drop = (!batch || c->batch == batch) && (!only_answered || c->answered) &&
                   (!only_background || c->background);
        if (drop)
            s_chunk_free(c);
        else
            run->chunks[w++] = *c;
    }
    run->n_chunks = w;
}

FITFARM_API void fitfarm_run_destroy(fitfarm_run_t **run_p)
{
    if (!run_p || !*run_p)
        return;
    fitfarm_run_t *run = *run_p;
    if (run->core) {
        for (fitfarm_run_t **pp = &run->core->runs; *pp; pp = &(*pp)->next)
            if (*pp == run) {
                *pp = run->next;
                break;
            }
    }
    for (size_t i = 0; i < run->n_batches; i++)
        run->batches[i]->run = NULL;
    s_chunks_remove_if(run, NULL, 0, 0);
    free(run->chunks);
    free(run->batches);
    free(run->ready);
    free(run->id);
    free(run);
    *run_p = NULL;
}

void client_batch_detach(fitfarm_batch_t *batch)
{
    fitfarm_run_t *run = batch->run;
    if (!run)
        return;
    size_t w = 0;
    for (size_t i = 0; i < run->n_batches; i++)
        if (run->batches[i] != batch)
            run->batches[w++] = run->batches[i];
    run->n_batches = w;
    s_chunks_remove_if(run, batch, 0, 0);
    /* Keep the poll queue in order, without this batch's entries. */
    size_t kept = 0;
    for (size_t i = 0; i < run->ready_len; i++) {
        client_ready_t e = run->ready[(run->ready_head + i) % run->ready_cap];
        if (e.batch != batch)
            run->ready[(run->ready_head + kept++) % run->ready_cap] = e;
    }
    run->ready_len = kept;
    if (run->refusal_batch == batch) {
        run->refusal_batch = NULL;
        run->refusal_has_request = 0;
    }
    batch->run = NULL;
}

/* Here rather than in batch.c: a batch is unlinked from its run before it
 * is freed, and the run is this file's (batch.c knows nothing of runs). */
FITFARM_API void fitfarm_batch_destroy(fitfarm_batch_t **batch_p)
{
    if (!batch_p || !*batch_p)
        return;
    client_batch_detach(*batch_p);
    client_batch_free(*batch_p);
    *batch_p = NULL;
}

static fitfarm_batch_t *s_batch_of_tag(fitfarm_run_t *run, uint64_t tag, size_t *slot)
{
    size_t lo = 0, hi = run->n_batches; /* first batch with tag_base > tag */
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (run->batches[mid]->tag_base <= tag)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo == 0)
        return NULL;
    fitfarm_batch_t *b = run->batches[lo - 1];
    uint64_t off = tag - b->tag_base;
    if (off >= (uint64_t)b->n * b->replicates)
        return NULL;
    *slot = (size_t)off;
    return b;
}

static int s_ready_reserve(fitfarm_run_t *run)
{
    void *ring = run->ready;
    int rc = client_ring_reserve(&ring, &run->ready_cap, &run->ready_head, run->ready_len,
                                 sizeof *run->ready, 256);
    run->ready = ring;
    return rc;
}

static int s_refusal(fitfarm_run_t *run, const fitfarm_batch_t *b, const client_chunk_t *c,
                     char *buf, size_t len);
static int s_send_listed(fitfarm_run_t *run, fitfarm_batch_t *b, const uint32_t *slots,
                         uint32_t n, int detached);

static void s_async_fail(fitfarm_run_t *run, int code, const char *text)
{
    if (run->async_rc != 0)
        return; /* keep the first: later ones are usually its echoes */
    run->async_rc = code;
    snprintf(run->async_err, sizeof run->async_err, "%s", text);
}

static void s_on_results(fitfarm_run_t *run, const proto_results_t *results)
{
    uint64_t *acks = malloc((results->n_results ? results->n_results : 1) * sizeof *acks);
    uint32_t n_acks = 0;
    for (uint32_t i = 0; i < results->n_results; i++) {
        const proto_result_t *r = &results->results[i];
        size_t slot = 0;
        fitfarm_batch_t *batch = s_batch_of_tag(run, r->tag, &slot);
        if (!batch)
            continue; /* not ours (another session of this run, or a destroyed batch) */
        if (batch->streaming && s_ready_reserve(run) != 0) {
            s_async_fail(run, FITFARM_ENOMEM, "out of memory queueing a result");
            continue; /* not acknowledged: the broker will send it again */
        }
        /* The broker sends each request's own seed (not the seed of a
         * shared evaluation that answered several requests). */
        int stored = client_batch_store(batch, slot, r, r->seed);
        if (stored < 0) {
            s_async_fail(run, FITFARM_ENOMEM, "out of memory storing a result");
            continue;
        }
        if (stored == 0)
            run->n_duplicates++;
        if (stored == 1) {
            run->stats.delivered++;
            run->stats.cached += r->cached ? 1 : 0;
        }
        if (stored == 1 && batch->streaming) {
            run->ready[(run->ready_head + run->ready_len) % run->ready_cap] =
                (client_ready_t){batch, slot};
            run->ready_len++;
        }
        /* Duplicates are acknowledged again: the broker re-sent because it
         * did not see our first ACK. */
        if (acks)
            acks[n_acks++] = r->tag;
    }
    if (acks && n_acks > 0 && run->core) {
        proto_msg_t msg;
        memset(&msg, 0, sizeof msg);
        msg.type = PROTO_ACK;
        msg.u.ack.run_id = run->id;
        msg.u.ack.n_tags = n_acks;
        msg.u.ack.tags = acks;
        char saved[CLIENT_ERR_BYTES];
        memcpy(saved, run->core->err, sizeof saved);
        (void)client_core_emit(run->core, &msg); /* a lost ACK costs only a re-delivery */
        memcpy(run->core->err, saved, sizeof saved); /* ... and is not the caller's error */
    }
    free(acks);
}

/* A re-send after a reconnect was refused. A broker that just restarted
 * may not know its workers' plugins yet, or be busy: keep the slots and try
 * again every second for a while; other refusals, or too long, are errors. */
static void s_background_refused(fitfarm_run_t *run, client_chunk_t *c, uint32_t code,
                                 const char *text)
{
    int64_t now = common_clock_ms();
    int transient = code == PROTO_REFUSE_UNKNOWN_PLUGIN || code == PROTO_REFUSE_QUEUE_FULL ||
                    code == PROTO_REFUSE_SHUTTING_DOWN || code == PROTO_REFUSE_STORE;
    if (transient && (run->retry_until_ms == 0 || now < run->retry_until_ms)) {
        if (run->retry_until_ms == 0)
            run->retry_until_ms = now + CLIENT_RETRY_FOR_MS;
        run->retry_at_ms = now + CLIENT_RETRY_EVERY_MS;
        for (uint32_t k = 0; k < c->n_slots; k++)
            if (c->batch->slots[c->slots[k]].state == CLIENT_SLOT_UNSENT)
                c->batch->slots[c->slots[k]].state = CLIENT_SLOT_ACCEPTED;
        return;
    }
    char msg[CLIENT_ERR_BYTES];
    snprintf(msg, sizeof msg, "after a reconnect the broker refused batch work it had "
             "accepted before (code %u): %s", code, text ? text : "");
    s_async_fail(run, code == PROTO_REFUSE_UNKNOWN_PLUGIN ? FITFARM_EPLUGIN : FITFARM_EREFUSED,
                 msg);
}

static void s_on_answer(client_core_t *core, uint64_t batch_tag, const proto_refused_t *refused)
{
    int accepted = refused == NULL;
    uint32_t code = refused ? refused->code : 0;
    const char *text = refused ? refused->text : NULL;
    for (fitfarm_run_t *run = core->runs; run; run = run->next) {
        for (size_t i = 0; i < run->n_chunks; i++) {
            client_chunk_t *c = &run->chunks[i];
            if (c->batch_tag != batch_tag || c->answered)
                continue;
            for (uint32_t k = 0; k < c->n_slots; k++) {
                client_slot_t *s = &c->batch->slots[c->slots[k]];
                if (s->state == CLIENT_SLOT_ARRIVED)
                    continue;
                s->state = accepted ? CLIENT_SLOT_ACCEPTED : CLIENT_SLOT_UNSENT;
            }
            c->answered = accepted ? 1 : 2;
            c->refuse_code = code;
            if (accepted && !c->background)
                run->stats.accepted += c->n_slots;
            if (!accepted) {
                c->refuse_text = strdup(text ? text : "");
                c->refuse_has_tag = refused->has_tag;
                c->refuse_tag = refused->tag;
            }
            /* A replay stops at the first request the run never recorded;
             * the recorded ones before it in this chunk are still owed to
             * the caller, so they go out again alone (same tags). */
            fitfarm_batch_t *prefix_batch = NULL;
            uint32_t *prefix = NULL, n_prefix = 0;
            int prefix_detached = c->detached;
            if (!accepted && !c->background && code == PROTO_REFUSE_NOT_RECORDED &&
                refused->has_tag && (prefix = malloc(c->n_slots * sizeof *prefix)) != NULL) {
                prefix_batch = c->batch;
                for (uint32_t k = 0; k < c->n_slots; k++)
                    if (c->batch->tag_base + c->slots[k] < refused->tag)
                        prefix[n_prefix++] = c->slots[k];
            }
            if (c->background) {
                if (accepted)
                    run->retry_until_ms = 0;
                else
                    s_background_refused(run, c, code, text);
                s_chunks_remove_if(run, c->batch, 1, 1);
            } else if (c->detached) {
                /* Nobody waits for this answer: a refusal is reported by the
                 * next poll or evaluate. */
                if (!accepted) {
                    char sentence[CLIENT_ERR_BYTES];
                    int rc = s_refusal(run, c->batch, c, sentence, sizeof sentence);
                    s_async_fail(run, rc, sentence);
                }
                s_chunk_free(c);
                run->chunks[i] = run->chunks[--run->n_chunks];
            }
            if (n_prefix > 0)
                (void)s_send_listed(run, prefix_batch, prefix, n_prefix, prefix_detached);
            free(prefix);
            return;
        }
    }
}

/* Sends one chunk: a SUBMIT whose items point into the batch's genomes. */
static int s_chunk_send(fitfarm_run_t *run, const client_chunk_t *c)
{
    fitfarm_batch_t *b = c->batch;
    proto_item_t *items = malloc(c->n_slots * sizeof *items);
    if (!items)
        return client_core_fail(run->core, FITFARM_ENOMEM, "out of memory building a SUBMIT");
    for (uint32_t k = 0; k < c->n_slots; k++) {
        size_t slot = c->slots[k];
        size_t g = slot / b->replicates;
        items[k].tag = b->tag_base + slot;
        items[k].replicate = (uint32_t)(slot % b->replicates);
        items[k].genome_len = b->genome_len[g];
        items[k].genome = b->genomes[g];
    }
    proto_msg_t msg;
    memset(&msg, 0, sizeof msg);
    msg.type = PROTO_SUBMIT;
    msg.u.submit.run_id = run->id;
    msg.u.submit.run_seed = run->seed;
    msg.u.submit.seed_mode = run->seed_mode;
    msg.u.submit.flags = run->flags;
    msg.u.submit.timeout_ms =
        run->timeout_s > UINT32_MAX / 1000u ? UINT32_MAX : run->timeout_s * 1000u;
    msg.u.submit.attempts = run->attempts;
    msg.u.submit.weight = run->weight;
    msg.u.submit.batch_tag = c->batch_tag;
    msg.u.submit.plugin = b->plugin;
    msg.u.submit.params = b->params;
    msg.u.submit.n_items = c->n_slots;
    msg.u.submit.items = items;
    int rc = client_core_emit(run->core, &msg);
    free(items);
    return rc;
}

/* A new empty chunk of b with room for cap slots, at the end of the run's
 * chunks (not yet counted in n_chunks: s_chunk_go does that), or NULL on
 * out of memory (error set). */
static client_chunk_t *s_chunk_new(fitfarm_run_t *run, fitfarm_batch_t *b, uint32_t cap)
{
    if (run->n_chunks == run->cap_chunks) {
        size_t n = run->cap_chunks ? run->cap_chunks * 2 : 16;
        client_chunk_t *v = realloc(run->chunks, n * sizeof *v);
        if (!v) {
            client_core_fail(run->core, FITFARM_ENOMEM, "out of memory building chunks");
            return NULL;
        }
        run->chunks = v;
        run->cap_chunks = n;
    }
    client_chunk_t *c = &run->chunks[run->n_chunks];
    memset(c, 0, sizeof *c);
    c->slots = malloc((cap ? cap : 1) * sizeof *c->slots);
    if (!c->slots) {
        client_core_fail(run->core, FITFARM_ENOMEM, "out of memory building chunks");
        return NULL;
    }
    c->batch = b;
    return c;
}

/* Registers the chunk s_chunk_new made and filled, marks its UNSENT slots
 * SENT and sends it. */
static int s_chunk_go(fitfarm_run_t *run, client_chunk_t *c)
{
    c->batch_tag = run->core->next_batch_tag++;
    run->n_chunks++;
    for (uint32_t k = 0; k < c->n_slots; k++)
        if (c->batch->slots[c->slots[k]].state == CLIENT_SLOT_UNSENT)
            c->batch->slots[c->slots[k]].state = CLIENT_SLOT_SENT;
    return s_chunk_send(run, c);
}

/* Sends the listed slots of b (at most one chunk's worth, in order) as a new
 * chunk; detached: nobody waits for its answer. */
static int s_send_listed(fitfarm_run_t *run, fitfarm_batch_t *b, const uint32_t *slots,
                         uint32_t n, int detached)
{
    client_chunk_t *c = s_chunk_new(run, b, n);
    if (!c)
        return FITFARM_ENOMEM;
    memcpy(c->slots, slots, n * sizeof *slots);
    c->n_slots = n;
    c->detached = detached;
    return s_chunk_go(run, c);
}

/* Cuts the slots of batch in state from (UNSENT or ACCEPTED) into chunks of
 * at most CLIENT_CHUNK_ITEMS items and about CLIENT_CHUNK_BYTES genome bytes,
 * registers them, marks UNSENT slots SENT and sends them. */
static int s_send_slots(fitfarm_run_t *run, fitfarm_batch_t *b, int from, int background,
                        size_t *n_chunks_sent)
{
    size_t n_slots = b->n * b->replicates;
    size_t s = 0;
    *n_chunks_sent = 0;
    while (s < n_slots) {
        while (s < n_slots && b->slots[s].state != from)
            s++;
        if (s == n_slots)
            break;
        client_chunk_t *c = s_chunk_new(run, b, CLIENT_CHUNK_ITEMS);
        if (!c)
            return FITFARM_ENOMEM;
        size_t bytes = 0;
        for (; s < n_slots && c->n_slots < CLIENT_CHUNK_ITEMS; s++) {
            if (b->slots[s].state != from)
                continue;
            size_t len = b->genome_len[s / b->replicates];
            if (c->n_slots > 0 && bytes + len > CLIENT_CHUNK_BYTES)
                break;
            bytes += len;
            c->slots[c->n_slots++] = (uint32_t)s;
        }
        c->background = background;
        if (background)
            run->n_resent += c->n_slots;
        int rc = s_chunk_go(run, c);
        if (rc != FITFARM_OK)
            return rc;
        (*n_chunks_sent)++;
    }
    return FITFARM_OK;
}

static void s_resend(fitfarm_run_t *run)
{
    if (!run->core)
        return;
    run->retry_at_ms = 0;
    char saved[CLIENT_ERR_BYTES];
    memcpy(saved, run->core->err, sizeof saved);
    /* Earlier re-sends that were never answered are superseded below. */
    s_chunks_remove_if(run, NULL, 0, 1);
    for (size_t i = 0; i < run->n_chunks; i++)
        if (!run->chunks[i].answered)
            (void)s_chunk_send(run, &run->chunks[i]); /* same batch_tag: one answer will do */
    for (size_t i = 0; i < run->n_batches; i++) {
        fitfarm_batch_t *b = run->batches[i];
        size_t sent;
        if (b->arrived < b->n * b->replicates)
            (void)s_send_slots(run, b, CLIENT_SLOT_ACCEPTED, 1, &sent);
    }
    /* A failed re-send is retried at the next reconnect; not the caller's error. */
    memcpy(run->core->err, saved, sizeof saved);
}

/* Writes the sentence for chunk c's refusal to buf, records the refusal on
 * the run (fitfarm_refusal) and returns its code. The broker names the
 * refused request by tag (structured, never parsed from its text); the
 * sentence names it in the caller's terms, genome index and replicate. */
static int s_refusal(fitfarm_run_t *run, const fitfarm_batch_t *b, const client_chunk_t *c,
                     char *buf, size_t len)
{
    const char *text = c->refuse_text ? c->refuse_text : "";
    int named = c->refuse_has_tag && c->refuse_tag >= b->tag_base &&
                c->refuse_tag - b->tag_base < (uint64_t)b->n * b->replicates;
    size_t slot = named ? (size_t)(c->refuse_tag - b->tag_base) : 0;
    char which[96] = "";
    if (named)
        snprintf(which, sizeof which, "genome %zu, replicate %u of the batch: ",
                 slot / b->replicates, (unsigned)(slot % b->replicates));
    int code;
    switch (c->refuse_code) {
    case PROTO_REFUSE_UNKNOWN_PLUGIN:
        code = FITFARM_EPLUGIN;
        snprintf(buf, len, "the pool has no plugin \"%s\": %s", b->plugin, text);
        break;
    case PROTO_REFUSE_QUEUE_FULL:
        code = FITFARM_EQUEUEFULL;
        snprintf(buf, len, "the broker's queue is full: %s", text);
        break;
    case PROTO_REFUSE_NOT_RECORDED:
        code = FITFARM_ENOTRECORDED;
        if (named)
            snprintf(buf, len, "replay of run \"%s\": %swas never recorded by the run; nothing "
                     "was simulated (%s)", run->id, which, text);
        else
            snprintf(buf, len, "replay of run \"%s\": %s", run->id, text);
        break;
    case PROTO_REFUSE_STORE:
        code = FITFARM_EREFUSED;
        snprintf(buf, len, "the broker accepts no new work while its store cannot be written "
                 "(what it accepted before is kept and answered once the store can take it): "
                 "%s", text);
        break;
    case PROTO_REFUSE_BAD_PARAMS:
        code = FITFARM_EREFUSED;
        snprintf(buf, len, "the broker refused the params of plugin \"%s\": %s", b->plugin, text);
        break;
    case PROTO_REFUSE_NOT_PERMITTED:
        code = FITFARM_EREFUSED;
        snprintf(buf, len, "%s", text);
        break;
    case PROTO_REFUSE_RUN_MISMATCH:
        code = FITFARM_EREFUSED;
        snprintf(buf, len, "run \"%s\" does not match what the broker recorded for it: %s%s",
                 run->id, which, text);
        break;
    default:
        code = FITFARM_EREFUSED;
        snprintf(buf, len, "the broker refused the batch (code %u): %s%s", c->refuse_code, which,
                 text);
        break;
    }
    run->refusal_code = code;
    run->refusal_has_request = named;
    run->refusal_batch = b;
    run->refusal_slot = slot;
    snprintf(run->refusal_text, sizeof run->refusal_text, "%s", text);
    return code;
}

/* Chunks of b still waiting for an answer that nobody waits on (submit
 * returned first) are waited on again by a later submit or evaluate. */
static size_t s_reattach(fitfarm_run_t *run, const fitfarm_batch_t *b)
{
    size_t n = 0;
    for (size_t i = 0; i < run->n_chunks; i++)
        if (run->chunks[i].batch == b && run->chunks[i].detached && !run->chunks[i].answered) {
            run->chunks[i].detached = 0;
            n++;
        }
    return n;
}

int client_run_submit_start(fitfarm_run_t *run, fitfarm_batch_t *b, int streaming, int again)
{
    client_core_t *cl = run ? run->core : NULL;
    if (!cl || !b)
        return cl ? client_core_fail(cl, FITFARM_EINVAL, "no batch given") : FITFARM_EINVAL;
    if (b->run && b->run != run)
        return client_core_fail(cl, FITFARM_EINVAL, "the batch was submitted through another run");
    int first = b->slots == NULL;
    if (!b->slots) {
        if (client_batch_prepare(b) != FITFARM_OK)
            return client_core_fail(cl, FITFARM_ENOMEM, "out of memory preparing the batch");
        if (run->n_batches == run->cap_batches) {
            size_t cap = run->cap_batches ? run->cap_batches * 2 : 16;
            fitfarm_batch_t **v = realloc(run->batches, cap * sizeof *v);
            if (!v) {
                free(b->slots);
                b->slots = NULL;
                return client_core_fail(cl, FITFARM_ENOMEM, "out of memory submitting");
            }
            run->batches = v;
            run->cap_batches = cap;
        }
        b->tag_base = run->next_tag;
        run->next_tag += (uint64_t)b->n * b->replicates;
        b->streaming = streaming;
        b->run = run;
        run->batches[run->n_batches++] = b;
    } else if (!b->run) {
        return client_core_fail(cl, FITFARM_EINVAL, "the batch's run was destroyed");
    } else if (b->streaming != streaming) {
        return client_core_fail(cl, FITFARM_EINVAL, "a batch is either evaluated or submitted, "
                           "not both");
    }
    size_t sent = 0;
    int rc = s_send_slots(run, b, CLIENT_SLOT_UNSENT, 0, &sent);
    if (rc == FITFARM_OK && sent == 0 && !first && s_reattach(run, b) == 0 && !again)
        return client_core_fail(cl, FITFARM_EINVAL, "the batch was already submitted");
    if (rc == FITFARM_OK)
        run->stats.submitted += first ? (uint64_t)b->n * b->replicates : 0;
    return rc;
}

int client_run_submit_pending(const fitfarm_run_t *run, const fitfarm_batch_t *b)
{
    for (size_t i = 0; i < run->n_chunks; i++)
        if (run->chunks[i].batch == b && !run->chunks[i].background &&
            !run->chunks[i].detached && !run->chunks[i].answered)
            return 1;
    return 0;
}

int client_run_submit_finish(fitfarm_run_t *run, fitfarm_batch_t *b, int rc)
{
    client_core_t *cl = run->core;
    /* Report the first refusal; forget answered and (on failure) pending chunks.
     * Unanswered slots go back to UNSENT so a later submit sends them again. */
    for (size_t i = 0; i < run->n_chunks; i++) {
        client_chunk_t *c = &run->chunks[i];
        if (c->batch != b || c->background)
            continue;
        if (c->answered == 2 && rc == FITFARM_OK) {
            char sentence[CLIENT_ERR_BYTES];
            rc = s_refusal(run, b, c, sentence, sizeof sentence);
            client_core_fail(cl, rc, "%s", sentence);
        }
        if (!c->answered && (rc == FITFARM_OK || rc == FITFARM_ETIMEDOUT)) {
            c->detached = 1; /* still on its way: answered in the background */
            continue;
        }
        if (!c->answered)
            for (uint32_t k = 0; k < c->n_slots; k++)
                if (b->slots[c->slots[k]].state == CLIENT_SLOT_SENT)
                    b->slots[c->slots[k]].state = CLIENT_SLOT_UNSENT;
    }
    size_t w = 0;
    for (size_t i = 0; i < run->n_chunks; i++) {
        client_chunk_t *c = &run->chunks[i];
        if (c->batch == b && !c->background && !c->detached)
            s_chunk_free(c);
        else
            run->chunks[w++] = *c;
    }
    run->n_chunks = w;
    return rc;
}

int client_run_take_async(fitfarm_run_t *run)
{
    int rc = run->async_rc;
    if (rc != 0) {
        client_core_fail(run->core, rc, "%s", run->async_err);
        run->async_rc = 0;
    }
    return rc;
}

int client_run_next_ready(fitfarm_run_t *run, fitfarm_result_t *out)
{
    if (run->ready_len == 0)
        return 0;
    client_ready_t e = run->ready[run->ready_head];
    run->ready_head = (run->ready_head + 1) % run->ready_cap;
    run->ready_len--;
    client_batch_fill(e.batch, e.slot, out);
    return 1;
}

int client_runs_on_message(client_core_t *core, const proto_msg_t *msg)
{
    fitfarm_run_t *run;
    switch (msg->type) {
    case PROTO_RESULTS:
        run = client_run_find(core, msg->u.results.run_id);
        if (run)
            s_on_results(run, &msg->u.results);
        return 1;
    case PROTO_ACCEPTED:
        s_on_answer(core, msg->u.accepted.batch_tag, NULL);
        return 1;
    case PROTO_REFUSED:
        s_on_answer(core, msg->u.refused.batch_tag, &msg->u.refused);
        return 1;
    default:
        return 0;
    }
}
