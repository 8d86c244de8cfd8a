/* runs.c: runs, their queues, round-robin fairness and delivery bookkeeping
 * with its caps (see runs.h). Owns run records, queue arrays, outboxes and
 * delivery nodes (recycled through a free list: one per result in flight) and
 * the copies of results they hold. Borrows evaluations. Does not read the
 * store (backlog.c pages owed results back). */
#include "runs.h"

#include <assert.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "broker.h"
#include "common/alloc.h"
#include "common/log.h"
#include "key.h"
#include "msg.h"

static const void *s_id_key(const void *value, size_t *len)
{
    const broker_run_t *run = value;
    *len = strlen(run->id);
    return run->id;
}

static const void *s_tag_key(const void *value, size_t *len)
{
    const broker_delivery_t *d = value;
    *len = sizeof d->tag;
    return &d->tag;
}

void broker_runs_init(broker_runs_t *self)
{
    memset(self, 0, sizeof *self);
    self->by_id = broker_table_new(s_id_key);
    broker_runs_set_caps(self, 0, 0);
}

void broker_runs_set_caps(broker_runs_t *self, uint64_t per_run, uint64_t total)
{
    self->max_per_run = per_run ? per_run : BROKER_DEFAULT_UNACKED_PER_RUN;
    self->max_total = total ? total : BROKER_DEFAULT_UNACKED;
}

static void s_delivery_free(broker_delivery_t *d)
{
    free(d->fitness);
    free(d->error);
    d->fitness = NULL;
    d->error = NULL;
}

static void s_run_free(broker_run_t *run)
{
    size_t c2 = 0;
    broker_delivery_t *d;
    while ((d = broker_table_next(run->unacked, &c2))) {
        s_delivery_free(d);
        free(d);
    }
    broker_table_destroy(&run->unacked);
    for (uint32_t i = 0; i < run->n_outbox; i++)
        s_delivery_free(&run->outbox[i]);
    free(run->outbox);
    free(run->queues);
    free(run->id);
    free(run);
}

int broker_runs_idle(const broker_run_t *run)
{
    return run->outstanding == 0 && run->n_queued == 0 && run->n_running == 0 &&
           run->n_outbox == 0 && broker_table_size(run->unacked) == 0 && !run->in_spill &&
           !run->spill_linked && !run->dirty && !run->parked && !run->in_rr &&
           run->genome_bytes == 0;
}

void broker_runs_drop(broker_runs_t *self, broker_run_t *run)
{
    assert(broker_runs_idle(run));
    broker_run_t *gone = broker_table_delete(self->by_id, run->id, strlen(run->id));
    assert(gone == run);
    (void)gone;
    s_run_free(run);
}

void broker_runs_fini(broker_runs_t *self)
{
    size_t cur = 0;
    broker_run_t *run;
    while ((run = broker_table_next(self->by_id, &cur))) {
        s_run_free(run);
    }
    broker_table_destroy(&self->by_id);
    while (self->free_nodes) {
        broker_delivery_t *d = self->free_nodes;
        self->free_nodes = d->free_next;
        free(d);
    }
    memset(self, 0, sizeof *self);
}

broker_run_t *broker_runs_get(const broker_runs_t *self, const char *id)
{
    return broker_table_get(self->by_id, id, strlen(id));
}

broker_run_t *broker_runs_new(broker_runs_t *self, const char *id, uint64_t seed,
                              uint32_t seed_mode, const char *owner)
{
    assert(!broker_runs_get(self, id));
    broker_run_t *run = common_xcalloc(1, sizeof *run);
    run->id = common_xstrdup(id);
    run->seed = seed;
    run->seed_mode = seed_mode;
    snprintf(run->owner, sizeof run->owner, "%s", owner ? owner : "");
    run->unacked = broker_table_new(s_tag_key);
    broker_table_put(self->by_id, run->id, strlen(run->id), run);
    return run;
}

void broker_run_set_client(broker_run_t *run, const uint8_t *rid, size_t rid_len,
                           const char *key)
{
    assert(rid_len <= BROKER_RID_MAX);
    memcpy(run->client, rid, rid_len);
    run->client_len = (uint8_t)rid_len;
    snprintf(run->client_key, sizeof run->client_key, "%s", key ? key : "");
}

/* ---- the ring of runs with queued work ---------------------------------- */

