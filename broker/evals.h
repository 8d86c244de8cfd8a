/* evals.h: the evaluation table, keyed by content key. One evaluation per key
 * ever seen: its state, its result once DONE (the in-memory result cache), the
 * requests (run, tag) waiting on it (single flight, also across runs), and the
 * retry accounting. Also the job-id index of dispatched evaluations, and the
 * "orphan" index of job ids whose worker was dropped (so a late result can
 * still be accepted once).
 *
 * Job lifecycle (one evaluation; "job" is one dispatch of it):
 *
 *   state    | where it sits                    | entered by                        | what holds
 *   ---------+----------------------------------+-----------------------------------+-------------------------------
 *   QUEUED   | its home run's queue for its     | broker_client_submit (new key, or | job_id 0, worker NULL,
 *            | plugin (runs.h)                  | DONE + no-cache); broker_dispatch_ | n_waiters >= 1, counted in
 *            |                                  | requeue (worker dropped: front;   | home->n_queued
 *            |                                  | CRASHED/TIMEOUT under --attempts) |
 *   RUNNING  | its worker's held list; job-id   | broker_dispatch_turn (fresh job   | job_id != 0 and indexed,
 *            | index                            | id per dispatch, same seed)       | worker != NULL, counted in
 *            |                                  |                                   | worker->held, home->n_running
 *   DONE     | the key table and the LRU list   | broker_dispatch_complete (OK,     | result set, n_waiters 0,
 *            | (prev/next) unless pinned; may   | INVALID, FAILED; CRASHED/TIMEOUT  | job_id 0; in_lru unless
 *            | be evicted, the store keeps it   | at the last attempt; a late       | pinned (pins, again)
 *            |                                  | orphan result); broker_cache_     |
 *            |                                  | lookup (read back from the store) |
 *
 * Never DONE twice without passing through QUEUED: a result for a stale job
 * id of a DONE evaluation is ignored, so no request is answered twice.
 *
 * Re-evaluations. A no-cache request for a key that is DONE does not touch the
 * cached result (earlier runs, replays and verify keep reading it): it gets a
 * separate "fresh" evaluation, not indexed by key, that goes through the same
 * states and answers only the no-cache requests attached to it. While one is
 * QUEUED or RUNNING the cached evaluation points at it (again), so no-cache
 * requests for the key share it (single flight); once DONE it is unlinked and
 * freed (deliveries copy the result they send).
 *
 * Memory. QUEUED and RUNNING evaluations always stay in RAM (single flight
 * needs them). DONE ones are a bounded cache over the store: an LRU list
 * through prev/next (free in that state), at most cap_entries and about
 * cap_bytes; the least recently used is dropped past either cap, and
 * broker_cache_lookup (cache.c) reads a missing key back from the store. A
 * DONE evaluation is pinned, never dropped, while an orphan record (pins) or
 * an in-flight re-evaluation (again) points at it. Orphan records of DONE
 * evaluations are swept as the orphan index grows.
 *
 * Not here: queue order and fairness (runs.h), sending (dispatch.c). */
#ifndef BROKER_EVALS_H
#define BROKER_EVALS_H

#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "limits.h"
#include "msg.h"
#include "table.h"

struct broker_run;
struct broker_worker;

typedef enum { BROKER_EVAL_QUEUED = 0, BROKER_EVAL_RUNNING = 1, BROKER_EVAL_DONE = 2 } broker_eval_state_t;

typedef struct {
    struct broker_run *run;
    uint64_t tag;
    uint64_t seed; /* the request's own seed, reported in its result */
} broker_waiter_t;

/* Who computed a result and what it cost, passed on to the optimizer with
 * every answer (the original evaluation's for a cached one). The strings are
 * interned (intern.h), borrowed for the broker's life; "" when not known. */
typedef struct {
    const char *worker;
    const char *host;
    double cpu_seconds;
    uint64_t peak_rss_kb;
    double finished_at; /* Unix time the broker recorded the result */
} broker_provenance_t;

/* What an evaluation needs only while it is a job or something points at
 * it: its dispatch, waiters, genome, retry accounting, the orphan records'
 * pins and an in-flight re-evaluation (again). Allocated with the
 * evaluation and freed when a DONE one settles with none of those left
 * (broker_evals_settle), so the result cache's entries are the small
 * broker_eval_t alone; a re-evaluation gives a settled one an empty live
 * part again for its again link. A fresh evaluation keeps its own until
 * it is freed. */
