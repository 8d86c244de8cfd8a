/* speculate.c: straggler copies (see speculate.h). */
#include "speculate.h"

#include <assert.h>
#include <inttypes.h>
#include <string.h>

#include "common/log.h"
#include "core.h"
#include "envelope.h"
#include "timing.h"

void broker_speculate_init(broker_speculate_t *self, int enabled, double factor)
{
    memset(self, 0, sizeof *self);
    self->enabled = enabled;
    self->factor = factor > 1.0 ? factor : BROKER_SPECULATE_DEFAULT_FACTOR;
}

static int s_find_eval(const broker_speculate_t *self, const broker_eval_t *e)
{
    for (uint32_t i = 0; i < self->n; i++)
        if (self->copies[i].e == e)
            return (int)i;
    return -1;
}

static void s_remove(broker_speculate_t *self, uint32_t i)
{
    broker_worker_t *w = self->copies[i].w;
    if (w->copies > 0)
        w->copies--;
    self->copies[i] = self->copies[--self->n];
}

/* Seconds w is expected to take for plugin: its own median when it has
 * one, else the plugin's (a worker new to it is taken as typical). */
static double s_expected(broker_worker_t *w, broker_plugin_t *plugin, double plugin_median)
{
    broker_timing_t *t = broker_worker_timing(w, plugin);
    double m = t ? broker_timing_median(t, BROKER_SPECULATE_WORKER_SAMPLES) : -1;
    return m >= 0 ? m : plugin_median;
}

/* The ready worker expected to finish e soonest, other than its own; NULL
 * when none carries its plugin. */
static broker_worker_t *s_target(broker_t *b, const broker_eval_t *e, double plugin_median,
                                 double *expected)
{
    broker_worker_t *best = NULL;
    for (broker_worker_t *t = b->registry.ready_head; t; t = t->ready_next) {
        if (t == e->live->worker || t->credits == 0 || t->serial == e->live->avoid_worker ||
            !broker_worker_carries(t, e->plugin))
            continue;
        double x = s_expected(t, e->plugin, plugin_median);
        if (!best || x < *expected) {
            best = t;
            *expected = x;
        }
    }
    return best;
}

static void s_start(broker_t *b, broker_eval_t *e, broker_worker_t *t, double age,
                    double median)
{
    broker_speculate_t *self = &b->spec;
    assert(self->n < BROKER_SPECULATE_MAX);
    broker_copy_t *c = &self->copies[self->n++];
    *c = (broker_copy_t){.job_id = ++b->next_job_id, .e = e, .w = t, .sent_ms = b->now_ms};
    proto_job_t job = {.job_id = c->job_id,
                       .plugin = e->plugin->name,
                       .params = (char *)e->params, /* read only by the encoder */
                       .seed = e->seed,
                       .timeout_ms = e->live->timeout_ms,
                       .genome_len = e->live->genome_len,
                       .genome = e->live->genome};
    proto_msg_t msg = {.type = PROTO_JOBS};
    msg.u.jobs.n_jobs = 1;
    msg.u.jobs.jobs = &job;
    if (b->workers)
        broker_envelope_send(b->workers, t->rid, t->rid_len, &msg);
    broker_registry_spend(&b->registry, t);
    t->copies++;
    self->started++;
    b->jobs_sent++;
    LOG_INFO("job %" PRIu64 " has run %.3f s on worker %s (plugin %s: median %.3f s); a copy "
             "goes to worker %s as job %" PRIu64 ", the first to finish wins",
             e->live->job_id, age, e->live->worker->name, e->plugin->name, median, t->name, c->job_id);
}

