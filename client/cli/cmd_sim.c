/* cmd_sim.c: `fitfarm sim`: one evaluation of one genome by a plugin loaded
 * into this process, without a broker or a pool: for trying params, timing a
 * plugin, and (with --trace) recording what the simulation did through the
 * plugin's optional fitfarm_plugin_trace entry point.
 *
 * Owns option parsing and the output line; finding and loading the plugin
 * file is cli_plugin.c's. Not here: the worker's plugin registry (the
 * worker's own, private), the plugins themselves. The plugin runs in this process: a crashing plugin
 * takes the command down, which is what a developer debugging it wants. */
#include <dlfcn.h>
#include <jansson.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "cli_plugin.h"
#include "cli_util.h"
#include "commands.h"
#include "fitfarm_plugin.h"
#include "limits.h"
#include "params.h"
#include "worker/worker.h"

#define SIM_MAX_OBJECTIVES PROTO_MAX_OBJECTIVES

static const char s_help[] =
    "usage: fitfarm sim PLUGIN --genome JSON_ARRAY [options]\n"
    "       fitfarm sim --exec NAME=COMMAND --genome JSON_ARRAY [options]\n"
    "\n"
    "Evaluates one genome with a plugin loaded into this process (no broker, no\n"
    "pool, no cache) and prints one JSON line. PLUGIN is a plugin name, looked up\n"
    "as NAME.so in the plugin directories, or a path to a .so file.\n"
    "\n"
    "options:\n"
    "  --genome JSON      the genome, a JSON array of numbers (required)\n"
    "  --params JSON      plugin parameters, a JSON object (default {})\n"
    "  --seed N           evaluation seed, 0..2^64-1 (default 0)\n"
    "  --trace FILE       also write the plugin's trace of this evaluation to FILE\n"
    "                     (the plugin must export fitfarm_plugin_trace)\n"
    "  --exec NAME=CMD    evaluate with external program CMD speaking the exec\n"
    "                     plugin's JSON Lines (as fitfarm-worker --exec would), to\n"
    "                     try a simulator program before any pool runs it\n"
    "  --plugin-dir DIR   look in DIR first (repeatable); then the build tree's\n"
    "                     plugins when run from it, then the installed plugins\n"
    "\n"
    "output: {\"plugin\": NAME, \"version\": V, \"seed\": \"<decimal>\", \"fitness\": [numbers],\n"
    "         \"cpu_seconds\": S, \"trace\": FILE|null}\n"
    "numbers have 17 significant digits, so they parse back to the same double.\n"
    "\n"
    "exit status: 0 ok, 1 the plugin could not be loaded or the evaluation\n"
    "failed (the reason on stderr), 2 usage error.\n";

static int s_usage(const char *fmt, const char *arg)
{
    fputs("fitfarm sim: ", stderr);
    fprintf(stderr, fmt, arg ? arg : "");
    fputs(" (see fitfarm sim --help)\n", stderr);
    return 2;
}