static void s_ring_insert(broker_runs_t *self, broker_run_t *run)
{
    if (run->in_rr)
        return;
    if (!self->rr_cursor) {
        run->rr_prev = run->rr_next = run;
        self->rr_cursor = run;
    } else {
        /* Just before the cursor: a newcomer waits for the current round. */
        broker_run_t *c = self->rr_cursor;
        run->rr_next = c;
        run->rr_prev = c->rr_prev;
        c->rr_prev->rr_next = run;
        c->rr_prev = run;
    }
    run->in_rr = 1;
    self->n_active++;
}

static void s_ring_remove(broker_runs_t *self, broker_run_t *run)
{
    if (!run->in_rr)
        return;
    if (run->rr_next == run) {
        self->rr_cursor = NULL;
    } else {
        run->rr_prev->rr_next = run->rr_next;
        run->rr_next->rr_prev = run->rr_prev;
        if (self->rr_cursor == run)
            self->rr_cursor = run->rr_next;
    }
    run->rr_prev = run->rr_next = NULL;
    run->in_rr = 0;
    self->n_active--;
}

/* ---- queues ------------------------------------------------------------- */

static broker_queue_t *s_queue(broker_run_t *run, broker_plugin_t *plugin, int create)
{
    for (uint32_t i = 0; i < run->n_queues; i++)
        if (run->queues[i].plugin == plugin)
            return &run->queues[i];
    if (!create)
        return NULL;
    run->queues = common_xrealloc(run->queues, (size_t)run->n_queues + 1, sizeof *run->queues);
    broker_queue_t *q = &run->queues[run->n_queues++];
    q->plugin = plugin;
    q->head = q->tail = NULL;
    return q;
}

/* A run other than run, not parked, that waits for e; NULL if none. */
static broker_run_t *s_unparked_waiter(broker_eval_t *e, const broker_run_t *run)
{
    for (uint32_t i = 0; i < e->live->n_waiters; i++) {
        broker_run_t *r = broker_eval_waiter(e, i)->run;
        if (r != run && !r->parked)
            return r;
    }
    return NULL;
}

void broker_runs_enqueue(broker_runs_t *self, broker_run_t *run, broker_eval_t *e, int front)
{
    assert(e->state == BROKER_EVAL_QUEUED && e->prev == NULL && e->next == NULL);
    if (run->parked) {
        broker_run_t *to = s_unparked_waiter(e, run);
        if (to)
            run = to;
    }
    broker_queue_t *q = s_queue(run, e->plugin, 1);
    e->live->home = run;
    if (front) {
        e->live->qseq = (uint64_t)(-(++self->front_seq));
        e->next = q->head;
        if (q->head)
            q->head->prev = e;
        else
            q->tail = e;
        q->head = e;
    } else {
        e->live->qseq = (uint64_t)(++self->back_seq);
        e->prev = q->tail;
        if (q->tail)
            q->tail->next = e;
        else
            q->head = e;
        q->tail = e;
    }
    run->n_queued++;
    self->total_queued++;
    if (!run->parked)
        s_ring_insert(self, run);
}

uint64_t broker_runs_park(broker_runs_t *self, broker_run_t *run)
{
    if (run->parked)
        return 0;
    run->parked = 1;
    for (uint32_t i = 0; i < run->n_queues; i++) {
        broker_eval_t *e = run->queues[i].head;
        while (e) {
            broker_eval_t *next = e->next;
            broker_run_t *to = s_unparked_waiter(e, run);
            if (to) {
                broker_runs_unqueue(self, e);
                broker_runs_enqueue(self, to, e, 0);
            }
            e = next;
        }
    }
    s_ring_remove(self, run);
    return run->n_queued;
}

uint64_t broker_runs_unpark(broker_runs_t *self, broker_run_t *run)
{
    if (!run->parked)
        return 0;
    run->parked = 0;
    if (run->n_queued)
        s_ring_insert(self, run);
    return run->n_queued;
}

void broker_runs_adopt(broker_runs_t *self, broker_run_t *run, broker_eval_t *e)
{
    if (e->state != BROKER_EVAL_QUEUED || !e->live->home || !e->live->home->parked || run->parked)
        return;
    broker_runs_unqueue(self, e);
    broker_runs_enqueue(self, run, e, 0);
}

