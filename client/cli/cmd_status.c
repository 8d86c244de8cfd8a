/* cmd_status.c: `fitfarm status`: what a pool looks like right now: the
 * machines (workers grouped by host, running out of total slots as a bar,
 * plugins), the runs with work in flight first (answered of requested,
 * cached, failed; rate and time left between refreshes with --watch), the
 * share answered from the cache, and the broker's warnings. A view for
 * people, or one JSON object for scripts. Not here: how the broker counts
 * (broker/). */
#include <jansson.h>
#include <signal.h>
#include <time.h>
#include <unistd.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli_keys.h"
#include "cli_util.h"
#include "client/include/fitfarm.h"
#include "commands.h"

static const char s_help[] =
    "usage: fitfarm status --broker ENDPOINT [--run ID] [--active] [--watch [SECONDS]]\n"
    "                      [--json] [--timeout SECONDS]\n"
    "\n"
    "Shows the pool behind a broker: the machines (workers grouped by host, slots\n"
    "running out of total as a bar, plugins), the runs with work in flight first\n"
    "(answered of requested, cached, failed; with --watch also the answer rate and\n"
    "the time left), the share answered from the cache, and the broker's warnings.\n"
    "\n"
    "options:\n"
    "  --broker ENDPOINT  the broker's client endpoint, e.g. tcp://host:5555 (required)\n"
    "  --run ID           only this run\n"
    "  --active           only runs with requests queued or running\n"
    "  --watch [SECONDS]  refresh every SECONDS (default 2) until interrupted; on a\n"
    "                     terminal the view is redrawn in place\n"
    "  --json             one JSON object per refresh instead of the view:\n"
    "                     {\"workers\": [{\"name\", \"host\", \"arch\", \"slots\", \"busy\"\n"
    "                     (evaluations running, never prefetched jobs), \"plugins\":\n"
    "                     [\"name@version\"], \"speed\" (calibration score at start:\n"
    "                     million rounds/s of a fixed loop on one core; 0 = unknown),\n"
    "                     \"state\" (\"active\", \"draining\" or \"paused: WHY\"),\n"
    "                     \"median_seconds\" (per plugin: median wall seconds of\n"
    "                     its last evaluations there; null = none yet)}],\n"
    "                     \"runs\": [{\"run\",\n"
    "                     \"queued\" (waiting for a worker), \"running\" (sent to a\n"
    "                     worker: running or\n"
    "                     prefetched there), \"done\" (requests answered),\n"
    "                     \"evaluated\" (simulations it paid for), \"cached\" (answered\n"
    "                     from the store), \"failed\" (answered with a status other than\n"
    "                     ok), \"requested\" (done + queued + running), \"active\"\n"
    "                     (bool)}], \"warnings\": [str]}\n"
    "  --timeout SECONDS  how long to wait for the broker (default 10)\n"
    "\n"
    "exit status: 0 ok, 1 the broker did not answer, 2 usage error.\n";

static int s_usage(const char *fmt, const char *arg)
{
    fputs("fitfarm status: ", stderr);
    fprintf(stderr, fmt, arg ? arg : "");
    fputs(" (see fitfarm status --help)\n", stderr);
    return 2;
}

typedef struct {
    const char *run; /* --run ID, or NULL */
    int active;      /* --active */
} s_filter_t;

static int s_active(const fitfarm_run_info_t *r)
{
    return r->queued + r->running > 0;
}

static int s_run_shown(const fitfarm_run_info_t *r, const s_filter_t *f)
{
    if (f->run && strcmp(r->run_id, f->run) != 0)
        return 0;
    return !f->active || s_active(r);
}

/* Answered counts of the previous refresh, by run, for --watch rates. */
typedef struct {
    char **ids;
    uint64_t *done;
    size_t n;
} s_history_t;

