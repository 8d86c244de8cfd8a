/* dispatch.h: the transitions of the job lifecycle (evals.h) that involve
 * workers: sending queued jobs to workers with credits, taking outcomes back,
 * retrying crashed and timed-out jobs, re-queueing a dropped worker's jobs,
 * and completing an evaluation (answering every waiting request). Not here:
 * decoding worker messages (worker_io.c), choosing which job is next (runs.c). */
#ifndef BROKER_DISPATCH_H
#define BROKER_DISPATCH_H

#include <stdint.h>

#include "core.h"

/* For every worker with credits, takes runs round-robin and sends the jobs
 * in one JOBS message per worker. With b->workers NULL (unit tests) the jobs
 * change state but nothing is sent. Returns the number of jobs dispatched. */
uint64_t broker_dispatch_turn(broker_t *b);

/* One outcome of a DONE from worker w (NULL: a routing id the broker does not
 * know, whose late results may still be accepted for orphaned jobs). */
void broker_dispatch_outcome(broker_t *b, broker_worker_t *w, const proto_outcome_t *o);

/* Final result for e (detached from any queue or worker first): stores it
 * (with the outcome o from worker w, for the record; either may be NULL) and
 * answers every waiting request. */
void broker_dispatch_complete(broker_t *b, broker_eval_t *e, const broker_worker_t *w,
                              const proto_outcome_t *o);

/* Drops w: its held jobs go back to the front of their runs (same seed, order
 * kept), their job ids become orphans, the registration is freed. Returns how
 * many jobs were re-queued. The caller logs why. */
uint32_t broker_dispatch_drop_worker(broker_t *b, broker_worker_t *w);
/* The same for a worker that vanished (silent past the liveness window, or
 * registered again after a restart): each held job also counts one lost
 * dispatch in its stored attempts. A worker that says goodbye or is revoked
 * hands its jobs back instead (broker_dispatch_drop_worker). */
uint32_t broker_dispatch_lose_worker(broker_t *b, broker_worker_t *w);

/* w handed these jobs back (msg.h HAND_BACK: its owner reclaimed the
 * machine; it will never report them): each one still held by w goes back
 * to the front of its run (same seed, order kept), not counted as an
 * attempt or a lost dispatch. Ids not held by w (already answered, or sent
 * twice) are skipped. Returns how many went back. */
uint32_t broker_dispatch_hand_back(broker_t *b, broker_worker_t *w, const uint64_t *job_ids,
                                   uint32_t n);

#endif
