/* runs.h: runs by id, each with its seed and seed mode, its owner (the
 * client key that created it, access.h), the client routing id and key of
 * the one connection that speaks for it, one FIFO of queued evaluations per plugin, its
 * counters, the results waiting to be sent this turn (outbox) and the results
 * sent but not yet acknowledged (unacked, re-sent when the client comes back).
 *
 * Bounded delivery. Outbox plus unacked hold at most max_per_run results per
 * run and max_total over all runs, each a copy of the result (no genome). A
 * result past a cap is not kept: it stays in the store (its request has
 * acked = 0), and the run records the range of tags it owes from the store
 * (spill_*); backlog.c pages them back in bounded chunks as the client
 * acknowledges what it holds.
 *
 * Fair share: the runs that have queued work form a ring; broker_runs_pick
 * serves them round-robin, one job per run per step, so one large run cannot
 * starve a small one. Dispatch is O(1) per job (O(plugins in the run) to pick
 * the oldest job the worker can take).
 *
 * Parking: a parked run (its owner's key was removed from clients.allow,
 * access.h) keeps its queued evaluations but is left out of the ring, so no
 * worker gets them until it is unparked; a queued evaluation that another,
 * unparked run also waits for moves to that run's queue (single flight never
 * lets one run's revocation starve another). Not here: sending, evaluation states
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

/* One result owed to a request: in the outbox, or sent and not yet acked.
 * A copy, so the evaluation may leave the cache meanwhile. */
typedef struct broker_delivery {
    uint64_t tag;
    uint64_t seed;
    uint8_t key[PROTO_KEY_BYTES];
    uint8_t status;
    uint8_t cached;
    uint8_t fresh; /* the request's own re-evaluation (no-cache) */
    uint32_t n_fitness;
    double *fitness; /* owned (borrowed in the template given to the push calls) */
    char *error;     /* owned, NULL = "" */
    broker_provenance_t prov; /* interned strings: copied as they are */
    struct broker_delivery *free_next;
} broker_delivery_t;

#define BROKER_KEY_TEXT 41 /* a Z85 public key (40 characters) and NUL */

/* What one owner's runs hold in RAM, for the caps per key (quota.h). */
typedef struct broker_keyuse {
    char owner[BROKER_KEY_TEXT];
    uint64_t runs;         /* its runs held in RAM */
    uint64_t outstanding;  /* their accepted requests not yet answered */
    uint64_t genome_bytes; /* genome bytes of their QUEUED and RUNNING evaluations */
} broker_keyuse_t;

typedef struct broker_run {
    char *id;
    uint64_t seed;
    uint32_t seed_mode;
    /* The client key that created the run (Z85, or access.h's plaintext
     * identity); "" = not recorded (a store from before ownership). */
    char owner[BROKER_KEY_TEXT];
    /* The one connection that speaks for the run (client_len 0: none) and the
     * key it authenticated with (the owner's, or a key the run is shared with). */
    uint8_t client[BROKER_RID_MAX];
    uint8_t client_len;
    char client_key[BROKER_KEY_TEXT];
    int parked;
    broker_keyuse_t *use;  /* its owner's totals (quota.h); NULL until attached */
    uint64_t genome_bytes; /* genomes it holds queued (quota.h) */
    int64_t last_used_ms;  /* last SUBMIT or ACK: idle runs leave RAM after a while */
    broker_queue_t *queues;
    uint32_t n_queues;
    uint64_t n_queued, n_running, n_answered;
    uint64_t n_evaluated, n_cached, n_failed; /* since the broker started */
    uint64_t outstanding; /* accepted requests not yet answered */
    /* Answers since the store commit numbered answered_epoch (runs_t.epoch):
     * not durable while that is still the current epoch, so status leaves
     * them out of "done" (broker_runs_durable_answered). */
    uint64_t answered_epoch, answered_since;
    /* since the run last went idle, for the idle log line */
    uint64_t p_answered, p_evaluated, p_cached, p_failed;
    int idle_deferred; /* went idle inside a SUBMIT being taken */
    /* Every request tag the store records for this run is below tags_end
     * (UINT64_MAX: saturated, every tag is looked up), so a SUBMIT's new
     * tags, always past the last ones, cost no store lookup. tags_known 0:
     * not read yet (a run loaded from the store reads it on its first
     * SUBMIT); a run this broker created starts known and empty. */
    uint64_t tags_end;
    int tags_known;
    struct broker_run *rr_prev, *rr_next;
    int in_rr;
    uint32_t weight;    /* fair-share weight from its latest SUBMIT (1..PROTO_MAX_WEIGHT) */
    uint32_t rr_served; /* jobs picked in its current round-robin turn */
    broker_delivery_t *outbox;
    uint32_t n_outbox, cap_outbox;
    struct broker_run *dirty_next;
    int dirty;
    broker_table_t *unacked; /* tag -> broker_delivery_t */
    /* Tags owed from the store (their results were past a cap): a sweep over
     * [spill_cur, spill_to], then again from revisit_from if a tag below the
     * cursor spilled meanwhile. Tags compare as the store's signed INTEGER. */
    int in_spill, spill_linked, revisit;
    int64_t spill_cur, spill_to, revisit_from;
    struct broker_run *spill_next;
} broker_run_t;

