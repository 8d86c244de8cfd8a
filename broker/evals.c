/* evals.c: the evaluation table (see evals.h for the job lifecycle and the
 * memory bound). Owns the evaluations, their genomes until DONE (evals.h),
 * their waiter arrays and results, the LRU list of DONE ones, and the orphan
 * records. Does not own plugins, params or runs; does not read the store
 * (cache.c does, on a miss). */
#include "evals.h"

#include <assert.h>
#include <stdlib.h>
#include <string.h>

#include "broker.h"
#include "common/alloc.h"

typedef struct {
    uint64_t job_id; /* the table key points here */
    broker_eval_t *eval;
} s_orphan_t;

static const void *s_content_key(const void *value, size_t *len)
{
    const broker_eval_t *e = value;
    *len = PROTO_KEY_BYTES;
    return e->key;
}

static const void *s_job_key(const void *value, size_t *len)
{
    const broker_eval_t *e = value;
    *len = sizeof e->live->job_id;
    return &e->live->job_id;
}

static const void *s_orphan_key(const void *value, size_t *len)
{
    const s_orphan_t *o = value;
    *len = sizeof o->job_id;
    return &o->job_id;
}

void broker_evals_init(broker_evals_t *self)
{
    self->by_key = broker_table_new(s_content_key);
    self->by_job = broker_table_new(s_job_key);
    self->orphans = broker_table_new(s_orphan_key);
    self->n_done = 0;
    self->fresh_head = NULL;
    self->lru_head = self->lru_tail = NULL;
    self->n_cached = self->cached_bytes = self->peak_cached = 0;
    self->n_done_ram = self->peak_done_ram = self->evictions = self->store_hits = 0;
    self->orphan_sweep_at = 1024;
    broker_evals_set_caps(self, 0, 0);
}

/* Where an empty genome points: never NULL while QUEUED or RUNNING (the
 * encoder copies from it), never freed. */
static uint8_t s_empty_genome[1];

static void s_set_genome(broker_eval_live_t *live, const uint8_t *genome, uint32_t genome_len)
{
    live->genome_len = genome_len;
    live->genome = genome_len ? common_xmemdup(genome, genome_len) : s_empty_genome;
}

static void s_drop_genome(broker_eval_live_t *live)
{
    if (live->genome != s_empty_genome)
        free(live->genome);
    live->genome = NULL;
    live->genome_len = 0;
}

static void s_free_live(broker_eval_t *e)
{
    if (!e->live)
        return;
    s_drop_genome(e->live);
    free(e->live->more);
    free(e->live);
    e->live = NULL;
}

static void s_free_fitness(broker_eval_t *e)
{
    if (e->n_fitness > 1)
        free(e->fit.many);
    e->n_fitness = 0;
}

static void s_free(broker_eval_t *e)
{
    s_free_live(e);
    s_free_fitness(e);
    free(e->error);
    free(e);
}

/* e's live part, made empty for a settled DONE one that something points
 * at again (a re-evaluation). */
static broker_eval_live_t *s_live(broker_eval_t *e)
{
    if (!e->live)
        e->live = common_xcalloc(1, sizeof *e->live);
    return e->live;
}

/* A new QUEUED evaluation with its live part and a copy of genome. */
static broker_eval_t *s_alloc(const uint8_t key[PROTO_KEY_BYTES], const uint8_t *genome,
                              uint32_t genome_len)
{
    broker_eval_t *e = common_xcalloc(1, sizeof *e);
    e->live = common_xcalloc(1, sizeof *e->live);
    memcpy(e->key, key, PROTO_KEY_BYTES);
    e->state = BROKER_EVAL_QUEUED;
    s_set_genome(e->live, genome, genome_len);
    return e;
}

void broker_evals_fini(broker_evals_t *self)
{
    size_t cur = 0;
    s_orphan_t *o;
    while ((o = broker_table_next(self->orphans, &cur)))
        free(o);
    cur = 0;
    broker_eval_t *e;
    while ((e = broker_table_next(self->by_key, &cur)))
        s_free(e);
    while ((e = self->fresh_head)) {
        self->fresh_head = e->live->fresh_next;
        s_free(e);
    }
    broker_table_destroy(&self->by_key);
    broker_table_destroy(&self->by_job);
    broker_table_destroy(&self->orphans);
}

broker_eval_t *broker_evals_get(const broker_evals_t *self, const uint8_t key[PROTO_KEY_BYTES])
{
    return broker_table_get(self->by_key, key, PROTO_KEY_BYTES);
}

