/* metrics.c: the metrics page (metrics.h). Names are ours, prefixed
 * fitfarm_; counters end in _total and durations are in seconds (the
 * Prometheus naming convention, common practice). Label values from the
 * network are escaped (outbuf.h). */
#include "metrics.h"

#include <inttypes.h>

#include "outbuf.h"
#include "stats.h"
#include "status.h"

static void s_family(broker_outbuf_t *o, const char *name, const char *type, const char *help)
{
    broker_outbuf_printf(o, "# HELP %s %s\n# TYPE %s %s\n", name, help, name, type);
}

/* One sample per worker: value picks the figure. */
static void s_workers(broker_outbuf_t *o, broker_t *b, const char *name, int which)
{
    for (broker_worker_t *w = b->registry.seen_head; w; w = w->seen_next) {
        broker_outbuf_printf(o, "%s{worker=\"", name);
        broker_outbuf_label(o, w->name);
        broker_outbuf_printf(o, "\",host=\"");
        broker_outbuf_label(o, w->host);
        broker_outbuf_printf(o, "\",registration=\"%" PRIu64 "\"} ", w->serial);
        uint32_t held = w->held + w->copies;
        uint32_t busy = held < w->slots ? held : w->slots; /* as status.c */
        if (which == 0)
            broker_outbuf_printf(o, "%u\n", w->slots);
        else if (which == 1)
            broker_outbuf_printf(o, "%u\n", busy);
        else if (which == 2)
            broker_outbuf_printf(o, "%" PRIu64 "\n", w->outcomes);
        else
            broker_outbuf_printf(o, "%.17g\n", w->cpu_seconds);
    }
}

static void s_runs(broker_outbuf_t *o, const proto_status_t *st, const char *name, int which)
{
    for (uint32_t i = 0; i < st->n_runs; i++) {
        const proto_run_info_t *r = &st->runs[i];
        uint64_t v = which == 0   ? r->queued
                     : which == 1 ? r->running
                     : which == 2 ? r->done
                     : which == 3 ? r->evaluated
                     : which == 4 ? r->cached
                                  : r->failed;
        broker_outbuf_printf(o, "%s{run=\"", name);
        broker_outbuf_label(o, r->run_id);
        broker_outbuf_printf(o, "\"} %" PRIu64 "\n", v);
    }
}