static const uint64_t *s_history_get(const s_history_t *h, const char *id)
{
    for (size_t i = 0; i < h->n; i++)
        if (strcmp(h->ids[i], id) == 0)
            return &h->done[i];
    return NULL;
}

static void s_history_free(s_history_t *h)
{
    for (size_t i = 0; i < h->n; i++)
        free(h->ids[i]);
    free(h->ids);
    free(h->done);
    memset(h, 0, sizeof *h);
}

/* Replaces h with st's runs (best effort: on out of memory h is empty). */
static void s_history_take(s_history_t *h, const fitfarm_status_t *st)
{
    s_history_free(h);
    size_t n = fitfarm_status_n_runs(st);
    h->ids = calloc(n ? n : 1, sizeof *h->ids);
    h->done = calloc(n ? n : 1, sizeof *h->done);
    if (!h->ids || !h->done) {
        s_history_free(h);
        return;
    }
    for (size_t i = 0; i < n; i++) {
        fitfarm_run_info_t r = FITFARM_RUN_INFO_INIT;
        fitfarm_status_run(st, i, &r);
        h->ids[h->n] = strdup(r.run_id);
        if (!h->ids[h->n])
            break;
        h->done[h->n++] = r.done;
    }
}

static int s_print_json(const fitfarm_status_t *st, const s_filter_t *filter)
{
    json_t *root = json_object();
    json_t *workers = json_array();
    json_t *runs = json_array();
    json_t *warnings = json_array();
    if (!root || !workers || !runs || !warnings)
        goto nomem;
    json_object_set_new(root, "workers", workers);
    json_object_set_new(root, "runs", runs);
    json_object_set_new(root, "warnings", warnings);
    for (size_t i = 0; i < fitfarm_status_n_workers(st); i++) {
        fitfarm_worker_info_t wi = FITFARM_WORKER_INFO_INIT, *w = &wi;
        fitfarm_status_worker(st, i, w);
        json_t *plugins = json_array();
        json_t *medians = json_array();
        for (size_t p = 0; plugins && medians && p < w->n_plugins; p++) {
            json_array_append_new(plugins, json_string(w->plugins[p]));
            double m = w->median_seconds ? w->median_seconds[p] : 0;
            json_array_append_new(medians, m > 0 ? json_real(m) : json_null());
        }
        json_array_append_new(
            workers, json_pack("{s:s?, s:s?, s:s?, s:I, s:I, s:o?, s:f, s:s?, s:o?}", "name",
                               w->name, "host", w->host, "arch", w->arch, "slots",
                               (json_int_t)w->slots, "busy", (json_int_t)w->busy, "plugins",
                               plugins, "speed", w->speed, "state", w->state,
                               "median_seconds", medians));
    }
    for (size_t i = 0; i < fitfarm_status_n_runs(st); i++) {
        fitfarm_run_info_t ri = FITFARM_RUN_INFO_INIT, *r = &ri;
        fitfarm_status_run(st, i, r);
        if (!s_run_shown(r, filter))
            continue;
        json_array_append_new(
            runs, json_pack("{s:s?, s:I, s:I, s:I, s:I, s:I, s:I, s:I, s:b}", "run", r->run_id,
                            "queued", (json_int_t)r->queued, "running", (json_int_t)r->running,
                            "done", (json_int_t)r->done, "evaluated", (json_int_t)r->evaluated,
                            "cached", (json_int_t)r->cached, "failed", (json_int_t)r->failed,
                            "requested", (json_int_t)(r->done + r->queued + r->running),
                            "active", s_active(r)));
    }
    for (size_t i = 0; i < fitfarm_status_n_warnings(st); i++)
        json_array_append_new(warnings, json_string(fitfarm_status_warning(st, i)));
    char *text = json_dumps(root, JSON_COMPACT | JSON_PRESERVE_ORDER);
    json_decref(root);
    if (!text)
        return 1;
    puts(text);
    free(text);
    return 0;
nomem:
    json_decref(root);
    json_decref(workers);
    json_decref(runs);
    json_decref(warnings);
    fprintf(stderr, "fitfarm status: out of memory\n");
    return 1;
}

