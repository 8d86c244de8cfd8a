/* status_page.c: the HTML status page (status_page.h). Layout: a line of
 * totals, one card per machine (host) with a slot bar and its workers, a
 * table of runs with a progress bar, in-flight runs first, then warnings. */
#include "status_page.h"

#include <inttypes.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "outbuf.h"
#include "status.h"

static const char s_head[] =
    "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n"
    "<meta http-equiv=\"refresh\" content=\"%d\">\n"
    "<title>fitfarm pool</title>\n<style>\n"
    "body{font:15px/1.4 sans-serif;margin:1.5em 2em;color:#1d2a33;background:#f6f8f7}\n"
    "h1{font-size:1.4em;margin:0 0 .3em}h2{font-size:1.1em;margin:1.4em 0 .5em}\n"
    ".sum{color:#45606e;margin-bottom:1em}\n"
    ".hosts{display:flex;flex-wrap:wrap;gap:.8em}\n"
    ".host{background:#fff;border:1px solid #cfdad5;border-radius:6px;padding:.6em .8em;"
    "min-width:16em}\n"
    ".host b{font-size:1.05em}.arch{color:#6b7f88;font-size:.85em}\n"
    ".bar{background:#e3eae7;border-radius:3px;height:.7em;margin:.35em 0;overflow:hidden}\n"
    ".fill{background:#2f8f6a;height:100%%}\n"
    ".w{font-size:.85em;color:#33444d}.plug{color:#6b7f88}\n"
    "table{border-collapse:collapse;background:#fff;border:1px solid #cfdad5}\n"
    "th,td{padding:.3em .7em;text-align:right;border-bottom:1px solid #e3eae7}\n"
    "th{background:#eaf0ed;font-weight:600}td.id,th.id{text-align:left}\n"
    "td.p{min-width:10em}.idle{color:#7b8b92}\n"
    ".warn{background:#fff4e0;border:1px solid #e6c27a;padding:.4em .7em;margin:.3em 0}\n"
    "footer{margin-top:1.5em;color:#7b8b92;font-size:.8em}\n"
    "</style></head><body>\n";

static int s_cmp_workers(const void *a, const void *b)
{
    const proto_worker_info_t *x = a, *y = b;
    int h = strcmp(x->host, y->host);
    return h ? h : strcmp(x->name, y->name);
}

static int s_active(const proto_run_info_t *r)
{
    return r->queued + r->running > 0;
}

static int s_cmp_runs(const void *a, const void *b)
{
    const proto_run_info_t *x = a, *y = b;
    if (s_active(x) != s_active(y))
        return s_active(y) - s_active(x); /* in flight first */
    return strcmp(x->run_id, y->run_id);
}

static void s_bar(broker_outbuf_t *o, uint64_t part, uint64_t whole)
{
    unsigned pct = whole ? (unsigned)((part * 100 + whole / 2) / whole) : 0;
    broker_outbuf_printf(o, "<div class=\"bar\"><div class=\"fill\" style=\"width:%u%%\">"
                            "</div></div>", pct > 100 ? 100 : pct);
}

