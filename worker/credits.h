/* credits.h: how many jobs the worker asks the broker for (prefetch).
 * Internal to the worker.
 *
 * The aim is slots x (1 + rtt / median evaluation time) jobs in hand (queued
 * here plus running plus granted but not yet sent), the extra part rounded
 * up (none where round trips cost under 1 % of the slots' time), bounded to [slots,
 * slots x 64]: deep enough that no slot waits a network round trip for
 * trivial plugins, shallow enough that long jobs do not pile up on one
 * machine while others idle. Until both times are measured the aim is
 * slots x 4, so trivial plugins are fast from the first second.
 *
 * Round trip: time from a grant (CREDIT, or DONE carrying credits) to the next
 * JOBS. When the broker has nothing queued that time is much longer than the
 * network's, so the estimate is the minimum of recent samples, not a mean.
 * Evaluation time: the median of the last WORKER_CREDITS_SAMPLES. Pure
 * arithmetic: no sockets, no clock reads (callers pass times in). */
#ifndef WORKER_CREDITS_H
#define WORKER_CREDITS_H

#include <stddef.h>
#include <stdint.h>

#define WORKER_CREDITS_SAMPLES 31
#define WORKER_CREDITS_RTT_SAMPLES 16
#define WORKER_CREDITS_MAX_FACTOR 64
#define WORKER_CREDITS_START_FACTOR 4
/* A child process holds about this much work (running plus queued behind
 * it), bounded to [1, WORKER_CREDITS_CHILD_DEPTH_MAX] jobs. */
#define WORKER_CREDITS_CHILD_QUEUE_US 1000
#define WORKER_CREDITS_CHILD_DEPTH_MAX 32

typedef struct {
    unsigned slots;
    uint32_t outstanding; /* granted, not yet answered with jobs */
    int64_t eval_us[WORKER_CREDITS_SAMPLES];
    size_t n_eval, eval_pos;
    int64_t rtt_us[WORKER_CREDITS_RTT_SAMPLES];
    size_t n_rtt, rtt_pos;
    int64_t grant_us; /* time of the oldest unanswered grant, when awaiting */
    int awaiting;
} worker_credits_t;

void worker_credits_init(worker_credits_t *self, unsigned slots);

/* The broker forgot us (REHELLO, or it went silent): nothing is granted. */
void worker_credits_reset(worker_credits_t *self);

/* One evaluation took wall_us. */
void worker_credits_eval(worker_credits_t *self, int64_t wall_us);

/* n jobs arrived at now_us. */
void worker_credits_jobs(worker_credits_t *self, uint32_t n, int64_t now_us);

/* The current aim, in jobs in hand. */
uint32_t worker_credits_target(const worker_credits_t *self);

/* Credits to grant now, given held jobs (queued here or running). */
uint32_t worker_credits_want(const worker_credits_t *self, size_t held);

/* n credits were sent at now_us. */
void worker_credits_granted(worker_credits_t *self, uint32_t n, int64_t now_us);

/* Jobs one child process should hold at once: CHILD_QUEUE_US / median
 * evaluation time, in [1, CHILD_DEPTH_MAX]; 1 until an evaluation has been
 * measured. Deep for sub-millisecond plugins, so a child rarely waits for
 * its parent; 1 for slower ones, so no job waits behind another in one child
 * while a sibling sits idle. */
unsigned worker_credits_child_depth(const worker_credits_t *self);

/* The median evaluation time and round-trip estimate in microseconds (-1
 * when not yet measured), for logs and tests. */
int64_t worker_credits_median_eval_us(const worker_credits_t *self);
int64_t worker_credits_rtt_us(const worker_credits_t *self);

#endif