char *broker_metrics_text(broker_t *b, size_t *len)
{
    broker_outbuf_t o = {0};
    proto_status_t st;
    broker_status_fill(b, NULL, 1, &st);

    s_family(&o, "fitfarm_workers", "gauge", "Workers registered with the broker.");
    broker_outbuf_printf(&o, "fitfarm_workers %u\n", st.n_workers);
    s_family(&o, "fitfarm_connections", "gauge",
             "Connections open on an endpoint, handshakes under way included.");
    broker_outbuf_printf(&o, "fitfarm_connections{endpoint=\"clients\"} %" PRIu64 "\n",
                         broker_stats_connections(BROKER_STATS_CLIENTS));
    broker_outbuf_printf(&o, "fitfarm_connections{endpoint=\"workers\"} %" PRIu64 "\n",
                         broker_stats_connections(BROKER_STATS_WORKERS));

    s_family(&o, "fitfarm_worker_slots", "gauge", "Slots a worker offers.");
    s_workers(&o, b, "fitfarm_worker_slots", 0);
    s_family(&o, "fitfarm_worker_busy_slots", "gauge",
             "Slots running an evaluation (prefetched jobs not counted).");
    s_workers(&o, b, "fitfarm_worker_busy_slots", 1);
    s_family(&o, "fitfarm_worker_outcomes_total", "counter",
             "Outcomes a worker reported since it registered.");
    s_workers(&o, b, "fitfarm_worker_outcomes_total", 2);
    s_family(&o, "fitfarm_worker_evaluation_seconds_total", "counter",
             "CPU seconds a worker reported for its evaluations since it registered.");
    s_workers(&o, b, "fitfarm_worker_evaluation_seconds_total", 3);

    s_family(&o, "fitfarm_run_queued", "gauge", "Evaluations of a run waiting for a worker.");
    s_runs(&o, &st, "fitfarm_run_queued", 0);
    s_family(&o, "fitfarm_run_running", "gauge",
             "Evaluations of a run sent to a worker (running or prefetched).");
    s_runs(&o, &st, "fitfarm_run_running", 1);
    s_family(&o, "fitfarm_run_done_total", "counter",
             "Requests of a run answered (durable in the store).");
    s_runs(&o, &st, "fitfarm_run_done_total", 2);
    s_family(&o, "fitfarm_run_evaluated_total", "counter",
             "Evaluations a run paid for (simulated on a worker).");
    s_runs(&o, &st, "fitfarm_run_evaluated_total", 3);
    s_family(&o, "fitfarm_run_cached_total", "counter",
             "Requests of a run answered from a stored result.");
    s_runs(&o, &st, "fitfarm_run_cached_total", 4);
    s_family(&o, "fitfarm_run_failed_total", "counter",
             "Requests of a run answered with a status other than ok.");
    s_runs(&o, &st, "fitfarm_run_failed_total", 5);

    s_family(&o, "fitfarm_requests_answered_total", "counter",
             "Requests answered over every run since the broker started.");
    broker_outbuf_printf(&o, "fitfarm_requests_answered_total %" PRIu64 "\n",
                         b->runs.answered_total);
    s_family(&o, "fitfarm_cache_hits_total", "counter",
             "Requests answered from a stored result over every run since the broker started.");
    broker_outbuf_printf(&o, "fitfarm_cache_hits_total %" PRIu64 "\n", b->runs.cached_total);
    s_family(&o, "fitfarm_jobs_sent_total", "counter", "Jobs sent to workers.");
    broker_outbuf_printf(&o, "fitfarm_jobs_sent_total %" PRIu64 "\n", b->jobs_sent);
    s_family(&o, "fitfarm_straggler_copies_total", "counter",
             "Second copies of slow jobs (speculate.h), by how they ended: started, won (finished "
             "first), beaten (the first finished first), failed (crashed or timed out).");
    const broker_speculate_t *sp = &b->spec;
    const uint64_t by_end[4] = {sp->started, sp->won, sp->beaten, sp->failed};
    static const char *const ends[4] = {"started", "won", "beaten", "failed"};
    for (int i = 0; i < 4; i++)
        broker_outbuf_printf(&o, "fitfarm_straggler_copies_total{end=\"%s\"} %" PRIu64 "\n",
                             ends[i], by_end[i]);
    s_family(&o, "fitfarm_messages_dropped_total", "counter",
             "Messages dropped as bad or not permitted.");
    broker_outbuf_printf(&o, "fitfarm_messages_dropped_total %" PRIu64 "\n", b->dropped_msgs);

    s_family(&o, "fitfarm_refusals_total", "counter", "Batches refused, by reason.");
    for (uint32_t c = 0; c < BROKER_STATS_REFUSE_CODES; c++) {
        const char *label = broker_stats_refuse_label(c);
        if (label)
            broker_outbuf_printf(&o, "fitfarm_refusals_total{reason=\"%s\"} %" PRIu64 "\n", label,
                                 b->stats.refused[c]);
    }
    broker_outbuf_printf(&o, "fitfarm_refusals_total{reason=\"other\"} %" PRIu64 "\n",
                         b->stats.refused[0]);

    const broker_hist_t *h = broker_store_commit_times(b->store);
    s_family(&o, "fitfarm_store_commit_seconds", "histogram",
             "Time of each store commit (one per loop turn that wrote).");
    uint64_t cum = 0;
    for (int i = 0; i < BROKER_HIST_BUCKETS; i++) {
        cum += h->in_bucket[i];
        broker_outbuf_printf(&o, "fitfarm_store_commit_seconds_bucket{le=\"%g\"} %" PRIu64 "\n",
                             broker_hist_bounds[i], cum);
    }
    broker_outbuf_printf(&o, "fitfarm_store_commit_seconds_bucket{le=\"+Inf\"} %" PRIu64 "\n",
                         h->count);
    broker_outbuf_printf(&o, "fitfarm_store_commit_seconds_sum %.17g\n", h->sum);
    broker_outbuf_printf(&o, "fitfarm_store_commit_seconds_count %" PRIu64 "\n", h->count);

    broker_status_clear(&st);
    return broker_outbuf_take(&o, len);
}