broker_eval_t *broker_evals_new(broker_evals_t *self, const uint8_t key[PROTO_KEY_BYTES],
                                broker_plugin_t *plugin, const char *params, uint64_t seed,
                                const uint8_t *genome, uint32_t genome_len)
{
    broker_eval_t *e = s_alloc(key, genome, genome_len);
    e->plugin = plugin;
    e->params = params;
    e->seed = seed;
    void *prev = broker_table_put(self->by_key, e->key, PROTO_KEY_BYTES, e);
    assert(prev == NULL);
    (void)prev;
    return e;
}

static broker_eval_t *s_fresh_copy(broker_evals_t *self, const broker_eval_t *like,
                                   const uint8_t *genome, uint32_t genome_len)
{
    broker_eval_t *e = s_alloc(like->key, genome, genome_len);
    e->fresh = 1;
    e->plugin = like->plugin;
    e->params = like->params;
    e->seed = like->seed;
    e->live->fresh_next = self->fresh_head;
    if (self->fresh_head)
        self->fresh_head->live->fresh_prev = e;
    self->fresh_head = e;
    return e;
}

broker_eval_t *broker_evals_new_fresh(broker_evals_t *self, broker_eval_t *origin,
                                      const uint8_t *genome, uint32_t genome_len)
{
    assert(origin->state == BROKER_EVAL_DONE && broker_eval_again(origin) == NULL &&
           !origin->fresh);
    broker_eval_t *e = s_fresh_copy(self, origin, genome, genome_len);
    e->live->origin = origin;
    s_live(origin)->again = e;
    broker_evals_settle(self, origin); /* pinned while e is in flight */
    return e;
}

/* ---- the bounded result cache ------------------------------------------- */

void broker_evals_set_caps(broker_evals_t *self, uint64_t entries, uint64_t bytes)
{
    self->cap_entries = entries ? entries : BROKER_DEFAULT_CACHE_ENTRIES;
    self->cap_bytes = bytes ? bytes : BROKER_DEFAULT_CACHE_BYTES;
}

/* What one cached result costs: the evaluation, its result, and roughly the
 * allocator's and the key table's share (tests/bench/bench_eval_memory
 * counts the real figure with the allocator: 168-185 bytes beyond one
 * objective's fitness on 2026-12-04). */
static uint64_t s_bytes(const broker_eval_t *e)
{
    return sizeof *e + (e->n_fitness > 1 ? (uint64_t)e->n_fitness * sizeof(double) + 16 : 0) +
           (e->error ? strlen(e->error) + 1 + 16 : 0) + 8 + 32;
}

static void s_lru_unlink(broker_evals_t *self, broker_eval_t *e)
{
    if (!e->in_lru)
        return;
    if (e->prev)
        e->prev->next = e->next;
    else
        self->lru_head = e->next;
    if (e->next)
        e->next->prev = e->prev;
    else
        self->lru_tail = e->prev;
    e->prev = e->next = NULL;
    e->in_lru = 0;
    self->n_cached--;
    self->cached_bytes -= s_bytes(e);
}

static void s_lru_push(broker_evals_t *self, broker_eval_t *e)
{
    assert(!e->in_lru && e->prev == NULL && e->next == NULL);
    e->next = self->lru_head;
    if (self->lru_head)
        self->lru_head->prev = e;
    else
        self->lru_tail = e;
    self->lru_head = e;
    e->in_lru = 1;
    self->n_cached++;
    self->cached_bytes += s_bytes(e);
}

/* Drops least recently used results past the caps; never keep. */
static void s_evict(broker_evals_t *self, const broker_eval_t *keep)
{
    while ((self->n_cached > self->cap_entries || self->cached_bytes > self->cap_bytes) &&
           self->lru_tail && self->lru_tail != keep) {
        broker_eval_t *e = self->lru_tail;
        s_lru_unlink(self, e);
        void *was = broker_table_delete(self->by_key, e->key, PROTO_KEY_BYTES);
        assert(was == e);
        (void)was;
        self->n_done_ram--;
        self->evictions++;
        s_free(e);
    }
}

