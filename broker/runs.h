/* runs.h: runs by id, each with its seed and seed mode, the client routing id
 * that last spoke for it, one FIFO of queued evaluations per plugin, its
 * counters, the results waiting to be sent this turn (outbox) and the results
 * sent but not yet acknowledged (unacked, re-sent when the client comes back).
 *
 * Fair share: the runs that have queued work form a ring; broker_runs_pick
 * serves them round-robin, one job per run per step, so one large run cannot
 * starve a small one. Dispatch is O(1) per job (O(plugins in the run) to pick
 * the oldest job the worker can take). Not here: sending, evaluation states
 * (evals.h), workers (registry.h). */
#ifndef BROKER_RUNS_H
#define BROKER_RUNS_H

#include <stddef.h>
#include <stdint.h>

#include "evals.h"
#include "registry.h"
#include "table.h"

typedef struct {
    broker_plugin_t *plugin;
    broker_eval_t *head, *tail;
} broker_queue_t;

/* One result owed to a request: in the outbox, or sent and not yet acked. */
typedef struct broker_delivery {
    uint64_t tag;
    broker_eval_t *eval; /* DONE */
    uint8_t cached;
    struct broker_delivery *free_next;
} broker_delivery_t;

typedef struct broker_run {
    char *id;
    uint64_t seed;
    uint32_t seed_mode;
    uint8_t client[BROKER_RID_MAX];
    uint8_t client_len;
    broker_queue_t *queues;
    uint32_t n_queues;
    uint64_t n_queued, n_running, n_answered;
    uint64_t n_evaluated, n_cached, n_failed; /* since the broker started */
    uint64_t outstanding; /* accepted requests not yet answered */
    /* since the run last went idle, for the idle log line */
    uint64_t p_answered, p_evaluated, p_cached, p_failed;
    struct broker_run *rr_prev, *rr_next;
    int in_rr;
    broker_delivery_t *outbox;
    uint32_t n_outbox, cap_outbox;
    struct broker_run *dirty_next;
    int dirty;
    broker_table_t *unacked; /* tag -> broker_delivery_t */
} broker_run_t;

typedef struct {
    broker_table_t *by_id;
    broker_run_t *rr_cursor; /* next run to serve; the ring is circular */
    uint32_t n_active;       /* runs in the ring */
    broker_run_t *dirty_head;
    int64_t back_seq, front_seq;
    uint64_t total_queued;
    broker_delivery_t *free_nodes;
} broker_runs_t;

void broker_runs_init(broker_runs_t *self);
void broker_runs_fini(broker_runs_t *self);

/* Borrowed, valid until fini; NULL if unknown. */
broker_run_t *broker_runs_get(const broker_runs_t *self, const char *id);
/* New run (id must be unknown). Borrowed, valid until fini. */
broker_run_t *broker_runs_new(broker_runs_t *self, const char *id, uint64_t seed,
                              uint32_t seed_mode);
void broker_run_set_client(broker_run_t *run, const uint8_t *rid, size_t rid_len);

/* Puts QUEUED e in run's queue for e->plugin, at the back (new work) or the
 * front (re-queued work keeps its place ahead of newer jobs). Sets e->home. */
void broker_runs_enqueue(broker_runs_t *self, broker_run_t *run, broker_eval_t *e, int front);
/* Takes QUEUED e out of its home run's queue. */
void broker_runs_unqueue(broker_runs_t *self, broker_eval_t *e);
/* Round-robin over runs with queued work: the oldest queued job (of the next
 * run that has one) whose plugin w carries, taken out of its queue; NULL if
 * none. A job that last crashed on w is left for another carrier if one exists. */
broker_eval_t *broker_runs_pick(broker_runs_t *self, const broker_worker_t *w);

/* Records that request tag of run is answered by DONE e; queues it in the
 * run's outbox. Logs the idle line when it was the run's last outstanding one. */
void broker_runs_answer(broker_runs_t *self, broker_run_t *run, uint64_t tag, broker_eval_t *e,
                        int cached);
/* Queues the result of request tag for sending again without counting it as
 * a new answer: a re-sent SUBMIT of a request already answered, or (at
 * start) a stored result the client never acknowledged. */
void broker_runs_redeliver(broker_runs_t *self, broker_run_t *run, uint64_t tag, broker_eval_t *e,
                           int cached);
/* Queues every unacked result of run for sending again. Returns how many. */
size_t broker_runs_resend(broker_runs_t *self, broker_run_t *run);
/* Pops a run with a non-empty outbox, or NULL. */
broker_run_t *broker_runs_take_dirty(broker_runs_t *self);
/* After sending outbox entries [0, n): moves them to unacked, clears outbox. */
void broker_runs_sent(broker_runs_t *self, broker_run_t *run);
/* The client delivered tag: forget it. Returns 1 if it was unacked. */
int broker_runs_ack(broker_runs_t *self, broker_run_t *run, uint64_t tag);

int broker_runs_check(const broker_runs_t *self);

#endif