/* A bar of width cells, filled in proportion to part/whole. */
static void s_bar(char *out, size_t width, uint64_t part, uint64_t whole)
{
    size_t fill = whole ? (size_t)((part * width + whole / 2) / whole) : 0;
    if (fill > width)
        fill = width;
    size_t n = 0;
    out[n++] = '[';
    for (size_t i = 0; i < width; i++)
        out[n++] = i < fill ? '#' : '.';
    out[n++] = ']';
    out[n] = '\0';
}

/* "1,234,567" */
static const char *s_count(uint64_t v, char buf[32])
{
    char raw[24];
    int n = snprintf(raw, sizeof raw, "%llu", (unsigned long long)v);
    size_t o = 0;
    for (int i = 0; i < n; i++) {
        if (i > 0 && (n - i) % 3 == 0)
            buf[o++] = ',';
        buf[o++] = raw[i];
    }
    buf[o] = '\0';
    return buf;
}

/* "42 s", "7 min", "3.5 h" */
static void s_duration(char *out, size_t len, double seconds)
{
    if (seconds < 90)
        snprintf(out, len, "%.0f s", seconds);
    else if (seconds < 5400)
        snprintf(out, len, "%.0f min", seconds / 60);
    else
        snprintf(out, len, "%.1f h", seconds / 3600);
}

static int s_cmp_workers(const void *a, const void *b)
{
    const fitfarm_worker_info_t *x = a, *y = b;
    int h = strcmp(x->host, y->host);
    return h ? h : strcmp(x->name, y->name);
}

static int s_cmp_runs(const void *a, const void *b)
{
    const fitfarm_run_info_t *x = a, *y = b;
    int ax = s_active(x), ay = s_active(y);
    if (ax != ay)
        return ay - ax; /* in flight first */
    return strcmp(x->run_id, y->run_id);
}

#define S_SHOW_RUNS 20 /* runs listed before "... more" */

