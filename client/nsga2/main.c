/* main.c: the fitfarm-nsga2 program's command line: parses and checks the
 * options, connects to a pool (a broker, or the embedded local pool when no
 * broker is given), and hands the search to search.c. Owns the help text and
 * every usage message; not the search, not the files. */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <fitfarm.h>

#include "search.h"

#define S_MAX_GENES 65536u
#define S_MAX_POPULATION 100000u
#define S_MAX_GENERATIONS 10000000u
#define S_MAX_REPLICATES 1000u
#define S_MAX_REF 64u

static const char s_help[] =
    "usage: fitfarm-nsga2 --plugin NAME[@VERSION] --genes N [options]\n"
    "\n"
    "NSGA-II (Deb, Pratap, Agarwal, Meyarivan, IEEE TEC 6(2), 2002) on a fitfarm\n"
    "pool: every objective is minimised, as fitfarm plugins report them. Each\n"
    "generation is one batch of parents and offspring in one run, so surviving\n"
    "parents are answered from the store without being simulated again.\n"
    "\n"
    "options:\n"
    "  --plugin NAME       plugin to evaluate with (required); NAME@VERSION: the\n"
    "                      highest known version that is VERSION or starts with\n"
    "                      VERSION and a dot, as in fitfarm eval\n"
    "  --params JSON       plugin parameters, a JSON object (default {})\n"
    "  --genes N           genes per genome (required unless --bounds lists each gene)\n"
    "  --bounds LO:HI[,LO:HI...]  one range for every gene, or one per gene (default 0:1)\n"
    "  --population N      individuals, even, 4..100000 (default 100)\n"
    "  --generations G     generations after the first (default 250)\n"
    "  --seed N            seed of the optimizer's generator (xoshiro256** seeded by\n"
    "                      splitmix64) and of the run, 0..2^64-1 (default 0)\n"
    "  --run ID            run id (default nsga2-PLUGIN-SEED); the same seed and run id\n"
    "                      give the same search, bit for bit\n"
    "  --replicates K      evaluations per genome (default 1)\n"
    "  --aggregate HOW     mean (default) or median of the ok replicates per objective\n"
    "  --out DIR           output folder, made if missing (default nsga2-out)\n"
    "  --ref R1,R2,...     hypervolume reference point (default: generation 0's worst\n"
    "                      value plus 10% of its range, per objective; printed)\n"
    "  --pc P              crossover probability per pair (default 0.9)\n"
    "  --eta-c E           SBX distribution index (default 20)\n"
    "  --pm P              mutation probability per gene (default 1/genes)\n"
    "  --eta-m E           polynomial mutation distribution index (default 20)\n"
    "  --replay            answer every batch from the store only, never simulate\n"
    "                      (needs the store the search was recorded in: --store or\n"
    "                      the broker's)\n"
    "  --broker ENDPOINT   use the pool behind this broker; without it an embedded\n"
    "                      local pool runs\n"
    "  --key FILE, --broker-key FILE  CURVE key files for --broker (fitfarm keygen)\n"
    "  --insecure          plaintext to a loopback or ipc:// broker\n"
    "  --slots N           embedded pool: worker slots (default: online CPUs)\n"
    "  --store DIR         embedded pool: keep the store in DIR (for --replay, resume)\n"
    "  --plugin-dir DIR    embedded pool: also load plugins from DIR\n"
    "\n"
    "output: one line per generation (evaluations, cached, failed, hypervolume of\n"
    "the population's first front), and in --out: generations.csv,\n"
    "population.jsonl, front.jsonl, front.csv (see README, \"Optimizing\").\n"
    "\n"
    "exit status: 0 done, 1 the search failed, 2 usage error.\n";

static int s_usage(const char *what, const char *value)
{
    fprintf(stderr, "fitfarm-nsga2: %s%s%s%s (see fitfarm-nsga2 --help)\n", what,
            value ? " '" : "", value ? value : "", value ? "'" : "");
    return 2;
}

static int s_u64(const char *s, uint64_t min, uint64_t max, uint64_t *out)
{
    if (!s || !*s || *s == '-' || *s == '+')
        return -1;
    char *end;
    errno = 0;
    unsigned long long v = strtoull(s, &end, 10);
    if (errno || *end || v < min || v > max)
        return -1;
    *out = v;
    return 0;
}

static int s_double(const char *s, double *out)
{
    if (!s || !*s)
        return -1;
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    if (errno || *end || !isfinite(v))
        return -1;
    *out = v;
    return 0;
}

/* "--name VALUE" or "--name=VALUE". */
static int s_opt(int argc, char **argv, int *i, const char *name, const char **value)
{
    size_t len = strlen(name);
    if (strncmp(argv[*i], name, len) != 0)
        return 0;
    if (argv[*i][len] == '=') {
        *value = argv[*i] + len + 1;
        return 1;
    }
    if (argv[*i][len] != '\0')
        return 0;
    *value = *i + 1 < argc ? argv[++*i] : NULL;
    return 1;
}

