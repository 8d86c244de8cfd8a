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
    *len = sizeof e->job_id;
    return &e->job_id;
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

static void s_set_genome(broker_eval_t *e, const uint8_t *genome, uint32_t genome_len)
{
    e->genome_len = genome_len;
    e->genome = genome_len ? common_xmemdup(genome, genome_len) : s_empty_genome;
}

static void s_drop_genome(broker_eval_t *e)
{
    if (e->genome != s_empty_genome)
        free(e->genome);
    e->genome = NULL;
    e->genome_len = 0;
}

static void s_free(broker_eval_t *e)
{
    s_drop_genome(e);
    free(e->more);
    free(e->fitness);
    free(e->error);
    free(e);
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
        self->fresh_head = e->fresh_next;
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
    broker_eval_t *e = common_xcalloc(1, sizeof *e);
    memcpy(e->key, key, PROTO_KEY_BYTES);
    e->state = BROKER_EVAL_QUEUED;
    e->plugin = plugin;
    e->params = params;
    e->seed = seed;
    s_set_genome(e, genome, genome_len);
    void *prev = broker_table_put(self->by_key, e->key, PROTO_KEY_BYTES, e);
    assert(prev == NULL);
    (void)prev;
    return e;
}

static broker_eval_t *s_fresh_copy(broker_evals_t *self, const broker_eval_t *like,
                                   const uint8_t *genome, uint32_t genome_len)
{
    broker_eval_t *e = common_xcalloc(1, sizeof *e);
    memcpy(e->key, like->key, PROTO_KEY_BYTES);
    e->state = BROKER_EVAL_QUEUED;
    e->fresh = 1;
    e->plugin = like->plugin;
    e->params = like->params;
    e->seed = like->seed;
    s_set_genome(e, genome, genome_len);
    e->fresh_next = self->fresh_head;
    if (self->fresh_head)
        self->fresh_head->fresh_prev = e;
    self->fresh_head = e;
    return e;
}

broker_eval_t *broker_evals_new_fresh(broker_evals_t *self, broker_eval_t *origin,
                                      const uint8_t *genome, uint32_t genome_len)
{
    assert(origin->state == BROKER_EVAL_DONE && origin->again == NULL && !origin->fresh);
    broker_eval_t *e = s_fresh_copy(self, origin, genome, genome_len);
    e->origin = origin;
    origin->again = e;
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
 * allocator's and the key table's share. */
static uint64_t s_bytes(const broker_eval_t *e)
{
    return sizeof *e + e->genome_len + (uint64_t)e->n_fitness * sizeof(double) +
           (e->error ? strlen(e->error) + 1 : 0) + 64;
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
    if (done && e->fresh && e->pins == 0 && e->origin == NULL) {
        /* Answered (deliveries hold copies): nothing points here any more. */
        if (e->fresh_prev)
            e->fresh_prev->fresh_next = e->fresh_next;
        else
            self->fresh_head = e->fresh_next;
        if (e->fresh_next)
            e->fresh_next->fresh_prev = e->fresh_prev;
        s_free(e);
        return;
    }
    int evictable = done && !e->fresh && e->pins == 0 && e->again == NULL;
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
    broker_waiter_t w = {run, tag, seed};
    if (e->n_waiters == 0) {
        e->w0 = w;
    } else {
        uint32_t i = e->n_waiters - 1;
        if (i == e->cap_more) {
            e->cap_more = e->cap_more ? e->cap_more * 2 : 4;
            e->more = common_xrealloc(e->more, e->cap_more, sizeof *e->more);
        }
        e->more[i] = w;
    }
    e->n_waiters++;
}

broker_waiter_t *broker_eval_waiter(broker_eval_t *e, uint32_t i)
{
    assert(i < e->n_waiters);
    return i == 0 ? &e->w0 : &e->more[i - 1];
}

void broker_eval_clear_waiters(broker_eval_t *e)
{
    free(e->more);
    e->more = NULL;
    e->cap_more = 0;
    e->n_waiters = 0;
}

void broker_evals_bind_job(broker_evals_t *self, broker_eval_t *e, uint64_t job_id)
{
    assert(e->job_id == 0 && job_id != 0);
    e->job_id = job_id;
    broker_table_put(self->by_job, &e->job_id, sizeof e->job_id, e);
}

void broker_evals_unbind_job(broker_evals_t *self, broker_eval_t *e)
{
    if (e->job_id == 0)
        return;
    void *was = broker_table_delete(self->by_job, &e->job_id, sizeof e->job_id);
    assert(was == e);
    (void)was;
    e->job_id = 0;
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
        e->pins--;
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
    e->pins++;
    s_orphan_t *prev = broker_table_put(self->orphans, &o->job_id, sizeof o->job_id, o);
    if (prev) { /* job ids are unique; kept safe all the same */
        prev->eval->pins--;
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
    assert(e->pins > 0);
    e->pins--;
    return e;
}

void broker_eval_set_result(broker_evals_t *self, broker_eval_t *e, uint32_t status,
                            const double *fitness, uint32_t n_fitness, const char *error,
                            const broker_provenance_t *prov)
{
    assert(e->state != BROKER_EVAL_DONE && e->job_id == 0 && e->worker == NULL);
    assert(e->charged == NULL); /* quota.c charged the genome's length; released first */
    s_drop_genome(e);
    free(e->fitness);
    free(e->error);
    e->fitness = NULL;
    e->error = NULL;
    e->n_fitness = n_fitness;
    if (n_fitness)
        e->fitness = common_xmemdup(fitness, (size_t)n_fitness * sizeof *fitness);
    if (error && *error)
        e->error = common_xstrdup(error);
    e->status = (uint8_t)status;
    e->prov = prov ? *prov : (broker_provenance_t){.worker = "", .host = ""};
    e->state = BROKER_EVAL_DONE;
    e->prev = e->next = NULL;
    self->n_done++;
    if (!e->fresh)
        self->n_done_ram++;
}

int broker_eval_check(const broker_evals_t *self, const broker_eval_t *e)
{
    if (e->fresh) {
        /* Not in by_key; linked from its origin exactly while in flight. */
        if (e->state != BROKER_EVAL_DONE && (!e->origin || e->origin->again != e))
            return 0;
        if (e->state == BROKER_EVAL_DONE && e->origin)
            return 0;
    } else if (broker_evals_get(self, e->key) != e) {
        return 0;
    }
    if ((e->state == BROKER_EVAL_DONE) != (e->genome == NULL) ||
        (e->genome == NULL && e->genome_len != 0))
        return 0; /* a genome exactly while it may be sent */
    switch (e->state) {
    case BROKER_EVAL_QUEUED:
        return e->job_id == 0 && e->worker == NULL && e->n_waiters >= 1 && e->home != NULL;
    case BROKER_EVAL_RUNNING:
        return e->job_id != 0 && broker_evals_by_job(self, e->job_id) == e && e->worker != NULL &&
               e->n_waiters >= 1;
    case BROKER_EVAL_DONE:
        return e->job_id == 0 && e->worker == NULL && e->n_waiters == 0 &&
               (!e->in_lru || (!e->fresh && e->pins == 0 && e->again == NULL));
    default:
        return 0;
    }
}