static void s_print_view(const fitfarm_status_t *st, const s_filter_t *filter,
                         const s_history_t *prev, double dt, const char *broker)
{
    size_t n_workers = fitfarm_status_n_workers(st), n_runs = fitfarm_status_n_runs(st);
    uint64_t slots = 0, busy = 0;
    fitfarm_worker_info_t *ws = calloc(n_workers ? n_workers : 1, sizeof *ws);
    fitfarm_run_info_t *rs = calloc(n_runs ? n_runs : 1, sizeof *rs);
    if (!ws || !rs) {
        fprintf(stderr, "fitfarm status: out of memory\n");
        free(ws);
        free(rs);
        return;
    }
    size_t n_hosts = 0;
    for (size_t i = 0; i < n_workers; i++) {
        ws[i] = (fitfarm_worker_info_t)FITFARM_WORKER_INFO_INIT;
        fitfarm_status_worker(st, i, &ws[i]);
        slots += ws[i].slots;
        busy += ws[i].busy;
        size_t j = 0;
        while (j < i && strcmp(ws[j].host, ws[i].host) != 0)
            j++;
        n_hosts += j == i;
    }
    qsort(ws, n_workers, sizeof *ws, s_cmp_workers); /* a stable view between refreshes */
    size_t shown = 0;
    uint64_t answered = 0, cached = 0;
    for (size_t i = 0; i < n_runs; i++) {
        fitfarm_run_info_t r = FITFARM_RUN_INFO_INIT;
        fitfarm_status_run(st, i, &r);
        answered += r.done;
        cached += r.cached;
        if (s_run_shown(&r, filter))
            rs[shown++] = r;
    }
    qsort(rs, shown, sizeof *rs, s_cmp_runs);
    char a[32], b[32], c[32], bar[64];
    printf("pool at %s: %zu machine%s, %zu worker%s, %s of %s slots running\n", broker, n_hosts,
           n_hosts == 1 ? "" : "s", n_workers, n_workers == 1 ? "" : "s", s_count(busy, a),
           s_count(slots, b));
    if (answered)
        printf("answered from the cache: %s of %s requests (%.1f %%)\n", s_count(cached, a),
               s_count(answered, b), 100.0 * (double)cached / (double)answered);
    if (n_workers)
        printf("\nmachines\n");
    for (size_t i = 0; i < n_workers; i++) {
        size_t j = 0;
        while (j < i && strcmp(ws[j].host, ws[i].host) != 0)
            j++;
        if (j < i)
            continue; /* host already printed */
        unsigned h_slots = 0, h_busy = 0;
        for (size_t k = i; k < n_workers; k++)
            if (strcmp(ws[k].host, ws[i].host) == 0) {
                h_slots += ws[k].slots;
                h_busy += ws[k].busy;
            }
        s_bar(bar, 20, h_busy, h_slots);
        printf("  %-20s %s %4u/%-4u %s\n", ws[i].host, bar, h_busy, h_slots, ws[i].arch);
        for (size_t k = i; k < n_workers; k++) {
            if (strcmp(ws[k].host, ws[i].host) != 0)
                continue;
            printf("      %-24s %u/%u  speed %-6.0f %s  ", ws[k].name, ws[k].busy, ws[k].slots,
                   ws[k].speed, ws[k].state ? ws[k].state : "");
            for (size_t p = 0; p < ws[k].n_plugins; p++) {
                printf("%s%s", p ? " " : "", ws[k].plugins[p]);
                double m = ws[k].median_seconds ? ws[k].median_seconds[p] : 0;
                if (m > 0)
                    printf(" (%.3g s)", m);
            }
            printf("\n");
        }
    }
    printf("\nruns (%zu of %zu%s)\n", shown, n_runs,
           filter->run ? ", --run" : filter->active ? ", in flight" : "");
    for (size_t i = 0; i < shown && i < S_SHOW_RUNS; i++) {
        const fitfarm_run_info_t *r = &rs[i];
        uint64_t requested = r->done + r->queued + r->running;
        s_bar(bar, 20, r->done, requested);
        printf("  %-28s %s %s of %s answered", r->run_id, bar, s_count(r->done, a),
               s_count(requested, b));
        printf(", cached %s, failed %s", s_count(r->cached, c), s_count(r->failed, a));
        if (s_active(r))
            printf(", %s waiting, %s on workers", s_count(r->queued, a),
                   s_count(r->running, b));
        /* Rate and time left from the previous refresh (--watch). */
        const uint64_t *before = prev ? s_history_get(prev, r->run_id) : NULL;
        if (before && dt > 0 && r->done >= *before && s_active(r)) {
            double rate = (double)(r->done - *before) / dt;
            printf(", %.1f/s", rate);
            if (rate > 0) {
                char left[32];
                s_duration(left, sizeof left, (double)(r->queued + r->running) / rate);
                printf(", about %s left", left);
            }
        }
        printf("\n");
    }
    if (shown > S_SHOW_RUNS)
        printf("  ... %zu more (narrow with --run ID or --active, or use --json)\n",
               shown - S_SHOW_RUNS);
    size_t n_warn = fitfarm_status_n_warnings(st);
    if (n_warn)
        printf("\nwarnings\n");
    for (size_t i = 0; i < n_warn; i++)
        printf("  ! %s\n", fitfarm_status_warning(st, i));
    free(ws);
    free(rs);
}

static volatile sig_atomic_t s_stop;

static void s_on_signal(int sig)
{
    (void)sig;
    s_stop = 1;
}