void broker_evals_settle(broker_evals_t *self, broker_eval_t *e)
{
    int done = e->state == BROKER_EVAL_DONE;
    if (done && e->fresh && e->live->pins == 0 && e->live->origin == NULL) {
        /* Answered (deliveries hold copies): nothing points here any more. */
        broker_eval_live_t *live = e->live;
        if (live->fresh_prev)
            live->fresh_prev->live->fresh_next = live->fresh_next;
        else
            self->fresh_head = live->fresh_next;
        if (live->fresh_next)
            live->fresh_next->live->fresh_prev = live->fresh_prev;
        s_free(e);
        return;
    }
    if (done && !e->fresh && e->live && e->live->n_waiters == 0 && e->live->pins == 0 &&
        e->live->again == NULL) {
        /* Answered and unpinned: from here on it is a cached result, which
         * needs none of the live part. */
        assert(e->live->job_id == 0 && e->live->worker == NULL && e->live->charged == NULL);
        s_free_live(e);
    }
    int evictable = done && !e->fresh && e->live == NULL;
    if (evictable && !e->in_lru) {
        s_lru_push(self, e);
        s_evict(self, e);
    } else if (!evictable && e->in_lru) {
        s_lru_unlink(self, e);
    }
    /* Peaks as settled: one result more than the cap only between a result
     * and this call. */
    if (self->n_cached > self->peak_cached)
        self->peak_cached = self->n_cached;
    if (self->n_done_ram > self->peak_done_ram)
        self->peak_done_ram = self->n_done_ram;
}

void broker_evals_touch(broker_evals_t *self, broker_eval_t *e)
{
    if (!e->in_lru || self->lru_head == e)
        return;
    s_lru_unlink(self, e);
    s_lru_push(self, e);
}

void broker_eval_add_waiter(broker_eval_t *e, struct broker_run *run, uint64_t tag, uint64_t seed)
{
    broker_eval_live_t *live = e->live;
    assert(live && e->state != BROKER_EVAL_DONE);
    broker_waiter_t w = {run, tag, seed};
    if (live->n_waiters == 0) {
        live->w0 = w;
    } else {
        uint32_t i = live->n_waiters - 1;
        if (i == live->cap_more) {
            live->cap_more = live->cap_more ? live->cap_more * 2 : 4;
            live->more = common_xrealloc(live->more, live->cap_more, sizeof *live->more);
        }
        live->more[i] = w;
    }
    live->n_waiters++;
}

broker_waiter_t *broker_eval_waiter(broker_eval_t *e, uint32_t i)
{
    assert(e->live && i < e->live->n_waiters);
    return i == 0 ? &e->live->w0 : &e->live->more[i - 1];
}

void broker_eval_clear_waiters(broker_eval_t *e)
{
    if (!e->live)
        return;
    free(e->live->more);
    e->live->more = NULL;
    e->live->cap_more = 0;
    e->live->n_waiters = 0;
}

void broker_evals_bind_job(broker_evals_t *self, broker_eval_t *e, uint64_t job_id)
{
    assert(e->live->job_id == 0 && job_id != 0);
    e->live->job_id = job_id;
    broker_table_put(self->by_job, &e->live->job_id, sizeof e->live->job_id, e);
}

void broker_evals_unbind_job(broker_evals_t *self, broker_eval_t *e)
{
    if (!e->live || e->live->job_id == 0)
        return;
    void *was = broker_table_delete(self->by_job, &e->live->job_id, sizeof e->live->job_id);
    assert(was == e);
    (void)was;
    e->live->job_id = 0;
}

broker_eval_t *broker_evals_by_job(const broker_evals_t *self, uint64_t job_id)
{
    return broker_table_get(self->by_job, &job_id, sizeof job_id);
}

/* Drops orphan records whose evaluation is DONE: a late result for them
 * would be ignored, and they would pin the evaluation in RAM for ever. */
static void s_orphan_sweep(broker_evals_t *self)
{
    size_t n = broker_table_size(self->orphans), k = 0, cur = 0;
    uint64_t *ids = common_xcalloc(n ? n : 1, sizeof *ids);
    s_orphan_t *o;
    while ((o = broker_table_next(self->orphans, &cur)))
        if (o->eval->state == BROKER_EVAL_DONE)
            ids[k++] = o->job_id;
    for (size_t i = 0; i < k; i++) {
        o = broker_table_delete(self->orphans, &ids[i], sizeof ids[i]);
        broker_eval_t *e = o->eval;
        free(o);
        e->live->pins--;
        broker_evals_settle(self, e);
    }
    free(ids);
    n = broker_table_size(self->orphans);
    self->orphan_sweep_at = n * 2 > 1024 ? n * 2 : 1024;
}