char *broker_status_page_html(broker_t *b, size_t *len)
{
    broker_outbuf_t o = {0};
    proto_status_t st;
    broker_status_fill(b, NULL, 1, &st);
    /* Sorted in place: the snapshot is ours (its strings are borrowed). */
    qsort(st.workers, st.n_workers, sizeof *st.workers, s_cmp_workers);
    qsort(st.runs, st.n_runs, sizeof *st.runs, s_cmp_runs);
    uint64_t slots = 0, busy = 0, answered = 0, cached = 0;
    uint32_t hosts = 0;
    for (uint32_t i = 0; i < st.n_workers; i++) {
        slots += st.workers[i].slots;
        busy += st.workers[i].busy;
        hosts += i == 0 || strcmp(st.workers[i].host, st.workers[i - 1].host) != 0;
    }
    for (uint32_t i = 0; i < st.n_runs; i++) {
        answered += st.runs[i].done;
        cached += st.runs[i].cached;
    }
    broker_outbuf_printf(&o, s_head, BROKER_STATUS_PAGE_REFRESH_S);
    broker_outbuf_printf(&o, "<h1>fitfarm pool</h1>\n<div class=\"sum\">%u machine%s, %u "
                             "worker%s, %" PRIu64 " of %" PRIu64 " slots running",
                         hosts, hosts == 1 ? "" : "s", st.n_workers,
                         st.n_workers == 1 ? "" : "s", busy, slots);
    if (answered)
        broker_outbuf_printf(&o, "; answered from the cache: %" PRIu64 " of %" PRIu64
                                 " requests (%.1f %%)",
                             cached, answered, 100.0 * (double)cached / (double)answered);
    broker_outbuf_printf(&o, "</div>\n<h2>Machines</h2>\n");
    if (!st.n_workers)
        broker_outbuf_printf(&o, "<p class=\"idle\">No worker is connected.</p>\n");
    broker_outbuf_printf(&o, "<div class=\"hosts\">\n");
    for (uint32_t i = 0; i < st.n_workers;) {
        uint32_t j = i;
        uint64_t hs = 0, hb = 0;
        while (j < st.n_workers && strcmp(st.workers[j].host, st.workers[i].host) == 0) {
            hs += st.workers[j].slots;
            hb += st.workers[j].busy;
            j++;
        }
        broker_outbuf_printf(&o, "<div class=\"host\"><b>");
        broker_outbuf_html(&o, st.workers[i].host);
        broker_outbuf_printf(&o, "</b> <span class=\"arch\">");
        broker_outbuf_html(&o, st.workers[i].arch);
        broker_outbuf_printf(&o, "</span>");
        s_bar(&o, hb, hs);
        broker_outbuf_printf(&o, "%" PRIu64 " of %" PRIu64 " slots running\n", hb, hs);
        for (uint32_t k = i; k < j; k++) {
            const proto_worker_info_t *w = &st.workers[k];
            broker_outbuf_printf(&o, "<div class=\"w\">");
            broker_outbuf_html(&o, w->name);
            broker_outbuf_printf(&o, " %u/%u <span class=\"plug\">", w->busy, w->slots);
            for (uint32_t p = 0; p < w->n_plugins; p++) {
                broker_outbuf_printf(&o, p ? " " : "");
                broker_outbuf_html(&o, w->plugins[p]);
            }
            broker_outbuf_printf(&o, "</span></div>\n");
        }
        broker_outbuf_printf(&o, "</div>\n");
        i = j;
    }
    broker_outbuf_printf(&o, "</div>\n<h2>Runs</h2>\n");
    if (!st.n_runs)
        broker_outbuf_printf(&o, "<p class=\"idle\">No run is held in memory.</p>\n");
    else
        broker_outbuf_printf(&o, "<table><tr><th class=\"id\">run</th><th>progress</th>"
                                 "<th>answered</th><th>requested</th><th>waiting</th>"
                                 "<th>on workers</th><th>cached</th><th>failed</th></tr>\n");
    for (uint32_t i = 0; i < st.n_runs && i < BROKER_STATUS_PAGE_RUNS; i++) {
        const proto_run_info_t *r = &st.runs[i];
        uint64_t requested = r->done + r->queued + r->running;
        broker_outbuf_printf(&o, "<tr%s><td class=\"id\">", s_active(r) ? "" : " class=\"idle\"");
        broker_outbuf_html(&o, r->run_id);
        broker_outbuf_printf(&o, "</td><td class=\"p\">");
        s_bar(&o, r->done, requested);
        broker_outbuf_printf(&o,
                             "</td><td>%" PRIu64 "</td><td>%" PRIu64 "</td><td>%" PRIu64
                             "</td><td>%" PRIu64 "</td><td>%" PRIu64 "</td><td>%" PRIu64
                             "</td></tr>\n",
                             r->done, requested, r->queued, r->running, r->cached, r->failed);
    }
    if (st.n_runs)
        broker_outbuf_printf(&o, "</table>\n");
    if (st.n_runs > BROKER_STATUS_PAGE_RUNS)
        broker_outbuf_printf(&o, "<p>%u more runs not listed (fitfarm status --json lists "
                                 "them all).</p>\n",
                             st.n_runs - BROKER_STATUS_PAGE_RUNS);
    if (st.n_warnings)
        broker_outbuf_printf(&o, "<h2>Warnings</h2>\n");
    for (uint32_t i = 0; i < st.n_warnings; i++) {
        broker_outbuf_printf(&o, "<div class=\"warn\">");
        broker_outbuf_html(&o, st.warnings[i]);
        broker_outbuf_printf(&o, "</div>\n");
    }
    char when[32] = "";
    time_t now = time(NULL);
    struct tm tm;
    if (gmtime_r(&now, &tm))
        strftime(when, sizeof when, "%Y-%m-%d %H:%M:%S UTC", &tm);
    broker_outbuf_printf(&o, "<footer>As of %s; this page reloads every %d s.</footer>\n"
                             "</body></html>\n",
                         when, BROKER_STATUS_PAGE_REFRESH_S);
    broker_status_clear(&st);
    return broker_outbuf_take(&o, len);
}
