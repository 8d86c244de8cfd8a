/* speculate.h: straggler copies. A generational optimizer waits for the
 * slowest evaluation of each batch, so one slow machine holding the last
 * jobs of a batch sets the pace of the whole search. When nothing is queued
 * and some worker has credits to spare, a job that has run (it is among the
 * oldest `slots` its worker holds) much longer than its plugin's median (BROKER_SPECULATE_DEFAULT_FACTOR, --speculate-after)
 * gets a second copy on the worker expected to finish it soonest, if that
 * is sooner than the first is expected to. Whichever finishes first is the
 * result (its worker is the one the provenance names); the other is
 * cancelled on its worker (CANCEL, msg.h: the child is killed and replaced)
 * and its result, if it still comes, finds no job and is ignored.
 *
 * Why the bits cannot change: the seed is part of the job's content (its
 * key, DESIGN.md), so both copies evaluate the same genome, params and seed,
 * and a deterministic plugin gives the same fitness on either; a copy never
 * counts as an attempt, and a result is set once (dispatch.c).
 *
 * State: a small table of the copies out (at most BROKER_SPECULATE_MAX).
 * Invariant: a copy's evaluation is RUNNING on its first worker, held there
 * as usual; the copy itself is not in any worker's job list, only counted in
 * the copy worker's `copies` (its busy slots). Every way out of RUNNING
 * (dispatch.c s_detach) drops the copy, and a worker that leaves takes its
 * copies with it. A crashed or timed-out copy is dropped: the first keeps
 * running. Not here: the medians (timing.h), dispatching (dispatch.c). */
#ifndef BROKER_SPECULATE_H
#define BROKER_SPECULATE_H

#include <stdint.h>

#define BROKER_SPECULATE_MAX 64           /* copies out at once */
#define BROKER_SPECULATE_DEFAULT_FACTOR 1.5
#define BROKER_SPECULATE_MIN_SAMPLES 5    /* a plugin's median counts from this many results */
#define BROKER_SPECULATE_WORKER_SAMPLES 3 /* and a worker's own median for it */
#define BROKER_SPECULATE_MIN_AGE_MS 20    /* younger jobs are never copied, nor is one
                                             whose copy would finish less than this
                                             sooner than the first: below it a copy
                                             costs more than waiting */
/* A plugin whose median is under this is never copied: its jobs' ages are
 * scheduling noise (a busy machine, a deep prefetch queue), and a copy would
 * cost as much as it saves. */
#define BROKER_SPECULATE_MIN_MEDIAN_MS 5

struct broker;
struct broker_eval;
struct broker_worker;

typedef struct {
    uint64_t job_id;             /* the copy's own dispatch */
    struct broker_eval *e;       /* RUNNING on its first worker */
    struct broker_worker *w;     /* where the copy runs */
    int64_t sent_ms;
} broker_copy_t;

typedef struct {
    int enabled;
    double factor; /* a job older than factor x its plugin's median is a straggler */
    broker_copy_t copies[BROKER_SPECULATE_MAX];
    uint32_t n;
    int64_t next_scan_ms;
    /* copies started; that finished first; cancelled because the first
     * finished first; dropped because they crashed or timed out */
    uint64_t started, won, beaten, failed;
} broker_speculate_t;

void broker_speculate_init(broker_speculate_t *self, int enabled, double factor);

/* After a dispatch turn: when nothing is queued and a worker has credits,
 * starts copies of stragglers (rate-limited to a scan per few ms). */
void broker_speculate_turn(struct broker *b);
/* Milliseconds until a scan could start a copy, or -1 (the poll time-out). */
long broker_speculate_timeout_ms(const struct broker *b);

/* If job_id is a copy's, moves its record to *out, forgets it and returns
 * 1; else 0. */
int broker_speculate_take(broker_speculate_t *self, uint64_t job_id, broker_copy_t *out);
/* e is leaving RUNNING: its copy, if any, is cancelled on its worker and
 * forgotten (counted as beaten). */
void broker_speculate_drop_for(struct broker *b, struct broker_eval *e);
/* w is leaving the registry: the copies running there are forgotten. */
void broker_speculate_forget_worker(struct broker *b, struct broker_worker *w);
/* Sends CANCEL for job_id to w. */
void broker_speculate_cancel(struct broker *b, struct broker_worker *w, uint64_t job_id);

#endif