void broker_runs_unqueue(broker_runs_t *self, broker_eval_t *e)
{
    broker_run_t *run = e->live->home;
    broker_queue_t *q = s_queue(run, e->plugin, 0);
    assert(q && e->state == BROKER_EVAL_QUEUED);
    if (e->prev)
        e->prev->next = e->next;
    else
        q->head = e->next;
    if (e->next)
        e->next->prev = e->prev;
    else
        q->tail = e->prev;
    e->prev = e->next = NULL;
    assert(run->n_queued > 0 && self->total_queued > 0);
    run->n_queued--;
    self->total_queued--;
    if (run->n_queued == 0)
        s_ring_remove(self, run);
}

/* qseq as a signed order: front-pushed jobs are negative, newest front first. */
static int64_t s_order(const broker_eval_t *e)
{
    return (int64_t)e->live->qseq;
}

static broker_eval_t *s_oldest_for(broker_run_t *run, const broker_worker_t *w)
{
    broker_eval_t *best = NULL;
    for (uint32_t i = 0; i < run->n_queues; i++) {
        broker_queue_t *q = &run->queues[i];
        broker_eval_t *e = q->head;
        if (!e || !broker_worker_carries(w, q->plugin))
            continue;
        if (e->live->avoid_worker == w->serial && q->plugin->carriers > 1)
            continue;
        if (!best || s_order(e) < s_order(best))
            best = e;
    }
    return best;
}

broker_eval_t *broker_runs_pick(broker_runs_t *self, const broker_worker_t *w)
{
    /* Weighted round robin: the cursor stays on a run for `weight` picks
     * (SUBMIT.weight, 1 by default), then moves on; a run with nothing for
     * this worker gives up the rest of its turn. */
    for (uint32_t i = 0, n = self->n_active; i < n && self->rr_cursor; i++) {
        broker_run_t *run = self->rr_cursor;
        broker_eval_t *e = s_oldest_for(run, w);
        if (e) {
            if (++run->rr_served >= (run->weight ? run->weight : 1)) {
                run->rr_served = 0;
                self->rr_cursor = run->rr_next;
            }
            broker_runs_unqueue(self, e);
            return e;
        }
        run->rr_served = 0;
        self->rr_cursor = run->rr_next;
    }
    return NULL;
}

/* ---- delivery ----------------------------------------------------------- */

static uint64_t s_held(const broker_run_t *run)
{
    return run->n_outbox + broker_table_size(run->unacked);
}

uint64_t broker_runs_room(const broker_runs_t *self, const broker_run_t *run)
{
    uint64_t held = s_held(run);
    uint64_t a = held < self->max_per_run ? self->max_per_run - held : 0;
    uint64_t b = self->n_held < self->max_total ? self->max_total - self->n_held : 0;
    return a < b ? a : b;
}

static void s_spill_range(broker_runs_t *self, broker_run_t *run, int64_t from, int64_t to)
{
    if (!run->in_spill) {
        run->in_spill = 1;
        run->revisit = 0;
        run->spill_cur = from;
        run->spill_to = to;
        if (!run->spill_linked) {
            run->spill_linked = 1;
            run->spill_next = self->spill_head;
            self->spill_head = run;
        }
        return;
    }
    if (from < run->spill_cur) {
        run->revisit_from = run->revisit && run->revisit_from < from ? run->revisit_from : from;
        run->revisit = 1;
    }
    if (to > run->spill_to)
        run->spill_to = to;
}

void broker_runs_owe_all(broker_runs_t *self, broker_run_t *run)
{
    s_spill_range(self, run, INT64_MIN, INT64_MAX);
}

void broker_runs_spill_advance(broker_runs_t *self, broker_run_t *run, int64_t last, int end)
{
    (void)self;
    assert(run->in_spill);
    if (!end && last < INT64_MAX && last < run->spill_to) {
        run->spill_cur = last + 1;
    } else if (run->revisit) {
        run->revisit = 0;
        run->spill_cur = run->revisit_from;
    } else {
        run->in_spill = 0; /* unlinked by the backlog's next pass */
    }
}

/* Copies src (fitness and error borrowed) into the outbox; past a cap leaves
 * it to the store and returns 0. */