static double s_cpu_seconds(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int cli_cmd_sim(int argc, char **argv)
{
    const char *plugin = NULL, *trace_path = NULL;
    const char *exec_spec = NULL;
    cli_plugin_args_t a = {.params = "{}"};
    char err[512] = "";
    int m;
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        } else if ((m = cli_plugin_match(argc, argv, &i, CLI_PLUGIN_ARGS_DIRS | CLI_PLUGIN_ARGS_EVAL,
                                         &a, err, sizeof err)) != 0) {
            if (m < 0)
                return s_usage("%s", err);
        } else if ((m = cli_match_file(argc, argv, &i, "--trace", &trace_path)) != 0) {
            if (m < 0)
                return s_usage("--trace needs a file name", NULL);
        } else if (cli_match_value(argc, argv, &i, "--exec", &v)) {
            if (!v || !strchr(v, '=') || v[0] == '=')
                return s_usage("--exec needs NAME=COMMAND, not '%s'", v ? v : "");
            if (exec_spec)
                return s_usage("one --exec at a time%s", NULL);
            exec_spec = v;
        } else if (argv[i][0] == '-' && argv[i][1] != '\0') {
            return s_usage("unknown option '%s'", argv[i]);
        } else if (!plugin) {
            plugin = argv[i];
        } else {
            return s_usage("unexpected argument '%s'", argv[i]);
        }
    }
    if (exec_spec && plugin &&
        (strncmp(exec_spec, plugin, strlen(plugin)) != 0 || exec_spec[strlen(plugin)] != '='))
        return s_usage("PLUGIN '%s' is not the NAME that --exec gives", plugin);
    if (exec_spec && trace_path)
        return s_usage("--trace needs a plugin file, not --exec%s", NULL);
    if (!plugin && !exec_spec)
        return s_usage("which plugin? give its name%s", NULL);
    if (!a.genome)
        return s_usage("--genome is required%s", NULL);
    cli_plugin_dirs(a.dirs, a.ndirs);

    int rc = 1;
    void *dl = NULL, *ctx = NULL;
    char *params = NULL;
    uint8_t *genome = NULL;
    double *fitness = NULL;
    size_t genome_len = 0;
    const fitfarm_plugin_t *p = NULL;
    if (proto_params_canonical(a.params, &params, err, sizeof err) != 0) {
        rc = s_usage("--params: %s", err);
        goto cleanup;
    }
    genome = cli_plugin_genome(a.genome, &genome_len, err, sizeof err);
    if (!genome) {
        rc = s_usage("%s", err);
        goto cleanup;
    }
    if (exec_spec) {
        if (worker_exec_open(exec_spec, &p, err, sizeof err) != 0)
            p = NULL;
    } else {
        p = cli_plugin_open(plugin, a.dirs, &dl, err, sizeof err);
    }
    if (!p) {
        fprintf(stderr, "fitfarm sim: %s\n", err);
        goto cleanup;
    }
    fitfarm_plugin_trace_fn trace = NULL;
    if (trace_path) {
        trace = (fitfarm_plugin_trace_fn)dlsym(dl, FITFARM_PLUGIN_TRACE_SYMBOL);
        if (!trace) {
            fprintf(stderr, "fitfarm sim: plugin %s has no trace entry point (%s)\n", p->name,
                    FITFARM_PLUGIN_TRACE_SYMBOL);
            goto cleanup;
        }
    }
    fitfarm_plugin_info_t info = {0};
    err[0] = '\0';
    if (p->create(params, &ctx, &info, err, sizeof err) != FITFARM_PLUGIN_OK) {
        err[sizeof err - 1] = '\0';
        fprintf(stderr, "fitfarm sim: %s refused the params: %s\n", p->name, err);
        ctx = NULL;
        goto cleanup;
    }
    if (info.objectives == 0 || info.objectives > SIM_MAX_OBJECTIVES) {
        fprintf(stderr, "fitfarm sim: %s reports %u objectives\n", p->name,
                (unsigned)info.objectives);
        goto cleanup;
    }
    if (info.genome_bytes && info.genome_bytes != genome_len) {
        fprintf(stderr, "fitfarm sim: %s expects %u doubles, --genome has %zu\n", p->name,
                (unsigned)(info.genome_bytes / 8), genome_len / 8);
        goto cleanup;
    }
    fitness = calloc(info.objectives, sizeof *fitness);
    if (!fitness) {
        fprintf(stderr, "fitfarm sim: out of memory\n");
        goto cleanup;
    }
    double t0 = s_cpu_seconds();
    err[0] = '\0';
    int erc = p->evaluate(ctx, genome, genome_len, a.seed, fitness, err, sizeof err);
    double cpu = s_cpu_seconds() - t0;
    err[sizeof err - 1] = '\0';
    if (erc != FITFARM_PLUGIN_OK) {
        fprintf(stderr, "fitfarm sim: %s: evaluation failed: %s\n", p->name, err);
        goto cleanup;
    }
    if (trace) {
        err[0] = '\0';
        if (trace(params, genome, genome_len, a.seed, trace_path, err, sizeof err) !=
            FITFARM_PLUGIN_OK) {
            err[sizeof err - 1] = '\0';
            fprintf(stderr, "fitfarm sim: %s: trace failed: %s\n", p->name, err);
            goto cleanup;
        }
    }
    printf("{\"plugin\":");
    cli_json_string(stdout, p->name);
    printf(",\"version\":");
    cli_json_string(stdout, p->version);
    printf(",\"seed\":\"%llu\",\"fitness\":[", (unsigned long long)a.seed);
    for (uint32_t i = 0; i < info.objectives; i++) {
        char num[32];
        proto_format_double(fitness[i], num);
        printf("%s%s", i ? "," : "", num);
    }
    char num[32];
    proto_format_double(cpu, num);
    printf("],\"cpu_seconds\":%s,\"trace\":", num);
    if (trace_path)
        cli_json_string(stdout, trace_path);
    else
        printf("null");
    printf("}\n");
    rc = fflush(stdout) == 0 ? 0 : 1;
cleanup:
    if (ctx)
        p->destroy(ctx);
    if (exec_spec)
        worker_exec_close(&p);
    if (dl)
        dlclose(dl);
    free(fitness);
    free(genome);
    free(params);
    return rc;
}