/* Comma-separated items into out (at most max); returns the count or -1. */
static long s_split(const char *text, char **items, size_t max, char *copy, size_t copylen)
{
    if (strlen(text) + 1 > copylen)
        return -1;
    strcpy(copy, text);
    size_t k = 0;
    for (char *save = NULL, *tok = strtok_r(copy, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
        if (k == max)
            return -1;
        items[k++] = tok;
    }
    return (long)k;
}

static int s_parse_bounds(const char *text, size_t *genes, double **lo, double **hi)
{
    static char copy[1u << 20];
    static char *items[S_MAX_GENES];
    long k = s_split(text, items, S_MAX_GENES, copy, sizeof copy);
    if (k <= 0)
        return s_usage("--bounds is LO:HI or a comma-separated list of LO:HI, not", text);
    if (k > 1 && *genes && (size_t)k != *genes) {
        fprintf(stderr, "fitfarm-nsga2: --bounds lists %ld ranges but --genes is %zu\n", k, *genes);
        return 2;
    }
    if (k > 1)
        *genes = (size_t)k;
    if (*genes == 0)
        return s_usage("--genes is required when --bounds gives one range for all genes", NULL);
    *lo = calloc(*genes, sizeof **lo);
    *hi = calloc(*genes, sizeof **hi);
    if (!*lo || !*hi) {
        fprintf(stderr, "fitfarm-nsga2: out of memory\n");
        return 1;
    }
    for (long i = 0; i < k; i++) {
        char *colon = strchr(items[i], ':');
        double a, b;
        if (!colon)
            return s_usage("each --bounds range is LO:HI, not", items[i]);
        *colon = '\0';
        if (s_double(items[i], &a) != 0 || s_double(colon + 1, &b) != 0 || !(a < b)) {
            *colon = ':';
            return s_usage("each --bounds range is LO:HI with finite LO < HI, not", items[i]);
        }
        for (size_t g = (k == 1 ? 0 : (size_t)i); g < (k == 1 ? *genes : (size_t)i + 1); g++) {
            (*lo)[g] = a;
            (*hi)[g] = b;
        }
    }
    return 0;
}

int main(int argc, char **argv)
{
    nsga2_search_options_t o = {.params = "{}", .out_dir = "nsga2-out", .population = 100,
                                .generations = 250, .replicates = 1,
                                .aggregate = NSGA2_AGGREGATE_MEAN, .pc = 0.9, .eta_c = 20.0,
                                .pm = -1.0, .eta_m = 20.0};
    fitfarm_options_t fo = FITFARM_OPTIONS_INIT;
    const char *bounds = "0:1", *ref_text = NULL, *v;
    uint64_t u;
    double *lo = NULL, *hi = NULL, ref[S_MAX_REF];
    char run_id[256];
    int rc = 2;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        } else if (strcmp(a, "--replay") == 0) {
            o.replay = 1;
        } else if (strcmp(a, "--insecure") == 0) {
            fo.insecure = 1;
        } else if (s_opt(argc, argv, &i, "--plugin", &v)) {
            if (!v || !*v)
                return s_usage("--plugin needs a name", NULL);
            o.plugin = v;
        } else if (s_opt(argc, argv, &i, "--params", &v)) {
            if (!v)
                return s_usage("--params needs a JSON object", NULL);
            o.params = v;
        } else if (s_opt(argc, argv, &i, "--genes", &v)) {
            if (s_u64(v, 1, S_MAX_GENES, &u) != 0)
                return s_usage("--genes is a whole number from 1 to 65536, not", v);
            o.genes = (size_t)u;
        } else if (s_opt(argc, argv, &i, "--bounds", &v)) {
            if (!v)
                return s_usage("--bounds needs LO:HI", NULL);
            bounds = v;
        } else if (s_opt(argc, argv, &i, "--population", &v)) {
            if (s_u64(v, 4, S_MAX_POPULATION, &u) != 0 || u % 2)
                return s_usage("--population is an even number from 4 to 100000, not", v);
            o.population = (size_t)u;
        } else if (s_opt(argc, argv, &i, "--generations", &v)) {
            if (s_u64(v, 0, S_MAX_GENERATIONS, &u) != 0)
                return s_usage("--generations is a whole number from 0 to 10000000, not", v);
            o.generations = (size_t)u;
        } else if (s_opt(argc, argv, &i, "--seed", &v)) {
            if (s_u64(v, 0, UINT64_MAX, &u) != 0)
                return s_usage("--seed is a whole number from 0 to 2^64-1, not", v);
            o.seed = u;
        } else if (s_opt(argc, argv, &i, "--run", &v)) {
            if (!v || !*v || strlen(v) >= sizeof run_id)
                return s_usage("--run needs an id of 1 to 255 bytes", NULL);
            o.run_id = v;
        } else if (s_opt(argc, argv, &i, "--replicates", &v)) {
            if (s_u64(v, 1, S_MAX_REPLICATES, &u) != 0)
                return s_usage("--replicates is a whole number from 1 to 1000, not", v);
            o.replicates = (unsigned)u;
        } else if (s_opt(argc, argv, &i, "--aggregate", &v)) {
            if (v && strcmp(v, "mean") == 0)
                o.aggregate = NSGA2_AGGREGATE_MEAN;
            else if (v && strcmp(v, "median") == 0)
                o.aggregate = NSGA2_AGGREGATE_MEDIAN;
            else
                return s_usage("--aggregate is mean or median, not", v ? v : "");
        } else if (s_opt(argc, argv, &i, "--out", &v)) {
            if (!v || !*v)
                return s_usage("--out needs a folder", NULL);
            o.out_dir = v;
        } else if (s_opt(argc, argv, &i, "--ref", &v)) {
            if (!v)
                return s_usage("--ref needs R1,R2,...", NULL);
            ref_text = v;
        } else if (s_opt(argc, argv, &i, "--pc", &v)) {
            if (s_double(v, &o.pc) != 0 || o.pc < 0.0 || o.pc > 1.0)
                return s_usage("--pc is a probability from 0 to 1, not", v);
        } else if (s_opt(argc, argv, &i, "--pm", &v)) {
            if (s_double(v, &o.pm) != 0 || o.pm < 0.0 || o.pm > 1.0)
                return s_usage("--pm is a probability from 0 to 1, not", v);
        } else if (s_opt(argc, argv, &i, "--eta-c", &v)) {
            if (s_double(v, &o.eta_c) != 0 || o.eta_c < 0.0 || o.eta_c > 1000.0)
                return s_usage("--eta-c is a number from 0 to 1000, not", v);
        } else if (s_opt(argc, argv, &i, "--eta-m", &v)) {
            if (s_double(v, &o.eta_m) != 0 || o.eta_m < 0.0 || o.eta_m > 1000.0)
                return s_usage("--eta-m is a number from 0 to 1000, not", v);
        } else if (s_opt(argc, argv, &i, "--broker", &v)) {
            if (!v || !*v)
                return s_usage("--broker needs an endpoint", NULL);
            fo.broker = v;
        } else if (s_opt(argc, argv, &i, "--key", &v)) {
            if (!v)
                return s_usage("--key needs a secret key file", NULL);
            fo.key_file = v;
        } else if (s_opt(argc, argv, &i, "--broker-key", &v)) {
            if (!v)
                return s_usage("--broker-key needs a public key file", NULL);
            fo.broker_key_file = v;
        } else if (s_opt(argc, argv, &i, "--slots", &v)) {
            if (s_u64(v, 1, 4096, &u) != 0)
                return s_usage("--slots is a whole number from 1 to 4096, not", v);
            fo.slots = (unsigned)u;
        } else if (s_opt(argc, argv, &i, "--store", &v)) {
            if (!v || !*v)
                return s_usage("--store needs a folder", NULL);
            fo.store_dir = v;
        } else if (s_opt(argc, argv, &i, "--plugin-dir", &v)) {
            if (!v || !*v)
                return s_usage("--plugin-dir needs a folder", NULL);
            fo.plugin_dir = v;
        } else {
            return s_usage("unknown option", a);
        }
    }
    if (!o.plugin)
        return s_usage("--plugin is required", NULL);
    if (fo.broker && (fo.slots || fo.store_dir || fo.plugin_dir))
        return s_usage("--slots, --store and --plugin-dir are for the embedded pool, not with "
                       "--broker", NULL);
    if (o.replay && !fo.broker && !fo.store_dir)
        return s_usage("--replay needs the store the search was recorded in (--store DIR)", NULL);
    int brc = s_parse_bounds(bounds, &o.genes, &lo, &hi);
    if (brc != 0) {
        rc = brc;
        goto done;
    }
    o.lo = lo;
    o.hi = hi;
    if (o.pm < 0.0)
        o.pm = 1.0 / (double)o.genes;
    if (ref_text) {
        static char copy[4096];
        char *items[S_MAX_REF];
        long k = s_split(ref_text, items, S_MAX_REF, copy, sizeof copy);
        if (k <= 0) {
            rc = s_usage("--ref is a comma-separated list of numbers, not", ref_text);
            goto done;
        }
        for (long j = 0; j < k; j++)
            if (s_double(items[j], &ref[j]) != 0) {
                rc = s_usage("--ref has a value that is not a finite number:", items[j]);
                goto done;
            }
        o.ref = ref;
        o.n_ref = (size_t)k;
    }
    if (!o.run_id) {
        snprintf(run_id, sizeof run_id, "nsga2-%.200s-%llu", o.plugin, (unsigned long long)o.seed);
        o.run_id = run_id;
    }
    if (mkdir(o.out_dir, 0777) != 0 && errno != EEXIST) {
        fprintf(stderr, "fitfarm-nsga2: cannot make %s: %s\n", o.out_dir, strerror(errno));
        rc = 2;
        goto done;
    }
    fitfarm_client_t *client = NULL;
    char err[1024];
    if (fitfarm_client_new(&fo, &client, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm-nsga2: %s\n", err);
        rc = 1;
        goto done;
    }
    rc = nsga2_search_run(client, &o);
    fitfarm_client_destroy(&client);
done:
    free(lo);
    free(hi);
    return rc;
}