void broker_evals_orphan_add(broker_evals_t *self, uint64_t job_id, broker_eval_t *e)
{
    if (broker_table_size(self->orphans) >= self->orphan_sweep_at)
        s_orphan_sweep(self);
    s_orphan_t *o = common_xmalloc(sizeof *o);
    o->job_id = job_id;
    o->eval = e;
    e->live->pins++; /* a dispatched evaluation: it has its live part */
    s_orphan_t *prev = broker_table_put(self->orphans, &o->job_id, sizeof o->job_id, o);
    if (prev) { /* job ids are unique; kept safe all the same */
        prev->eval->live->pins--;
        broker_evals_settle(self, prev->eval);
    }
    free(prev);
}

broker_eval_t *broker_evals_orphan_take(broker_evals_t *self, uint64_t job_id)
{
    s_orphan_t *o = broker_table_delete(self->orphans, &job_id, sizeof job_id);
    if (!o)
        return NULL;
    broker_eval_t *e = o->eval;
    free(o);
    assert(e->live && e->live->pins > 0); /* pinned: its live part stays */
    e->live->pins--;
    return e;
}

void broker_eval_set_result(broker_evals_t *self, broker_eval_t *e, uint32_t status,
                            const double *fitness, uint32_t n_fitness, const char *error,
                            const broker_provenance_t *prov)
{
    assert(e->state != BROKER_EVAL_DONE && e->live->job_id == 0 && e->live->worker == NULL);
    assert(e->live->charged == NULL); /* quota.c charged the genome's length; released first */
    assert(n_fitness <= PROTO_MAX_OBJECTIVES);
    s_drop_genome(e->live);
    s_free_fitness(e);
    free(e->error);
    e->error = NULL;
    e->n_fitness = (uint8_t)n_fitness;
    if (n_fitness == 1)
        e->fit.one = fitness[0];
    else if (n_fitness > 1)
        e->fit.many = common_xmemdup(fitness, (size_t)n_fitness * sizeof *fitness);
    else if (status == PROTO_STATUS_TIMEOUT)
        e->fit.timeout_ms = e->live->timeout_ms;
    if (error && *error)
        e->error = common_xstrdup(error);
    e->status = (uint8_t)status;
    e->worker = prov ? prov->worker : "";
    e->host = prov ? prov->host : "";
    e->cpu_seconds = prov ? prov->cpu_seconds : 0;
    e->peak_rss_kb = prov ? (uint32_t)(prov->peak_rss_kb < UINT32_MAX ? prov->peak_rss_kb
                                                                       : UINT32_MAX)
                          : 0;
    e->finished_at = prov ? prov->finished_at : 0;
    e->state = BROKER_EVAL_DONE;
    e->prev = e->next = NULL;
    self->n_done++;
    if (!e->fresh)
        self->n_done_ram++;
}

int broker_eval_check(const broker_evals_t *self, const broker_eval_t *e)
{
    const broker_eval_live_t *live = e->live;
    if (!live && (e->state != BROKER_EVAL_DONE || e->fresh))
        return 0; /* only a settled cached result has none */
    if (e->fresh) {
        /* Not in by_key; linked from its origin exactly while in flight. */
        if (e->state != BROKER_EVAL_DONE &&
            (!live->origin || broker_eval_again(live->origin) != e))
            return 0;
        if (e->state == BROKER_EVAL_DONE && live->origin)
            return 0;
    } else if (broker_evals_get(self, e->key) != e) {
        return 0;
    }
    if (live && ((e->state == BROKER_EVAL_DONE) != (live->genome == NULL) ||
                 (live->genome == NULL && live->genome_len != 0)))
        return 0; /* a genome exactly while it may be sent */
    switch (e->state) {
    case BROKER_EVAL_QUEUED:
        return live->job_id == 0 && live->worker == NULL && live->n_waiters >= 1 &&
               live->home != NULL;
    case BROKER_EVAL_RUNNING:
        return live->job_id != 0 && broker_evals_by_job(self, live->job_id) == e &&
               live->worker != NULL && live->n_waiters >= 1;
    case BROKER_EVAL_DONE:
        return (!live || (live->job_id == 0 && live->worker == NULL && live->n_waiters == 0)) &&
               (!e->in_lru || (!e->fresh && !live)); /* a settled one has none */
    default:
        return 0;
    }
}