static int s_outbox_push(broker_runs_t *self, broker_run_t *run, const broker_delivery_t *src)
{
    if (broker_runs_room(self, run) == 0) {
        self->n_spilled++;
        s_spill_range(self, run, (int64_t)src->tag, (int64_t)src->tag);
        return 0;
    }
    if (run->n_outbox == run->cap_outbox) {
        run->cap_outbox = run->cap_outbox ? run->cap_outbox * 2 : 8;
        run->outbox = common_xrealloc(run->outbox, run->cap_outbox, sizeof *run->outbox);
    }
    broker_delivery_t *d = &run->outbox[run->n_outbox++];
    *d = *src;
    d->fitness = src->n_fitness ? common_xmemdup(src->fitness, (size_t)src->n_fitness *
                                                                   sizeof *src->fitness)
                                : NULL;
    d->error = src->error && *src->error ? common_xstrdup(src->error) : NULL;
    d->free_next = NULL;
    if (++self->n_held > self->peak_held)
        self->peak_held = self->n_held;
    if (!run->dirty) {
        run->dirty = 1;
        run->dirty_next = self->dirty_head;
        self->dirty_head = run;
    }
    return 1;
}

static int s_push_eval(broker_runs_t *self, broker_run_t *run, uint64_t tag, uint64_t seed,
                       const broker_eval_t *e, int cached)
{
    broker_delivery_t t = {.tag = tag,
                           .seed = seed,
                           .status = e->status,
                           .cached = (uint8_t)(cached != 0),
                           .fresh = e->fresh,
                           .n_fitness = e->n_fitness,
                           /* copied by s_outbox_push, never written */
                           .fitness = (double *)broker_eval_fitness(e),
                           .error = e->error,
                           .prov = broker_eval_provenance(e)};
    memcpy(t.key, e->key, PROTO_KEY_BYTES);
    return s_outbox_push(self, run, &t);
}

uint64_t broker_run_request_seed(const broker_run_t *run, const uint8_t *genome,
                                 uint32_t genome_len, uint32_t replicate)
{
    return proto_seed_derive(run->seed, (int)run->seed_mode, genome, genome_len, replicate);
}

/* One line per stretch of work: a run that went idle says what it did. */
static void s_log_idle(broker_runs_t *self, broker_run_t *run)
{
    LOG_INFO("run %s idle: %" PRIu64 " requests answered (%" PRIu64 " evaluated, %" PRIu64
             " cached, %" PRIu64 " failed)",
             run->id, run->p_answered, run->p_evaluated, run->p_cached, run->p_failed);
    run->p_answered = run->p_evaluated = run->p_cached = run->p_failed = 0;
    self->went_idle = 1;
}

void broker_runs_answer(broker_runs_t *self, broker_run_t *run, uint64_t tag, uint64_t seed,
                        broker_eval_t *e, int cached)
{
    assert(e->state == BROKER_EVAL_DONE || cached == 0);
    (void)s_push_eval(self, run, tag, seed, e, cached); /* past a cap: the store has it, acked = 0 */
    run->n_answered++;
    self->answered_total++;
    self->cached_total += cached != 0;
    if (run->answered_epoch != self->epoch) {
        run->answered_epoch = self->epoch; /* the earlier ones committed since */
        run->answered_since = 0;
    }
    run->answered_since++;
    run->p_answered++;
    if (cached) {
        run->p_cached++;
        run->n_cached++;
    }
    if (e->status != PROTO_STATUS_OK) {
        run->p_failed++;
        run->n_failed++;
    }
    assert(run->outstanding > 0);
    run->outstanding--;
    if (run->use) {
        assert(run->use->outstanding > 0);
        run->use->outstanding--;
    }
    if (run->outstanding == 0) {
        if (self->taking == run)
            run->idle_deferred = 1; /* said once, when the SUBMIT is taken */
        else
            s_log_idle(self, run);
    }
}

void broker_runs_take_begin(broker_runs_t *self, broker_run_t *run)
{
    self->taking = run;
    run->idle_deferred = 0;
}

void broker_runs_take_end(broker_runs_t *self, broker_run_t *run)
{
    self->taking = NULL;
    if (run->idle_deferred && run->outstanding == 0)
        s_log_idle(self, run);
    run->idle_deferred = 0;
}

int broker_runs_redeliver(broker_runs_t *self, broker_run_t *run, uint64_t tag, uint64_t seed,
                          broker_eval_t *e, int cached)
{
    assert(e->state == BROKER_EVAL_DONE);
    return s_push_eval(self, run, tag, seed, e, cached);
}

