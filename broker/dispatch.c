/* dispatch.c: job lifecycle transitions that involve workers (see dispatch.h
 * and the state table in evals.h). Owns no state of its own. */
#include "dispatch.h"
#include "quota.h"

#include <assert.h>
#include <math.h>
#include <inttypes.h>
#include <string.h>

#include "common/clock.h"
#include "common/log.h"
#include "envelope.h"

static void s_send_jobs(broker_t *b, broker_worker_t *w, uint32_t n)
{
    if (!b->workers || n == 0)
        return;
    proto_msg_t msg = {.type = PROTO_JOBS};
    msg.u.jobs.n_jobs = n;
    msg.u.jobs.jobs = b->jobs;
    broker_envelope_send(b->workers, w->rid, w->rid_len, &msg);
}

uint64_t broker_dispatch_turn(broker_t *b)
{
    uint64_t total = 0;
    broker_worker_t *w = b->registry.ready_head;
    while (w && b->runs.total_queued > 0) {
        broker_worker_t *next = w->ready_next; /* w leaves the list at 0 credits */
        uint32_t n = 0;
        size_t bytes = 0;
        while (w->credits > 0 && n < BROKER_JOBS_PER_MSG && bytes < BROKER_MSG_SOFT_BYTES) {
            broker_eval_t *e = broker_runs_pick(&b->runs, w);
            if (!e)
                break;
            e->state = BROKER_EVAL_RUNNING;
            e->live->worker = w;
            broker_eval_mark_sent(e, b->now_ms);
            broker_evals_bind_job(&b->evals, e, ++b->next_job_id);
            broker_worker_hold(w, e);
            broker_registry_spend(&b->registry, w);
            e->live->home->n_running++;
            b->runs.total_running++;
            proto_job_t *j = &b->jobs[n++];
            j->job_id = e->live->job_id;
            j->plugin = e->plugin->name;
            j->params = (char *)e->params; /* read only by the encoder */
            j->seed = e->seed;
            j->timeout_ms = e->live->timeout_ms;
            j->genome_len = e->live->genome_len;
            j->genome = e->live->genome;
            bytes += e->live->genome_len + 64;
            assert(broker_eval_check(&b->evals, e));
        }
        s_send_jobs(b, w, n);
        total += n;
        w = next;
    }
    b->jobs_sent += total;
    return total;
}

/* Takes e out of wherever it sits (queue or worker), keeping counts. */
static void s_detach(broker_t *b, broker_eval_t *e)
{
    if (e->state == BROKER_EVAL_RUNNING) {
        broker_speculate_drop_for(b, e); /* its copy is no longer wanted */
        broker_worker_release(e->live->worker, e);
        broker_evals_unbind_job(&b->evals, e);
        e->live->worker = NULL;
        assert(e->live->home->n_running > 0);
        e->live->home->n_running--;
        assert(b->runs.total_running > 0);
        b->runs.total_running--;
    } else if (e->state == BROKER_EVAL_QUEUED) {
        broker_runs_unqueue(&b->runs, e);
    }
}

void broker_dispatch_complete(broker_t *b, broker_eval_t *e, const broker_worker_t *w,
                              const proto_outcome_t *o)
{
    broker_quota_release(b, e); /* its genome no longer waits (quota.h) */
    broker_provenance_t prov = {.worker = broker_intern(&b->intern, w ? w->name : ""),
                                .host = broker_intern(&b->intern, w ? w->host : ""),
                                .cpu_seconds = o->cpu_seconds,
                                .peak_rss_kb = o->peak_rss_kb,
                                .finished_at = common_wall_seconds()};
    broker_eval_set_result(&b->evals, e, o->status, o->fitness, o->n_fitness, o->error, &prov);
    broker_store_note_result(b->store, e, o, w ? w->name : NULL, w ? w->host : NULL,
                             w ? w->arch : NULL);
    broker_eval_t *origin = NULL;
    if (e->fresh && e->live->origin) {
        /* A re-evaluation is done: later no-cache requests start another. */
        origin = e->live->origin;
        origin->live->again = NULL; /* pinned by it: its live part is there */
        e->live->origin = NULL;
    }
    /* One simulation, charged to the run whose queue it came from; requests
     * that attached to it (single flight) did not cost another. */
    e->live->home->n_evaluated++;
    e->live->home->p_evaluated++;
    for (uint32_t i = 0; i < e->live->n_waiters; i++) {
        broker_waiter_t *wt = broker_eval_waiter(e, i);
        broker_runs_answer(&b->runs, wt->run, wt->tag, wt->seed, e, 0);
    }
    broker_eval_clear_waiters(e);
    assert(broker_eval_check(&b->evals, e));
    /* Into the bounded cache (or freed, a re-evaluation: deliveries hold
     * copies); its origin is no longer pinned. */
    broker_evals_settle(&b->evals, e);
    if (origin)
        broker_evals_settle(&b->evals, origin);
}

