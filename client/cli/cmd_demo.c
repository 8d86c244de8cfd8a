/* cmd_demo.c: `fitfarm demo`: the whole job on the embedded local pool, with
 * nothing to start or configure: fitfarm-nsga2 searches the granular pad
 * (72 grain sites, both objectives minimised: transmissibility in dB and
 * settlement in mm), then `fitfarm front` draws the front and the
 * hypervolume curve, and a text summary shows three designs of the front
 * (the best isolation, the least settlement, the knee) as grids of grains.
 *
 * The budget (20 x 17 batches, about 320 simulations of 0.46 s each) is
 * chosen to finish in well under three minutes on two cores.
 *
 * Owns the demo's budget, the order of the steps and the summary. The search
 * and the picture are the fitfarm-nsga2 program and this same fitfarm
 * program's front command, run as child processes, so the demo shows exactly
 * what a user would type. */
#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <spawn.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <fcntl.h>
#include <time.h>
#include <unistd.h>

#include "cli_util.h"
#include "commands.h"
#include "knee.h"

extern char **environ;

#define DEMO_ROWS 6 /* the granular plugin's default pad: 6 x 12 sites */
#define DEMO_COLUMNS 12
#define DEMO_GENES (DEMO_ROWS * DEMO_COLUMNS)
#define DEMO_MAX_FRONT 100000u
#define DEMO_PATH 4096 /* the project's own limits.h shadows the system's PATH_MAX */

static const char s_help[] =
    "usage: fitfarm demo [--out DIR] [--population N] [--generations G] [--seed N]\n"
    "                    [--slots N]\n"
    "\n"
    "Runs fitfarm-nsga2 on the granular pad (a vibration-isolating pad of soft and\n"
    "stiff grains, 72 sites) on the embedded local pool, then draws the Pareto\n"
    "front and the hypervolume over generations, and summarises three designs of\n"
    "the front. Writes into DIR (default demo-out):\n"
    "  front.png     the front (transmissibility against settlement, all results,\n"
    "                later generations darker, knee ringed) and the hypervolume curve\n"
    "  front.csv     the front: f1 (transmissibility, dB), f2 (settlement, mm), genes\n"
    "  front.txt     the front as fitfarm front prints it\n"
    "  summary.txt   the best isolation, the least settlement and the knee, each as\n"
    "                a grid of grains (S stiff, o soft; floor at the bottom)\n"
    "  search/       fitfarm-nsga2's files (generations.csv, population.jsonl, ...)\n"
    "\n"
    "options:\n"
    "  --out DIR         output folder (default demo-out)\n"
    "  --population N    individuals (default 20)\n"
    "  --generations G   generations after the first (default 16)\n"
    "  --seed N          seed (default 1); the same seed gives the same search\n"
    "  --slots N         worker slots (default: online CPUs)\n"
    "\n"
    "exit status: 0 done, 1 a step failed, 2 usage error.\n";

static int s_usage(const char *fmt, const char *arg)
{
    fprintf(stderr, "fitfarm demo: ");
    fprintf(stderr, fmt, arg ? arg : "");
    fprintf(stderr, " (see fitfarm demo --help)\n");
    return 2;
}

/* The folder of this program, for finding fitfarm-nsga2 beside it. */
static int s_self_dir(char *out, size_t len)
{
    ssize_t n = readlink("/proc/self/exe", out, len - 1);
    if (n <= 0)
        return -1;
    out[n] = '\0';
    char *slash = strrchr(out, '/');
    if (!slash)
        return -1;
    *slash = '\0';
    return 0;
}

/* Runs argv[0] with argv; stdout to out_path when given. Returns its exit
 * status, or -1 when it could not be started or was killed. */
