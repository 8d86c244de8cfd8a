/* cmd_status.c: `fitfarm status`: what a pool looks like right now: workers
 * (name, host, arch, busy/total slots, plugins), each run's queued, running
 * and done jobs, and the broker's warnings. A table for people, or one JSON
 * object for scripts. Not here: how the broker counts (broker/). */
#include <jansson.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli_keys.h"
#include "cli_util.h"
#include "client/include/fitfarm.h"
#include "commands.h"

static const char s_help[] =
    "usage: fitfarm status --broker ENDPOINT [--json] [--timeout SECONDS]\n"
    "\n"
    "Shows the pool behind a broker: workers (name, host, arch, busy/total slots,\n"
    "plugins), queued, running and done jobs per run, and warnings.\n"
    "\n"
    "options:\n"
    "  --broker ENDPOINT  the broker's client endpoint, e.g. tcp://host:5555 (required)\n"
    "  --json             print one JSON object instead of tables:\n"
    "                     {\"workers\": [{\"name\", \"host\", \"arch\", \"slots\", \"busy\",\n"
    "                     \"plugins\": [...]}], \"runs\": [{\"run\", \"queued\", \"running\",\n"
    "                     \"done\"}], \"warnings\": [...]}\n"
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

static int s_print_json(const fitfarm_status_t *st)
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
        for (size_t p = 0; plugins && p < w->n_plugins; p++)
            json_array_append_new(plugins, json_string(w->plugins[p]));
        json_array_append_new(
            workers, json_pack("{s:s?, s:s?, s:s?, s:I, s:I, s:o?}", "name", w->name, "host",
                               w->host, "arch", w->arch, "slots", (json_int_t)w->slots, "busy",
                               (json_int_t)w->busy, "plugins", plugins));
    }
    for (size_t i = 0; i < fitfarm_status_n_runs(st); i++) {
        fitfarm_run_info_t ri = FITFARM_RUN_INFO_INIT, *r = &ri;
        fitfarm_status_run(st, i, r);
        json_array_append_new(
            runs, json_pack("{s:s?, s:I, s:I, s:I, s:I, s:I, s:I}", "run", r->run_id, "queued",
                            (json_int_t)r->queued, "running", (json_int_t)r->running, "done",
                            (json_int_t)r->done, "evaluated", (json_int_t)r->evaluated, "cached",
                            (json_int_t)r->cached, "failed", (json_int_t)r->failed));
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

static void s_print_table(const fitfarm_status_t *st)
{
    uint64_t slots = 0, busy = 0;
    size_t n_workers = fitfarm_status_n_workers(st), n_runs = fitfarm_status_n_runs(st);
    for (size_t i = 0; i < n_workers; i++) {
        fitfarm_worker_info_t w = FITFARM_WORKER_INFO_INIT;
        fitfarm_status_worker(st, i, &w);
        slots += w.slots;
        busy += w.busy;
    }
    printf("workers: %zu (%llu of %llu slots busy)\n", n_workers, (unsigned long long)busy,
           (unsigned long long)slots);
    if (n_workers > 0)
        printf("  %-24s %-20s %-8s %-11s %s\n", "NAME", "HOST", "ARCH", "BUSY/SLOTS", "PLUGINS");
    for (size_t i = 0; i < n_workers; i++) {
        fitfarm_worker_info_t wi = FITFARM_WORKER_INFO_INIT, *w = &wi;
        fitfarm_status_worker(st, i, w);
        char slot_text[32];
        snprintf(slot_text, sizeof slot_text, "%u/%u", w->busy, w->slots);
        printf("  %-24s %-20s %-8s %-11s ", w->name, w->host, w->arch, slot_text);
        for (size_t p = 0; p < w->n_plugins; p++)
            printf("%s%s", p ? " " : "", w->plugins[p]);
        printf("\n");
    }
    printf("runs: %zu\n", n_runs);
    if (n_runs > 0)
        printf("  %-32s %10s %10s %10s %10s %10s %10s\n", "RUN", "QUEUED", "RUNNING", "DONE",
               "EVALUATED", "CACHED", "FAILED");
    for (size_t i = 0; i < n_runs; i++) {
        fitfarm_run_info_t ri = FITFARM_RUN_INFO_INIT, *r = &ri;
        fitfarm_status_run(st, i, r);
        printf("  %-32s %10llu %10llu %10llu %10llu %10llu %10llu\n", r->run_id,
               (unsigned long long)r->queued, (unsigned long long)r->running,
               (unsigned long long)r->done, (unsigned long long)r->evaluated,
               (unsigned long long)r->cached, (unsigned long long)r->failed);
    }
    printf("warnings: %zu\n", fitfarm_status_n_warnings(st));
    for (size_t i = 0; i < fitfarm_status_n_warnings(st); i++)
        printf("  %s\n", fitfarm_status_warning(st, i));
}

int cli_cmd_status(int argc, char **argv)
{
    const char *broker = NULL;
    int json = 0;
    uint64_t timeout_s = 10;
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
    fitfarm_status_t *st = NULL;
    int rc = fitfarm_status_get(client, (int)timeout_s * 1000, &st);
    if (rc != 0) {
        fprintf(stderr, "fitfarm status: %s\n", fitfarm_client_error(client));
        fitfarm_client_destroy(&client);
        return 1;
    }
    if (json)
        rc = s_print_json(st);
    else
        s_print_table(st);
    fitfarm_status_destroy(&st);
    fitfarm_client_destroy(&client);
    return rc;
}