typedef struct {
    broker_table_t *by_id;
    broker_run_t *rr_cursor; /* next run to serve; the ring is circular */
    uint32_t n_active;       /* runs in the ring */
    broker_run_t *dirty_head;
    int64_t back_seq, front_seq;
    uint64_t total_queued;
    uint64_t total_running; /* jobs on workers, over all runs (dispatch.c) */
    broker_delivery_t *free_nodes;
    /* bounded delivery */
    uint64_t max_per_run, max_total;
    uint64_t n_held, peak_held; /* outbox + unacked entries over all runs */
    uint64_t n_spilled;         /* results left in the store at a cap */
    broker_run_t *spill_head;   /* runs that owe results from the store */
    int went_idle;              /* a run went idle: the loop logs memory use */
    /* The run whose SUBMIT is being taken: answers from the cache make it
     * idle after every item, so its idle line waits for the SUBMIT's end
     * (without this, 100,000 cached items logged 100,000 lines). */
    broker_run_t *taking;
    uint64_t epoch;             /* successful store commits so far (loop.c counts them) */
    /* Requests answered, and those answered from a stored result, over every
     * run since the broker started (runs that left RAM included). */
    uint64_t answered_total, cached_total;
} broker_runs_t;

void broker_runs_init(broker_runs_t *self);
/* Brackets the items of one SUBMIT for run (see broker_runs_t.taking). */
void broker_runs_take_begin(broker_runs_t *self, broker_run_t *run);
void broker_runs_take_end(broker_runs_t *self, broker_run_t *run);
void broker_runs_fini(broker_runs_t *self);

/* Borrowed, valid until fini; NULL if unknown. */
broker_run_t *broker_runs_get(const broker_runs_t *self, const char *id);
/* New run (id must be unknown) owned by owner (NULL or "": not recorded).
 * Borrowed, valid until fini. */
broker_run_t *broker_runs_new(broker_runs_t *self, const char *id, uint64_t seed,
                              uint32_t seed_mode, const char *owner);
/* The connection rid (authenticated as key, NULL = none) speaks for run now. */
void broker_run_set_client(broker_run_t *run, const uint8_t *rid, size_t rid_len,
                           const char *key);
/* One more accepted request waits in run (and in its owner's total). */
static inline void broker_run_count_request(broker_run_t *run)
{
    run->outstanding++;
    if (run->use)
        run->use->outstanding++;
}
/* 1 when run holds nothing that needs it in RAM: no request waiting, no
 * result to send or acknowledge, none owed from the store, not parked. Such
 * a run can be dropped (broker_runs_drop) and rebuilt from the store on its
 * next use. */
int broker_runs_idle(const broker_run_t *run);
/* Removes idle run from RAM and frees it (the store keeps it). */
void broker_runs_drop(broker_runs_t *self, broker_run_t *run);

/* Parks run (see the top); returns how many queued evaluations stay parked
 * with it. 0 and no change when it is parked already. */
