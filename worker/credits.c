/* credits.c: prefetch depth from measured round trip and evaluation times
 * (credits.h). Owns only the arithmetic. */
#include "credits.h"

#include <stdlib.h>
#include <string.h>

void worker_credits_init(worker_credits_t *self, unsigned slots)
{
    memset(self, 0, sizeof *self);
    self->slots = slots ? slots : 1;
}

void worker_credits_reset(worker_credits_t *self)
{
    self->outstanding = 0;
    self->awaiting = 0;
}

void worker_credits_eval(worker_credits_t *self, int64_t wall_us)
{
    self->eval_us[self->eval_pos] = wall_us < 1 ? 1 : wall_us;
    self->eval_pos = (self->eval_pos + 1) % WORKER_CREDITS_SAMPLES;
    if (self->n_eval < WORKER_CREDITS_SAMPLES)
        self->n_eval++;
}

void worker_credits_jobs(worker_credits_t *self, uint32_t n, int64_t now_us)
{
    if (self->awaiting) {
        self->rtt_us[self->rtt_pos] = now_us - self->grant_us;
        self->rtt_pos = (self->rtt_pos + 1) % WORKER_CREDITS_RTT_SAMPLES;
        if (self->n_rtt < WORKER_CREDITS_RTT_SAMPLES)
            self->n_rtt++;
    }
    self->outstanding = n >= self->outstanding ? 0 : self->outstanding - n;
    /* Still owed jobs: the next batch answers the same (older) grant poorly,
     * so only time the first answer to each grant. */
    self->awaiting = 0;
}

static int s_cmp_i64(const void *a, const void *b)
{
    int64_t x = *(const int64_t *)a, y = *(const int64_t *)b;
    return (x > y) - (x < y);
}

int64_t worker_credits_median_eval_us(const worker_credits_t *self)
{
    if (self->n_eval == 0)
        return -1;
    int64_t tmp[WORKER_CREDITS_SAMPLES];
    memcpy(tmp, self->eval_us, self->n_eval * sizeof *tmp);
    qsort(tmp, self->n_eval, sizeof *tmp, s_cmp_i64);
    return tmp[self->n_eval / 2];
}

int64_t worker_credits_rtt_us(const worker_credits_t *self)
{
    if (self->n_rtt == 0)
        return -1;
    int64_t best = self->rtt_us[0];
    for (size_t i = 1; i < self->n_rtt; i++)
        if (self->rtt_us[i] < best)
            best = self->rtt_us[i];
    return best < 0 ? 0 : best;
}

uint32_t worker_credits_target(const worker_credits_t *self)
{
    uint64_t slots = self->slots;
    int64_t eval = worker_credits_median_eval_us(self);
    int64_t rtt = worker_credits_rtt_us(self);
    if (eval < 0 || rtt < 0)
        return (uint32_t)(slots * WORKER_CREDITS_START_FACTOR);
    /* slots * (1 + rtt/eval), the extra part rounded up: a slot that
     * finishes must find a job here, not wait a round trip for one. Rounded
     * to nearest, 2 slots of 5 ms evaluations with a 0.7 ms round trip held
     * no job in reserve and sat idle 12 % of the time. Where the round trips
     * cost the slots under 1 % of their time (evaluations far longer than a
     * round trip) no reserve is held: each slot has exactly one job, and none
     * waits on this machine while another machine idles. */
    uint64_t cap = slots * WORKER_CREDITS_MAX_FACTOR;
    /* Round trips past a day are nonsense; capping keeps slots * rtt in range. */
    uint64_t r = (uint64_t)rtt > 86400000000ull ? 86400000000ull : (uint64_t)rtt;
    uint64_t e = (uint64_t)eval;
    uint64_t extra = slots * r * 100 < e ? 0 : (slots * r + e - 1) / e;
    uint64_t target = slots + extra;
    if (target > cap)
        target = cap;
    return (uint32_t)target;
}

uint32_t worker_credits_want(const worker_credits_t *self, size_t held)
{
    uint64_t have = (uint64_t)held + self->outstanding;
    uint64_t target = worker_credits_target(self);
    return have >= target ? 0 : (uint32_t)(target - have);
}

void worker_credits_granted(worker_credits_t *self, uint32_t n, int64_t now_us)
{
    if (n == 0)
        return;
    self->outstanding += n;
    if (!self->awaiting) {
        self->awaiting = 1;
        self->grant_us = now_us;
    }
}

unsigned worker_credits_child_depth(const worker_credits_t *self)
{
    int64_t eval = worker_credits_median_eval_us(self);
    if (eval < 0)
        return 1;
    int64_t depth = WORKER_CREDITS_CHILD_QUEUE_US / (eval < 1 ? 1 : eval);
    if (depth < 1)
        return 1;
    return depth > WORKER_CREDITS_CHILD_DEPTH_MAX ? WORKER_CREDITS_CHILD_DEPTH_MAX
                                                  : (unsigned)depth;
}