static int s_retryable(uint32_t status)
{
    return status == PROTO_STATUS_CRASHED || status == PROTO_STATUS_TIMEOUT;
}

/* An evaluation that ran to its end (ok, or the plugin said it failed)
 * counts in the medians of its plugin and of its worker (timing.h). */
static void s_note_time(broker_worker_t *w, broker_plugin_t *plugin, const proto_outcome_t *o)
{
    if (o->status != PROTO_STATUS_OK && o->status != PROTO_STATUS_FAILED)
        return;
    broker_timing_add(&plugin->timing, o->wall_seconds);
    broker_timing_t *t = w ? broker_worker_timing(w, plugin) : NULL;
    if (t)
        broker_timing_add(t, o->wall_seconds);
}

/* The outcome of a straggler copy (speculate.h), its record already taken. */
static void s_copy_outcome(broker_t *b, broker_worker_t *w, const broker_copy_t *c,
                           const proto_outcome_t *o)
{
    broker_eval_t *e = c->e;
    if (w != c->w) {
        LOG_WARN("ignored the result of job %" PRIu64 " from worker %s: it was sent to %s",
                 o->job_id, w ? w->name : "(unregistered)", c->w->name);
        return;
    }
    if (s_retryable(o->status)) {
        b->spec.failed++;
        LOG_INFO("copy job %" PRIu64 " of job %" PRIu64 " %s on worker %s: %s; the first "
                 "keeps running on %s",
                 o->job_id, e->live->job_id, proto_status_name((int)o->status), w->name,
                 o->error ? o->error : "", e->live->worker->name);
        return;
    }
    assert(e->state == BROKER_EVAL_RUNNING);
    s_note_time(w, e->plugin, o);
    b->spec.won++;
    LOG_INFO("job %" PRIu64 ": its copy, job %" PRIu64 " on worker %s, finished first (%.3f s "
             "after it was sent); the first, on worker %s, is cancelled",
             e->live->job_id, o->job_id, w->name, (double)(b->now_ms - c->sent_ms) / 1000.0,
             e->live->worker->name);
    broker_speculate_cancel(b, e->live->worker, e->live->job_id);
    s_detach(b, e);
    broker_dispatch_complete(b, e, w, o);
}