uint64_t broker_runs_park(broker_runs_t *self, broker_run_t *run);
/* Unparks run; returns how many queued evaluations it brings back. */
uint64_t broker_runs_unpark(broker_runs_t *self, broker_run_t *run);
/* run now waits for QUEUED e too: if e's home is parked and run is not, e
 * moves to run's queue. */
void broker_runs_adopt(broker_runs_t *self, broker_run_t *run, broker_eval_t *e);

/* Puts QUEUED e in run's queue for e->plugin, at the back (new work) or the
 * front (re-queued work keeps its place ahead of newer jobs). Sets e->home.
 * A parked run hands e to an unparked run that waits for it, if any. */
void broker_runs_enqueue(broker_runs_t *self, broker_run_t *run, broker_eval_t *e, int front);
/* Takes QUEUED e out of its home run's queue. */
void broker_runs_unqueue(broker_runs_t *self, broker_eval_t *e);
/* Round-robin over runs with queued work: the oldest queued job (of the next
 * run that has one) whose plugin w carries, taken out of its queue; NULL if
 * none. A job that last crashed on w is left for another carrier if one exists. */
broker_eval_t *broker_runs_pick(broker_runs_t *self, const broker_worker_t *w);

/* Sets the delivery caps (0 = the defaults in broker.h). */
void broker_runs_set_caps(broker_runs_t *self, uint64_t per_run, uint64_t total);

/* Records that request tag of run is answered by DONE e; queues a copy of the
 * result in the run's outbox, or past a cap leaves it to the store. Logs the
 * idle line when it was the run's last outstanding one. */
/* The seed of request (run, genome, replicate) as proto/key.h derives it: what
 * its result reports, whichever evaluation (shared or not) answered it. */
uint64_t broker_run_request_seed(const broker_run_t *run, const uint8_t *genome,
                                 uint32_t genome_len, uint32_t replicate);

void broker_runs_answer(broker_runs_t *self, broker_run_t *run, uint64_t tag, uint64_t seed,
                        broker_eval_t *e,
                        int cached);
/* Queues the result of request tag for sending again without counting it as
 * a new answer (a re-sent SUBMIT of a request already answered). Returns 1
 * when it is held in RAM, 0 when it was past a cap and is owed from the
 * store: the caller makes sure the store says acked = 0 for it. */
int broker_runs_redeliver(broker_runs_t *self, broker_run_t *run, uint64_t tag, uint64_t seed,
                          broker_eval_t *e,
                          int cached);
/* The same with the result given as a delivery template (fitness and error
 * borrowed, copied here): a result read from the store. */
int broker_runs_redeliver_copy(broker_runs_t *self, broker_run_t *run,
                               const broker_delivery_t *src);
/* Queues every unacked result of run for sending again (moved to the outbox;
 * what the store owes stays owed). Returns how many. */
size_t broker_runs_resend(broker_runs_t *self, broker_run_t *run);
/* The run owes every answered, unacknowledged result the store holds for it
 * (at start). */
void broker_runs_owe_all(broker_runs_t *self, broker_run_t *run);
/* Results run may take into RAM now (0 at a cap). */
uint64_t broker_runs_room(const broker_runs_t *self, const broker_run_t *run);
/* The backlog read tags up to last; end: nothing more in [spill_cur,
 * spill_to]. Ends the run's spill or starts its revisit. */
void broker_runs_spill_advance(broker_runs_t *self, broker_run_t *run, int64_t last, int end);
/* Pops a run with a non-empty outbox, or NULL. */
broker_run_t *broker_runs_take_dirty(broker_runs_t *self);
/* After sending outbox entries [0, n): moves them to unacked, clears outbox. */
void broker_runs_sent(broker_runs_t *self, broker_run_t *run);
/* The client delivered tag: forget it. Returns 1 if it was unacked. */
int broker_runs_ack(broker_runs_t *self, broker_run_t *run, uint64_t tag);

/* Requests of run answered and committed to the store (n_answered less
 * those of the current, not yet committed epoch). */
uint64_t broker_runs_durable_answered(const broker_runs_t *self, const broker_run_t *run);

int broker_runs_check(const broker_runs_t *self);

#endif