typedef struct broker_eval_live {
    uint64_t job_id;  /* current dispatch; 0 when not RUNNING */
    uint64_t avoid_worker; /* serial of the worker it last crashed on, 0 = none */
    uint64_t qseq;         /* enqueue order: oldest-first across plugin queues */
    uint32_t timeout_ms;   /* per evaluation, sent with the job; 0 = the worker's default */
    uint32_t pins; /* orphan records pointing here: not evictable, not freed */
    uint32_t n_waiters, cap_more;
    uint32_t genome_len;
    uint16_t attempts;/* dispatches that ended CRASHED or TIMEOUT */
    uint16_t lost;    /* dispatches lost with a worker that vanished (re-queued; no cap) */
    uint16_t max_attempts; /* from the submitting run's SUBMIT; 0 = the broker's --attempts */
    struct broker_run *home; /* run whose queue it is charged to */
    /* run whose queued-genome budget holds this genome until DONE (quota.h);
     * a waiter, so it outlives the charge */
    struct broker_run *charged;
    struct broker_worker *worker;
    struct broker_eval *origin; /* fresh evaluation: the cached one, NULL once DONE */
    struct broker_eval *fresh_next, *fresh_prev; /* every fresh evaluation in RAM, for fini */
    struct broker_eval *again;  /* cached evaluation: its fresh one in flight, or NULL */
    /* waiters: the first inline (the common case), the rest in more[] */
    broker_waiter_t w0;
    broker_waiter_t *more;
    /* Copied in and owned while QUEUED or RUNNING (dispatch and straggler
     * copies send it); freed, NULL and 0, once DONE: a finished evaluation
     * answers by key, the store keeps the genome, and a re-evaluation takes
     * it from the request that asks for one. */
    uint8_t *genome;
} broker_eval_live_t;

/* One evaluation. What a cached result needs is here, in 136 bytes (a
 * 144-byte allocation): one objective's fitness inline, more on the heap,
 * the provenance's fields spelled out (broker_eval_provenance gathers
 * them), and everything else in live. A DONE evaluation has a live part
 * only while something still points at it (waiters, orphan records' pins,
 * an in-flight re-evaluation); a settled one in the LRU list has none. */
typedef struct broker_eval {
    uint8_t key[PROTO_KEY_BYTES];
    uint8_t state;     /* broker_eval_state_t */
    uint8_t status;    /* proto_status_t once DONE */
    uint8_t n_fitness; /* <= PROTO_MAX_OBJECTIVES */
    uint8_t fresh : 1; /* a re-evaluation for no-cache requests, not in by_key */
    uint8_t in_lru : 1;/* DONE, in the LRU list through prev/next (live is NULL) */
    uint32_t peak_rss_kb; /* the result's; saturates at 4 TiB */
    uint64_t seed;
    broker_plugin_t *plugin; /* borrowed from the catalog */
    const char *params;      /* borrowed, interned (broker_intern) */
    struct broker_eval *prev, *next; /* run queue when QUEUED, worker list when RUNNING, LRU when DONE */
    broker_eval_live_t *live;   /* see above; NULL once settled */
    union {
        double one;    /* n_fitness == 1 */
        double *many;  /* n_fitness > 1, owned */
        /* n_fitness == 0 and status TIMEOUT: the time limit it ran out of
         * (live->timeout_ms is gone once settled), which a resume with a
         * larger one retries; read through broker_eval_time_limit */
        uint32_t timeout_ms;
    } fit;             /* read through broker_eval_fitness */
    char *error; /* NULL = "" */
    /* provenance of the result (broker_provenance_t's fields) */
    const char *worker, *host;
    double cpu_seconds;
    double finished_at;
} broker_eval_t;

/* What a queued evaluation costs beyond its genome, as the queue caps
 * count it (quota.h). */
#define BROKER_EVAL_QUEUED_BYTES (sizeof(broker_eval_t) + sizeof(broker_eval_live_t))

_Static_assert(PROTO_MAX_OBJECTIVES <= UINT8_MAX, "n_fitness is one byte");
_Static_assert(sizeof(broker_eval_t) <= 136, "a cached result stays in a 144-byte allocation");

/* The result's fitness vector, n_fitness doubles (NULL when there are none). */
static inline const double *broker_eval_fitness(const broker_eval_t *e)
{
    return e->n_fitness == 0 ? NULL : e->n_fitness == 1 ? &e->fit.one : e->fit.many;
}

/* The result's provenance (interned strings, "" when not known). */
static inline broker_provenance_t broker_eval_provenance(const broker_eval_t *e)
{
    return (broker_provenance_t){.worker = e->worker ? e->worker : "",
                                 .host = e->host ? e->host : "",
                                 .cpu_seconds = e->cpu_seconds,
                                 .peak_rss_kb = e->peak_rss_kb,
                                 .finished_at = e->finished_at};
}

/* The fresh evaluation in flight for this cached one, or NULL. */
static inline struct broker_eval *broker_eval_again(const broker_eval_t *e)
{
    return e->live ? e->live->again : NULL;
}

/* The per-evaluation time limit it was sent with (0 = the worker's
 * default); for a DONE one known only when it timed out. */
static inline uint32_t broker_eval_time_limit(const broker_eval_t *e)
{
    if (e->live)
        return e->live->timeout_ms;
    return e->status == PROTO_STATUS_TIMEOUT && e->n_fitness == 0 ? e->fit.timeout_ms : 0;
}