void broker_speculate_turn(broker_t *b)
{
    broker_speculate_t *self = &b->spec;
    if (!self->enabled || b->runs.total_queued > 0 || b->runs.total_running == 0 ||
        !b->registry.ready_head || self->n >= BROKER_SPECULATE_MAX ||
        b->now_ms < self->next_scan_ms)
        return;
    /* Without a straggler in sight, look again when the first job could
     * become one, and at least once a second (medians move). */
    int64_t next = b->now_ms + 1000;
    for (broker_worker_t *w = b->registry.seen_head; w && self->n < BROKER_SPECULATE_MAX;
         w = w->seen_next) {
        /* Its oldest slots' worth of jobs: those run; the ones behind them
         * wait in its prefetch queue, and their age says nothing of it. */
        unsigned k = 0;
        for (broker_eval_t *e = w->jobs_head; e && k < w->slots && self->n < BROKER_SPECULATE_MAX;
             e = e->next, k++) {
            double median =
                broker_timing_median(&e->plugin->timing, BROKER_SPECULATE_MIN_SAMPLES);
            if (median < BROKER_SPECULATE_MIN_MEDIAN_MS / 1000.0 || s_find_eval(self, e) >= 0)
                continue;
            int64_t sent = broker_eval_sent_ms(e);
            double limit_ms = self->factor * median * 1000.0;
            if (limit_ms < BROKER_SPECULATE_MIN_AGE_MS)
                limit_ms = BROKER_SPECULATE_MIN_AGE_MS;
            int64_t due = sent + (int64_t)limit_ms;
            if (b->now_ms < due) {
                if (due < next)
                    next = due;
                continue;
            }
            double age = (double)(b->now_ms - sent) / 1000.0;
            /* What the first copy still needs: the rest of its worker's
             * usual time, or, once it is past that, as long again as it has
             * run (its worker's usual time says nothing any more). */
            double own = s_expected(w, e->plugin, median);
            double left = own > age ? own - age : age;
            double expected = 0;
            broker_worker_t *t = s_target(b, e, median, &expected);
            /* Only for a real gain (at least BROKER_SPECULATE_MIN_AGE_MS). */
            if (t && expected + BROKER_SPECULATE_MIN_AGE_MS / 1000.0 < left)
                s_start(b, e, t, age, median);
        }
    }
    int64_t soonest = b->now_ms + 5; /* a scan costs a walk over the held jobs */
    self->next_scan_ms = next > soonest ? next : soonest;
}

long broker_speculate_timeout_ms(const broker_t *b)
{
    const broker_speculate_t *self = &b->spec;
    if (!self->enabled || b->runs.total_queued > 0 || b->runs.total_running == 0 ||
        !b->registry.ready_head || self->n >= BROKER_SPECULATE_MAX)
        return -1;
    return self->next_scan_ms > b->now_ms ? (long)(self->next_scan_ms - b->now_ms) : 0;
}

int broker_speculate_take(broker_speculate_t *self, uint64_t job_id, broker_copy_t *out)
{
    for (uint32_t i = 0; i < self->n; i++) {
        if (self->copies[i].job_id != job_id)
            continue;
        *out = self->copies[i];
        s_remove(self, i);
        return 1;
    }
    return 0;
}

void broker_speculate_cancel(broker_t *b, broker_worker_t *w, uint64_t job_id)
{
    if (!b->workers)
        return;
    proto_msg_t msg = {.type = PROTO_CANCEL};
    msg.u.cancel.n_jobs = 1;
    msg.u.cancel.job_ids = &job_id;
    broker_envelope_send(b->workers, w->rid, w->rid_len, &msg);
}

void broker_speculate_drop_for(broker_t *b, broker_eval_t *e)
{
    broker_speculate_t *self = &b->spec;
    if (self->n == 0)
        return;
    int i = s_find_eval(self, e);
    if (i < 0)
        return;
    broker_copy_t c = self->copies[i];
    s_remove(self, (uint32_t)i);
    self->beaten++;
    broker_speculate_cancel(b, c.w, c.job_id);
    LOG_INFO("job %" PRIu64 " finished or left worker %s first; its copy, job %" PRIu64
             " on worker %s, is cancelled",
             e->live->job_id, e->live->worker ? e->live->worker->name : "?", c.job_id, c.w->name);
}

void broker_speculate_forget_worker(broker_t *b, broker_worker_t *w)
{
    broker_speculate_t *self = &b->spec;
    for (uint32_t i = self->n; i-- > 0;)
        if (self->copies[i].w == w)
            s_remove(self, i);
}