int broker_runs_redeliver_copy(broker_runs_t *self, broker_run_t *run,
                               const broker_delivery_t *src)
{
    return s_outbox_push(self, run, src);
}

size_t broker_runs_resend(broker_runs_t *self, broker_run_t *run)
{
    /* Moved, not copied: the held count does not change. */
    size_t n = broker_table_size(run->unacked), k = 0, cur = 0;
    if (n == 0)
        return 0;
    if (run->n_outbox + n > run->cap_outbox) {
        run->cap_outbox = (uint32_t)(run->n_outbox + n);
        run->outbox = common_xrealloc(run->outbox, run->cap_outbox, sizeof *run->outbox);
    }
    broker_delivery_t **nodes = common_xcalloc(n, sizeof *nodes);
    broker_delivery_t *d;
    while ((d = broker_table_next(run->unacked, &cur)))
        nodes[k++] = d;
    for (size_t i = 0; i < k; i++) {
        d = broker_table_delete(run->unacked, &nodes[i]->tag, sizeof nodes[i]->tag);
        run->outbox[run->n_outbox++] = *d;
        d->fitness = NULL;
        d->error = NULL;
        d->free_next = self->free_nodes;
        self->free_nodes = d;
    }
    free(nodes);
    if (!run->dirty) {
        run->dirty = 1;
        run->dirty_next = self->dirty_head;
        self->dirty_head = run;
    }
    return k;
}

broker_run_t *broker_runs_take_dirty(broker_runs_t *self)
{
    broker_run_t *run = self->dirty_head;
    if (run) {
        self->dirty_head = run->dirty_next;
        run->dirty_next = NULL;
        run->dirty = 0;
    }
    return run;
}

void broker_runs_sent(broker_runs_t *self, broker_run_t *run)
{
    for (uint32_t i = 0; i < run->n_outbox; i++) {
        broker_delivery_t *o = &run->outbox[i];
        broker_delivery_t *d = broker_table_get(run->unacked, &o->tag, sizeof o->tag);
        if (d) {
            s_delivery_free(d); /* the same tag sent again: one entry */
            assert(self->n_held > 0);
            self->n_held--;
        } else {
            d = self->free_nodes;
            if (d)
                self->free_nodes = d->free_next;
            else
                d = common_xmalloc(sizeof *d);
        }
        *d = *o; /* takes over fitness and error */
        d->free_next = NULL;
        broker_table_put(run->unacked, &d->tag, sizeof d->tag, d);
    }
    run->n_outbox = 0;
    /* The array goes too: kept, it cost every run that ever got a result
     * about 5 KB for good (64 entries), most of a run's RAM. */
    free(run->outbox);
    run->outbox = NULL;
    run->cap_outbox = 0;
}

int broker_runs_ack(broker_runs_t *self, broker_run_t *run, uint64_t tag)
{
    broker_delivery_t *d = broker_table_delete(run->unacked, &tag, sizeof tag);
    if (!d)
        return 0;
    s_delivery_free(d);
    assert(self->n_held > 0);
    self->n_held--;
    d->free_next = self->free_nodes;
    self->free_nodes = d;
    return 1;
}

uint64_t broker_runs_durable_answered(const broker_runs_t *self, const broker_run_t *run)
{
    return run->n_answered - (run->answered_epoch == self->epoch ? run->answered_since : 0);
}

int broker_runs_check(const broker_runs_t *self)
{
    uint32_t n = 0;
    uint64_t queued = 0;
    const broker_run_t *r = self->rr_cursor;
    if (r) {
        do {
            if (!r->in_rr || r->n_queued == 0 || r->rr_next->rr_prev != r)
                return 0;
            n++;
            r = r->rr_next;
        } while (r != self->rr_cursor && n <= self->n_active);
    }
    if (n != self->n_active)
        return 0;
    size_t cur = 0;
    broker_run_t *run;
    while ((run = broker_table_next(self->by_id, &cur))) {
        uint64_t in_queues = 0;
        for (uint32_t i = 0; i < run->n_queues; i++)
            for (const broker_eval_t *e = run->queues[i].head; e; e = e->next) {
                if (e->state != BROKER_EVAL_QUEUED || e->live->home != run)
                    return 0;
                in_queues++;
            }
        if (in_queues != run->n_queued ||
            (run->n_queued > 0 && !run->parked) != (run->in_rr != 0))
            return 0;
        queued += in_queues;
    }
    return queued == self->total_queued;
}