/* While an evaluation is RUNNING its provenance is not set yet (the result
 * sets all of it): finished_at holds the broker's clock, in ms, at its
 * dispatch instead, for the straggler copies (speculate.h), which saves a
 * field in every cached evaluation. */
static inline void broker_eval_mark_sent(broker_eval_t *e, int64_t now_ms)
{
    e->finished_at = (double)now_ms;
}
static inline int64_t broker_eval_sent_ms(const broker_eval_t *e)
{
    return (int64_t)e->finished_at;
}

typedef struct {
    broker_table_t *by_key;
    broker_table_t *by_job;    /* job id -> RUNNING evaluation */
    broker_table_t *orphans;   /* job id -> evaluation, for dropped workers' jobs */
    broker_eval_t *fresh_head; /* every fresh evaluation in RAM, newest first */
    uint64_t n_done;           /* results set since start (counter) */
    /* the bounded result cache (see "Memory" above) */
    broker_eval_t *lru_head, *lru_tail; /* most recently used first */
    uint64_t cap_entries, cap_bytes;
    uint64_t n_cached, cached_bytes, peak_cached; /* in the LRU list */
    uint64_t n_done_ram, peak_done_ram; /* DONE evaluations indexed by key (cached + pinned) */
    uint64_t evictions, store_hits;     /* dropped from RAM; misses answered by the store */
    size_t orphan_sweep_at;
} broker_evals_t;

void broker_evals_init(broker_evals_t *self);
/* Frees every evaluation and index. */
void broker_evals_fini(broker_evals_t *self);

/* Borrowed, valid until fini; NULL if the key was never seen. */
broker_eval_t *broker_evals_get(const broker_evals_t *self, const uint8_t key[PROTO_KEY_BYTES]);
/* New QUEUED evaluation with no waiters, indexed by key (which must be new);
 * not yet in any queue. Borrowed, valid until fini. */
broker_eval_t *broker_evals_new(broker_evals_t *self, const uint8_t key[PROTO_KEY_BYTES],
                                broker_plugin_t *plugin, const char *params, uint64_t seed,
                                const uint8_t *genome, uint32_t genome_len);

/* New QUEUED fresh evaluation of DONE origin's content (key, plugin, params,
 * seed) and genome, which the caller gives (the request's own, or the
 * store's: origin keeps none), not indexed by key, linked as origin->again;
 * not yet in any queue. Borrowed, valid until fini. */
broker_eval_t *broker_evals_new_fresh(broker_evals_t *self, broker_eval_t *origin,
                                      const uint8_t *genome, uint32_t genome_len);
/* Sets the cache caps (0 = the defaults in broker.h) and evicts down to them. */
void broker_evals_set_caps(broker_evals_t *self, uint64_t entries, uint64_t bytes);
/* After e changed state, pins or again: a DONE unpinned evaluation joins the
 * LRU list (evicting the least recently used past the caps, never e), a
 * pinned one leaves it, and a DONE fresh one nobody points at is freed. e may
 * be gone when this returns: call it last. */
void broker_evals_settle(broker_evals_t *self, broker_eval_t *e);
/* A cache hit: e moves to the front of the LRU list. */
void broker_evals_touch(broker_evals_t *self, broker_eval_t *e);

void broker_eval_add_waiter(broker_eval_t *e, struct broker_run *run, uint64_t tag, uint64_t seed);
/* Waiter i (0-based, < n_waiters). */
broker_waiter_t *broker_eval_waiter(broker_eval_t *e, uint32_t i);
void broker_eval_clear_waiters(broker_eval_t *e);

/* RUNNING bookkeeping: index e under job_id / remove its current job id. */
void broker_evals_bind_job(broker_evals_t *self, broker_eval_t *e, uint64_t job_id);
void broker_evals_unbind_job(broker_evals_t *self, broker_eval_t *e);
broker_eval_t *broker_evals_by_job(const broker_evals_t *self, uint64_t job_id);

/* Remembers job_id (of a dropped worker's dispatch) as pointing at e, which
 * it pins; records of evaluations that are DONE by then are swept now and
 * then (a late result for them is ignored anyway). */
void broker_evals_orphan_add(broker_evals_t *self, uint64_t job_id, broker_eval_t *e);
/* Removes and returns the orphan under job_id, or NULL. The evaluation is
 * unpinned: the caller calls broker_evals_settle when done with it. */
broker_eval_t *broker_evals_orphan_take(broker_evals_t *self, uint64_t job_id);

/* Stores the final result (copies fitness and error; prov's strings must be
 * interned, NULL prov = unknown) and marks e DONE. The waiters are kept: the
 * caller answers them, then broker_eval_clear_waiters. */
void broker_eval_set_result(broker_evals_t *self, broker_eval_t *e, uint32_t status,
                            const double *fitness, uint32_t n_fitness, const char *error,
                            const broker_provenance_t *prov);

/* Invariants of one evaluation per the state table above. */
int broker_eval_check(const broker_evals_t *self, const broker_eval_t *e);

#endif
