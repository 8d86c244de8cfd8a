/* cmd_show.c: `fitfarm show granular --genome ...`: draws one granular pad
 * design, and with --trace its plate and floor displacement over time. The
 * plugin file is loaded into this process and runs one evaluation through
 * its trace entry point (as `fitfarm sim --trace` does), so the picture
 * shows the grains where the simulation put them, not a sketch. Owns the
 * options, running the trace and the --json output; reading the trace is
 * show_pad.c's, drawing show_draw.c's. */
#include <dlfcn.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli_plugin.h"
#include "cli_util.h"
#include "commands.h"
#include "params.h"
#include "show_pad.h"

static const char s_help[] =
    "usage: fitfarm show granular --genome JSON_ARRAY (--png OUT | --svg OUT)\n"
    "                    [--params JSON] [--seed N] [--trace] [--trace-file FILE]\n"
    "                    [--json] [--plugin-dir DIR]\n"
    "\n"
    "Draws one design of the granular pad: the plugin (granular.so, or a path;\n"
    "granular@VERSION finds the file by name and says if its version differs)\n"
    "is loaded into this process and simulates the genome once through its trace\n"
    "entry point; the picture shows the grains as they rest under the plate at\n"
    "the end of the load phase, coloured by material (soft orange, stiff blue,\n"
    "\"graded\" between), the side walls, the floor and the plate, with a legend;\n"
    "over it the fitness, labelled with the names and units the plugin declares.\n"
    "\n"
    "options:\n"
    "  --genome JSON      the genome, a JSON array of rows*columns numbers (required)\n"
    "  --params JSON      plugin parameters, a JSON object (default {})\n"
    "  --seed N           evaluation seed, 0..2^64-1 (default 0)\n"
    "  --png OUT          write a PNG (940 pixels wide)\n"
    "  --svg OUT          write an SVG of the same size instead\n"
    "  --trace            add panels of plate and floor displacement over time: the\n"
    "                     load phase in mm, each shaking frequency in micrometres;\n"
    "                     displacement is a height minus its height at the end of\n"
    "                     the load phase (the state every frequency is shaken from)\n"
    "  --trace-file FILE  keep the plugin's trace there (default: a temporary file,\n"
    "                     removed)\n"
    "  --json             print what was drawn as one JSON object: fitness, labels,\n"
    "                     grain counts, the pad's placement in pixels (a grain at\n"
    "                     (x, y) m is drawn at (x0 + x*scale, floor - y*scale)), the\n"
    "                     grain colours, and with --trace every plotted series\n"
    "  --plugin-dir DIR   look in DIR first (repeatable)\n"
    "\n"
    "exit status: 0 drawn, 1 the plugin, the simulation or the file failed,\n"
    "2 usage error.\n";

static int s_usage(const char *fmt, const char *arg)
{
    fputs("fitfarm show: ", stderr);
    fprintf(stderr, fmt, arg ? arg : "");
    fputs(" (see fitfarm show --help)\n", stderr);
    return 2;
}

static void s_numbers(const double *v, size_t n)
{
    for (size_t i = 0; i < n; i++)
        printf("%s%.17g", i ? "," : "", v[i]);
}

static void s_json(const show_pad_t *pad, const show_layout_t *lay, const char *out, int trace,
                   const char *trace_file)
{
    size_t stiff = 0;
    for (size_t i = 0; i < pad->grains; i++)
        stiff += pad->stiff[i] >= 0.5;
    printf("{\"picture\":");
    cli_json_string(stdout, out);
    printf(",\"width\":%.0f,\"height\":%.0f,\"fitness\":[", lay->width, lay->height);
    s_numbers(pad->fitness, pad->m);
    printf("],\"labels\":[");
    for (size_t j = 0; j < pad->m; j++) {
        printf("%s", j ? "," : "");
        cli_json_string(stdout, pad->labels[j]);
    }
    printf("],\"grains\":%zu,\"stiff\":%zu,\"soft\":%zu,\"grains_t\":%.17g,\"plate_y\":%.17g,",
           pad->grains, stiff, pad->grains - stiff, pad->grains_t, pad->plate_y);
    printf("\"pad_pixels\":{\"x0\":%.17g,\"floor\":%.17g,\"scale\":%.17g},", lay->x0, lay->floor,
           lay->scale);
    printf("\"colours\":{\"soft\":[");
    s_numbers(show_soft_rgb, 3);
    printf("],\"stiff\":[");
    s_numbers(show_stiff_rgb, 3);
    printf("]},\"trace_file\":");
    if (trace_file)
        cli_json_string(stdout, trace_file);
    else
        printf("null");
    printf(",\"series\":[");
    for (size_t k = 0; trace && k < pad->n_series; k++) {
        const show_series_t *s = &pad->series[k];
        printf("%s{\"phase\":\"%s\",\"frequency\":%.17g,\"unit\":", k ? "," : "", s->phase,
               s->frequency);
        cli_json_string(stdout, s->unit);
        printf(",\"t\":[");
        s_numbers(s->t, s->n);
        printf("],\"floor\":[");
        s_numbers(s->floor_d, s->n);
        printf("],\"plate\":[");
        s_numbers(s->plate_d, s->n);
        printf("]}");
    }
    printf("]}\n");
}