void broker_dispatch_outcome(broker_t *b, broker_worker_t *w, const proto_outcome_t *o)
{
    if (w) {
        w->outcomes++;
        /* Bounded like the store's copy (cache.c): a bad figure adds nothing. */
        if (isfinite(o->cpu_seconds) && o->cpu_seconds > 0 && o->cpu_seconds < 1e9)
            w->cpu_seconds += o->cpu_seconds;
    }
    broker_copy_t copy;
    if (broker_speculate_take(&b->spec, o->job_id, &copy)) {
        s_copy_outcome(b, w, &copy, o);
        return;
    }
    broker_eval_t *e = broker_evals_by_job(&b->evals, o->job_id);
    if (e) {
        if (e->live->worker != w) {
            LOG_WARN("ignored the result of job %" PRIu64 " from worker %s: it was sent to %s",
                     o->job_id, w ? w->name : "(unregistered)", e->live->worker->name);
            return;
        }
        s_note_time(w, e->plugin, o);
        s_detach(b, e);
        if (s_retryable(o->status)) {
            e->live->attempts++;
            unsigned max_attempts = e->live->max_attempts ? e->live->max_attempts : b->attempts;
            if (e->live->attempts < max_attempts) {
                LOG_INFO("job %" PRIu64 " %s on worker %s (attempt %u of %u): %s; retrying",
                         o->job_id, proto_status_name((int)o->status), w->name,
                         (unsigned)e->live->attempts, max_attempts, o->error ? o->error : "");
                e->live->avoid_worker = w->serial;
                e->state = BROKER_EVAL_QUEUED;
                broker_runs_enqueue(&b->runs, e->live->home, e, 1);
                assert(broker_eval_check(&b->evals, e));
                return;
            }
            LOG_WARN("job %" PRIu64 " %s %u times, last on worker %s: %s; failing it", o->job_id,
                     proto_status_name((int)o->status), (unsigned)e->live->attempts, w->name,
                     o->error ? o->error : "");
        }
        broker_dispatch_complete(b, e, w, o);
        return;
    }
    e = broker_evals_orphan_take(&b->evals, o->job_id);
    if (e && e->state != BROKER_EVAL_DONE && !s_retryable(o->status)) {
        /* A dropped worker finished after all: the first result wins, and the
         * re-queued or re-dispatched copy is withdrawn (its later result finds
         * no job id and is ignored). */
        LOG_INFO("accepted a late result for job %" PRIu64 " from %s", o->job_id,
                 w ? w->name : "a dropped worker");
        s_detach(b, e);
        broker_dispatch_complete(b, e, w, o);
        return;
    }
    if (e)
        broker_evals_settle(&b->evals, e); /* no longer pinned by the orphan record */
    LOG_INFO("ignored a result for job %" PRIu64 " from %s%s: no such job is held there", o->job_id,
             w ? "worker " : "an unregistered worker", w ? w->name : "");
}

uint32_t broker_dispatch_lose_worker(broker_t *b, broker_worker_t *w)
{
    /* Counted in the stored attempts, not against --attempts: losing a
     * machine says nothing about the job. */
    for (broker_eval_t *e = w->jobs_head; e; e = e->next)
        if (e->live->lost < UINT16_MAX)
            e->live->lost++;
    return broker_dispatch_drop_worker(b, w);
}

uint32_t broker_dispatch_drop_worker(broker_t *b, broker_worker_t *w)
{
    uint32_t n = 0;
    /* Tail first, each pushed to the front: the oldest ends up first again. */
    broker_eval_t *e;
    while ((e = w->jobs_tail)) {
        broker_evals_orphan_add(&b->evals, e->live->job_id, e);
        s_detach(b, e);
        e->state = BROKER_EVAL_QUEUED;
        broker_runs_enqueue(&b->runs, e->live->home, e, 1);
        assert(broker_eval_check(&b->evals, e));
        n++;
    }
    broker_speculate_forget_worker(b, w);
    broker_registry_remove(&b->registry, w);
    return n;
}

uint32_t broker_dispatch_hand_back(broker_t *b, broker_worker_t *w, const uint64_t *job_ids,
                                   uint32_t n)
{
    uint32_t back = 0;
    /* Last first, each pushed to the front: the oldest ends up first again.
     * No avoid_worker: w takes nothing while paused, and when every other
     * carrier is paused too, w must be free to take its jobs again. */
    for (uint32_t i = n; i-- > 0;) {
        broker_copy_t copy;
        if (broker_speculate_take(&b->spec, job_ids[i], &copy))
            continue; /* a copy: the first keeps running */
        broker_eval_t *e = broker_evals_by_job(&b->evals, job_ids[i]);
        if (!e || e->live->worker != w)
            continue;
        s_detach(b, e);
        e->state = BROKER_EVAL_QUEUED;
        broker_runs_enqueue(&b->runs, e->live->home, e, 1);
        assert(broker_eval_check(&b->evals, e));
        back++;
    }
    return back;
}