static int s_run(char *const argv[], const char *out_path)
{
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    if (out_path)
        posix_spawn_file_actions_addopen(&fa, 1, out_path, O_WRONLY | O_CREAT | O_TRUNC, 0666);
    pid_t pid;
    int rc = posix_spawn(&pid, argv[0], &fa, NULL, argv, environ);
    posix_spawn_file_actions_destroy(&fa);
    if (rc != 0) {
        fprintf(stderr, "fitfarm demo: cannot start %s: %s\n", argv[0], strerror(rc));
        return -1;
    }
    int status;
    while (waitpid(pid, &status, 0) < 0)
        if (errno != EINTR)
            return -1;
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

static int s_copy(const char *from, const char *to)
{
    FILE *in = fopen(from, "rbe"), *out = in ? fopen(to, "wbe") : NULL;
    char buf[65536];
    size_t got;
    int rc = in && out ? 0 : -1;
    while (rc == 0 && (got = fread(buf, 1, sizeof buf, in)) > 0)
        if (fwrite(buf, 1, got, out) != got)
            rc = -1;
    if (in && ferror(in))
        rc = -1;
    if (in)
        fclose(in);
    if (out && fclose(out) != 0)
        rc = -1;
    if (rc != 0)
        fprintf(stderr, "fitfarm demo: cannot copy %s to %s: %s\n", from, to, strerror(errno));
    return rc;
}

typedef struct {
    double f[2];
    double genome[DEMO_GENES];
    uint64_t seed; /* its evaluation seed, so fitfarm show repeats that evaluation */
} demo_design_t;

/* Reads fitfarm-nsga2's front.jsonl. Returns the count, or -1 (printed). */
static long s_read_front(const char *path, demo_design_t **out)
{
    FILE *f = fopen(path, "re");
    if (!f) {
        fprintf(stderr, "fitfarm demo: cannot read %s: %s\n", path, strerror(errno));
        return -1;
    }
    size_t n = 0, cap = 0;
    demo_design_t *d = NULL;
    char *line = NULL;
    size_t llen = 0;
    long rc = 0;
    while (getline(&line, &llen, f) > 0) {
        json_error_t jerr;
        json_t *o = json_loads(line, 0, &jerr);
        json_t *fit = o ? json_object_get(o, "fitness") : NULL;
        json_t *gen = o ? json_object_get(o, "genome") : NULL;
        const char *seed = o ? json_string_value(json_object_get(o, "seed")) : NULL;
        uint64_t seed_v = 0;
        if (json_array_size(fit) != 2 || json_array_size(gen) != DEMO_GENES || n >= DEMO_MAX_FRONT ||
            !seed || cli_parse_u64(seed, 0, UINT64_MAX, &seed_v) != 0) {
            fprintf(stderr, "fitfarm demo: %s line %zu is not a 2-objective, %d-gene design "
                            "with its seed\n",
                    path, n + 1, DEMO_GENES);
            json_decref(o);
            rc = -1;
            break;
        }
        if (n == cap) {
            cap = cap ? 2 * cap : 64;
            demo_design_t *g = realloc(d, cap * sizeof *d);
            if (!g) {
                json_decref(o);
                rc = -1;
                break;
            }
            d = g;
        }
        for (int j = 0; j < 2; j++)
            d[n].f[j] = json_number_value(json_array_get(fit, (size_t)j));
        for (int i = 0; i < DEMO_GENES; i++)
            d[n].genome[i] = json_number_value(json_array_get(gen, (size_t)i));
        d[n].seed = seed_v;
        n++;
        json_decref(o);
    }
    free(line);
    fclose(f);
    if (rc == 0 && n == 0) {
        fprintf(stderr, "fitfarm demo: %s holds no design\n", path);
        rc = -1;
    }
    if (rc != 0) {
        free(d);
        return -1;
    }
    *out = d;
    return (long)n;
}

static void s_design(FILE *f, const char *what, const demo_design_t *d)
{
    int stiff = 0;
    for (int i = 0; i < DEMO_GENES; i++)
        stiff += d->genome[i] >= 0.5;
    fprintf(f, "%s: transmissibility %.2f dB, settlement %.3f mm, %d of %d grains stiff\n", what,
            d->f[0], d->f[1], stiff, DEMO_GENES);
    fprintf(f, "    plate  ");
    for (int c = 0; c < DEMO_COLUMNS; c++)
        fputs("==", f);
    fputc('\n', f);
    /* Gene r * columns + c is site (r, c), row 0 on the floor: print top down. */
    for (int r = DEMO_ROWS - 1; r >= 0; r--) {
        fprintf(f, "    row %d %s", r, r % 2 ? " " : "");
        for (int c = 0; c < DEMO_COLUMNS; c++)
            fprintf(f, " %c", d->genome[r * DEMO_COLUMNS + c] >= 0.5 ? 'S' : 'o');
        fputc('\n', f);
    }
    fprintf(f, "    floor  ");
    for (int c = 0; c < DEMO_COLUMNS; c++)
        fputs("~~", f);
    fputs("\n\n", f);
}

/* Draws design d as OUT/design-TAG.png with fitfarm show (one simulation
 * with the design's own seed: the same evaluation the front holds), and
 * keeps show's --json as OUT/design-TAG.json. */
static int s_draw_design(const char *fitfarm, const char *out, const char *tag,
                         const demo_design_t *d)
{
    char genome[DEMO_GENES * 26 + 3], seed[32], png[DEMO_PATH];
    size_t used = 0;
    genome[used++] = '[';
    for (int i = 0; i < DEMO_GENES; i++)
        used += (size_t)snprintf(genome + used, sizeof genome - used, "%s%.17g", i ? "," : "",
                                 d->genome[i]);
    snprintf(genome + used, sizeof genome - used, "]");
    snprintf(seed, sizeof seed, "%llu", (unsigned long long)d->seed);
    snprintf(png, sizeof png, "%.4000s/design-%s.png", out, tag);
    char *argv[] = {(char *)fitfarm, "show", "granular", "--genome", genome, "--seed", seed,
                    "--png", png, "--json", NULL};
    /* What was drawn, with the fitness of the evaluation: it must be the
     * front's (tests/integration/test_demo.py compares the bits). */
    char log[DEMO_PATH];
    snprintf(log, sizeof log, "%.4000s/design-%s.json", out, tag);
    if (s_run(argv, log) != 0) {
        fprintf(stderr, "fitfarm demo: drawing the %s design failed (see %s)\n", tag, log);
        return -1;
    }
    return 0;
}

int cli_cmd_demo(int argc, char **argv)
{
    const char *out = "demo-out", *v;
    uint64_t population = 20, generations = 16, seed = 1, slots = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        } else if (cli_match_value(argc, argv, &i, "--out", &v)) {
            if (!v || !*v)
                return s_usage("--out needs a folder", NULL);
            out = v;
        } else if (cli_match_value(argc, argv, &i, "--population", &v)) {
            if (!v || cli_parse_u64(v, 4, 10000, &population) != 0 || population % 2)
                return s_usage("--population is an even number from 4 to 10000, not '%s'", v);
        } else if (cli_match_value(argc, argv, &i, "--generations", &v)) {
            if (!v || cli_parse_u64(v, 1, 100000, &generations) != 0)
                return s_usage("--generations is a whole number from 1 to 100000, not '%s'", v);
        } else if (cli_match_value(argc, argv, &i, "--seed", &v)) {
            if (!v || cli_parse_u64(v, 0, UINT64_MAX, &seed) != 0)
                return s_usage("--seed is a whole number from 0 to 2^64-1, not '%s'", v);
        } else if (cli_match_value(argc, argv, &i, "--slots", &v)) {
            if (!v || cli_parse_u64(v, 1, 4096, &slots) != 0)
                return s_usage("--slots is a whole number from 1 to 4096, not '%s'", v);
        } else {
            return s_usage("unknown option '%s'", argv[i]);
        }
    }
    char self[DEMO_PATH], nsga2[DEMO_PATH + 64], fitfarm[DEMO_PATH + 64];
    if (s_self_dir(self, sizeof self) != 0) {
        fprintf(stderr, "fitfarm demo: cannot tell where this program lives\n");
        return 1;
    }
    snprintf(fitfarm, sizeof fitfarm, "%s/fitfarm", self);
    snprintf(nsga2, sizeof nsga2, "%s/fitfarm-nsga2", self); /* installed: one bin folder */
    if (access(nsga2, X_OK) != 0)
        snprintf(nsga2, sizeof nsga2, "%s/nsga2/fitfarm-nsga2", self); /* the build tree */
    if (access(nsga2, X_OK) != 0) {
        fprintf(stderr, "fitfarm demo: fitfarm-nsga2 is neither in %s nor in %s/nsga2\n", self,
                self);
        return 1;
    }
    if (mkdir(out, 0777) != 0 && errno != EEXIST) {
        fprintf(stderr, "fitfarm demo: cannot make %s: %s\n", out, strerror(errno));
        return 1;
    }
    char search[DEMO_PATH], pop_s[32], gen_s[32], seed_s[32], slots_s[32], genes_s[16];
    snprintf(search, sizeof search, "%.4000s/search", out);
    snprintf(pop_s, sizeof pop_s, "%llu", (unsigned long long)population);
    snprintf(gen_s, sizeof gen_s, "%llu", (unsigned long long)generations);
    snprintf(seed_s, sizeof seed_s, "%llu", (unsigned long long)seed);
    snprintf(slots_s, sizeof slots_s, "%llu", (unsigned long long)slots);
    snprintf(genes_s, sizeof genes_s, "%d", DEMO_GENES);
    char *run_nsga2[] = {nsga2, "--plugin", "granular", "--genes", genes_s, "--population", pop_s,
                         "--generations", gen_s, "--seed", seed_s, "--out", search,
                         slots ? "--slots" : NULL, slots_s, NULL};
    printf("fitfarm demo: NSGA-II on the granular pad (%d grain sites, soft or stiff), %s "
           "generations of %s, on the embedded local pool\n", DEMO_GENES, gen_s, pop_s);
    fflush(stdout);
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    if (s_run(run_nsga2, NULL) != 0) {
        fprintf(stderr, "fitfarm demo: the search failed (above)\n");
        return 1;
    }
    clock_gettime(CLOCK_MONOTONIC, &t1);
    double secs = (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec);

    char png[DEMO_PATH], txt[DEMO_PATH], csv_in[DEMO_PATH], csv_out[DEMO_PATH], jsonl[DEMO_PATH];
    snprintf(png, sizeof png, "%.4000s/front.png", out);
    snprintf(txt, sizeof txt, "%.4000s/front.txt", out);
    snprintf(csv_in, sizeof csv_in, "%.4000s/front.csv", search);
    snprintf(csv_out, sizeof csv_out, "%.4000s/front.csv", out);
    snprintf(jsonl, sizeof jsonl, "%.4000s/front.jsonl", search);
    /* The axis labels come from the plugin's own declaration. */
    char *run_front[] = {fitfarm, "front", search, "--png", png, "--plugin", "granular", NULL};
    if (s_run(run_front, txt) != 0) {
        fprintf(stderr, "fitfarm demo: drawing the front failed (above)\n");
        return 1;
    }
    if (s_copy(csv_in, csv_out) != 0)
        return 1;

    demo_design_t *d = NULL;
    long n = s_read_front(jsonl, &d);
    if (n < 0)
        return 1;
    long best_iso = 0, best_settle = 0;
    for (long i = 1; i < n; i++) {
        if (d[i].f[0] < d[best_iso].f[0])
            best_iso = i;
        if (d[i].f[1] < d[best_settle].f[1])
            best_settle = i;
    }
    double *f = malloc((size_t)n * 2 * sizeof *f);
    long knee = -1;
    if (f) {
        for (long i = 0; i < n; i++) {
            f[2 * i] = d[i].f[0];
            f[2 * i + 1] = d[i].f[1];
        }
        knee = nsga2_knee(f, (size_t)n, 2);
        free(f);
    }
    char sum_path[DEMO_PATH];
    snprintf(sum_path, sizeof sum_path, "%.4000s/summary.txt", out);
    FILE *s = fopen(sum_path, "we");
    if (!s) {
        fprintf(stderr, "fitfarm demo: cannot write %s: %s\n", sum_path, strerror(errno));
        free(d);
        return 1;
    }
    fprintf(s, "fitfarm demo: NSGA-II on the granular pad, %s generations of %s, seed %s, "
               "%.0f s of search\n\n", gen_s, pop_s, seed_s, secs);
    fprintf(s, "The front holds %ld designs (all in front.csv; picture in front.png). Both\n"
               "objectives are minimised: transmissibility (dB, the worst plate/floor\n"
               "acceleration ratio over the disturbance frequencies) and settlement of\n"
               "the plate under its own weight (mm). Three of them:\n\n", n);
    s_design(s, "best isolation", &d[best_iso]);
    s_design(s, "least settlement", &d[best_settle]);
    if (knee >= 0)
        s_design(s, "knee (the best compromise by our rule; see fitfarm front --help)", &d[knee]);
    int werr = ferror(s) | fclose(s);
    int drawn = s_draw_design(fitfarm, out, "isolation", &d[best_iso]) == 0 &&
                s_draw_design(fitfarm, out, "settlement", &d[best_settle]) == 0 &&
                (knee < 0 || s_draw_design(fitfarm, out, "knee", &d[knee]) == 0);
    free(d);
    if (!drawn)
        return 1;
    if (werr) {
        fprintf(stderr, "fitfarm demo: writing %s failed\n", sum_path);
        return 1;
    }
    printf("\nfitfarm demo: done in %.0f s of search. Look at:\n"
           "  %s/front.png    the front and the hypervolume over generations\n"
           "  %s/summary.txt  three designs of the front, drawn as grids of grains\n"
           "  %s/design-isolation.png, design-settlement.png, design-knee.png  the same\n"
           "                  three drawn by fitfarm show (grains by material)\n"
           "  %s/front.csv    every design of the front; %s/front.txt as fitfarm front prints it\n"
           "The same search on a real pool:\n"
           "  fitfarm-nsga2 --plugin granular --genes %d --population %s --generations %s "
           "--seed %s \\\n"
           "      --broker tcp://HOST:5555 --key client.secret --broker-key broker.public "
           "--out my-search\n",
           secs, out, out, out, out, out, DEMO_GENES, pop_s, gen_s, seed_s);
    return 0;
}