int cli_cmd_show(int argc, char **argv)
{
    const char *plugin = NULL, *png = NULL, *svg = NULL, *trace_file = NULL;
    cli_plugin_args_t a = {.params = "{}"};
    char err[512] = "";
    int trace = 0, json = 0, m;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        } else if (strcmp(argv[i], "--trace") == 0) {
            trace = 1;
        } else if (strcmp(argv[i], "--json") == 0) {
            json = 1;
        } else if ((m = cli_plugin_match(argc, argv, &i,
                                         CLI_PLUGIN_ARGS_DIRS | CLI_PLUGIN_ARGS_EVAL, &a, err,
                                         sizeof err)) != 0) {
            if (m < 0)
                return s_usage("%s", err);
        } else if ((m = cli_match_file(argc, argv, &i, "--png", &png)) != 0 ||
                   (m = cli_match_file(argc, argv, &i, "--svg", &svg)) != 0 ||
                   (m = cli_match_file(argc, argv, &i, "--trace-file", &trace_file)) != 0) {
            if (m < 0)
                return s_usage("--png, --svg and --trace-file need a file name%s", NULL);
        } else if (argv[i][0] == '-' && argv[i][1] != '\0') {
            return s_usage("unknown option '%s'", argv[i]);
        } else if (!plugin) {
            plugin = argv[i];
        } else {
            return s_usage("unexpected argument '%s'", argv[i]);
        }
    }
    if (!plugin)
        return s_usage("which plugin? only granular designs can be drawn%s", NULL);
    if (!a.genome)
        return s_usage("--genome is required%s", NULL);
    if (!png == !svg)
        return s_usage("give one of --png OUT or --svg OUT%s", NULL);
    cli_plugin_dirs(a.dirs, a.ndirs);

    int rc = 1;
    char tmp_path[] = "/tmp/fitfarm-show-XXXXXX";
    void *dl = NULL;
    char *params = NULL;
    uint8_t *genome = NULL;
    size_t genome_len = 0;
    int tmp_made = 0;
    show_pad_t pad = {0};
    if (proto_params_canonical(a.params, &params, err, sizeof err) != 0) {
        rc = s_usage("--params: %s", err);
        goto cleanup;
    }
    genome = cli_plugin_genome(a.genome, &genome_len, err, sizeof err);
    if (!genome) {
        rc = s_usage("%s", err);
        goto cleanup;
    }
    const fitfarm_plugin_t *p = cli_plugin_open(plugin, a.dirs, &dl, err, sizeof err);
    if (!p) {
        fprintf(stderr, "fitfarm show: %s\n", err);
        goto cleanup;
    }
    if (strcmp(p->name, "granular") != 0) {
        fprintf(stderr, "fitfarm show: %s is plugin '%s'; only granular designs can be drawn\n",
                plugin, p->name);
        goto cleanup;
    }
    fitfarm_plugin_trace_fn fn = (fitfarm_plugin_trace_fn)dlsym(dl, FITFARM_PLUGIN_TRACE_SYMBOL);
    const fitfarm_plugin_objective_t *names = NULL;
    size_t n_names = 0;
    if (!fn) {
        fprintf(stderr, "fitfarm show: %s has no trace entry point (%s)\n", plugin,
                FITFARM_PLUGIN_TRACE_SYMBOL);
        goto cleanup;
    }
    if (cli_plugin_objectives(dl, plugin, &names, &n_names, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm show: %s\n", err);
        goto cleanup;
    }
    if (!trace_file) {
        int fd = mkstemp(tmp_path);
        if (fd < 0) {
            fprintf(stderr, "fitfarm show: cannot make a temporary trace file in /tmp\n");
            goto cleanup;
        }
        close(fd);
        tmp_made = 1;
    }
    const char *path = trace_file ? trace_file : tmp_path;
    err[0] = '\0';
    if (fn(params, genome, genome_len, a.seed, path, err, sizeof err) != FITFARM_PLUGIN_OK) {
        err[sizeof err - 1] = '\0';
        fprintf(stderr, "fitfarm show: %s: %s\n", p->name, err);
        goto cleanup;
    }
    if (show_pad_read(path, &pad, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm show: %s\n", err);
        goto cleanup;
    }
    for (size_t j = 0; j < pad.m; j++)
        cli_plugin_label(names, n_names, j, pad.labels[j], sizeof pad.labels[j]);
    size_t stiff = 0;
    double share = 0;
    for (size_t i = 0; i < pad.grains; i++) {
        stiff += pad.stiff[i] >= 0.5;
        share += pad.stiff[i];
    }
    char title[256];
    if (pad.graded)
        snprintf(title, sizeof title,
                 "granular pad, %d x %d sites of graded grains: mean stiff "
                 "share %.3f, seed %llu",
                 pad.rows, pad.columns, share / (double)pad.grains, (unsigned long long)a.seed);
    else
        snprintf(title, sizeof title,
                 "granular pad, %d x %d sites: %zu stiff and %zu soft "
                 "grains, seed %llu",
                 pad.rows, pad.columns, stiff, pad.grains - stiff, (unsigned long long)a.seed);
    show_layout_t lay;
    const char *out = png ? png : svg;
    if (show_pad_draw(&pad, title, trace, out, svg != NULL, &lay, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm show: %s\n", err);
        goto cleanup;
    }
    if (json)
        s_json(&pad, &lay, out, trace, trace_file);
    fprintf(stderr, "fitfarm show: drew %s\n", out);
    rc = fflush(stdout) == 0 ? 0 : 1;
cleanup:
    show_pad_free(&pad);
    if (tmp_made)
        unlink(tmp_path);
    if (dl)
        dlclose(dl);
    free(genome);
    free(params);
    return rc;
}