int cli_cmd_status(int argc, char **argv)
{
    const char *broker = NULL;
    int json = 0;
    uint64_t timeout_s = 10, watch_s = 0;
    s_filter_t filter = {NULL, 0};
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            fputs("\nsecurity:\n", stdout);
            fputs(cli_keys_help, stdout);
            return 0;
        }
        if (strcmp(argv[i], "--json") == 0) {
            json = 1;
            continue;
        }
        if (strcmp(argv[i], "--active") == 0) {
            filter.active = 1;
            continue;
        }
        if (strcmp(argv[i], "--watch") == 0) {
            watch_s = 2;
            if (i + 1 < argc && argv[i + 1][0] != '-') {
                if (cli_parse_u64(argv[i + 1], 1, 3600, &watch_s) != 0)
                    return s_usage("--watch takes whole seconds from 1 to 3600, not '%s'",
                                   argv[i + 1]);
                i++;
            }
            continue;
        }
        if (cli_match_value(argc, argv, &i, "--run", &v)) {
            if (!v || !*v)
                return s_usage("--run needs a run id%s", NULL);
            filter.run = v;
            continue;
        }
        if (cli_match_value(argc, argv, &i, "--broker", &v)) {
            if (!v || !*v)
                return s_usage("--broker needs an endpoint%s", NULL);
            broker = v;
            continue;
        }
        if (cli_match_value(argc, argv, &i, "--timeout", &v)) {
            if (!v || cli_parse_u64(v, 1, 86400, &timeout_s) != 0)
                return s_usage("--timeout needs whole seconds from 1 to 86400, not '%s'", v);
            continue;
        }
        int keys_rc = 0;
        int keys = cli_keys_option(argc, argv, &i, "fitfarm status", &keys_rc);
        if (keys > 0)
            continue;
        if (keys < 0)
            return keys_rc;
        return s_usage(argv[i][0] == '-' ? "unknown option %s" : "unexpected argument '%s'",
                       argv[i]);
    }
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.broker = broker;
    if (cli_keys_apply(&opts, "fitfarm status") != 0)
        return 2;
    broker = opts.broker;
    if (!broker)
        return s_usage("--broker ENDPOINT is required%s", NULL);
    opts.connect_timeout_ms = (int)timeout_s * 1000;
    char err[1200];
    fitfarm_client_t *client = NULL;
    if (fitfarm_client_new(&opts, &client, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm status: %s\n", err);
        return 1;
    }
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = s_on_signal;
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    int tty = isatty(STDOUT_FILENO);
    s_history_t hist = {0};
    int have_prev = 0, rc = 0;
    struct timespec t_prev = {0, 0};
    do {
        fitfarm_status_t *st = NULL;
        if (fitfarm_status_get(client, (int)timeout_s * 1000, &st) != 0) {
            fprintf(stderr, "fitfarm status: %s\n", fitfarm_client_error(client));
            rc = 1;
            break;
        }
        struct timespec now;
        clock_gettime(CLOCK_MONOTONIC, &now);
        double dt = have_prev ? (double)(now.tv_sec - t_prev.tv_sec) +
                                    (double)(now.tv_nsec - t_prev.tv_nsec) / 1e9
                              : 0;
        if (json) {
            rc = s_print_json(st, &filter);
        } else {
            if (watch_s && tty)
                fputs("\033[H\033[J", stdout); /* home, clear: redraw in place */
            else if (watch_s && have_prev)
                fputs("\n", stdout);
            s_print_view(st, &filter, have_prev ? &hist : NULL, dt, broker);
        }
        fflush(stdout);
        s_history_take(&hist, st);
        have_prev = 1;
        t_prev = now;
        fitfarm_status_destroy(&st);
        for (uint64_t t = 0; watch_s && !s_stop && t < watch_s * 10; t++)
            nanosleep(&(struct timespec){0, 100000000}, NULL);
    } while (watch_s && !s_stop && rc == 0);
    s_history_free(&hist);
    fitfarm_client_destroy(&client);
    return rc;
}
