/* search.c: the NSGA-II generational loop on the pool (see search.h).
 *
 * Generation 0 evaluates N random genomes (uniform in the bounds). Each
 * later generation breeds N offspring from the parents (binary tournament by
 * rank and crowding, SBX, polynomial mutation), evaluates parents and
 * offspring as one batch of 2N, sorts the 2N into fronts and keeps the best
 * N: whole fronts while they fit, then the last front's members by
 * decreasing crowding distance (ties by index). Every choice depends on the
 * seed and on the fitness values only, so the same seed and the same results
 * give the same search, bit for bit.
 *
 * A genome whose replicates all failed gets +infinity in every objective:
 * every ok genome dominates it, so it dies out, and the search goes on. */
#include "search.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "crowding.h"
#include "hypervolume.h"
#include "report.h"
#include "rng.h"
#include "sort.h"
#include "variation.h"

#define S_HV_SAMPLES 100000u /* Monte Carlo samples per generation for m >= 4 */

typedef struct {
    const nsga2_search_options_t *o;
    fitfarm_client_t *client;
    fitfarm_run_t *run;
    nsga2_report_t *report;
    nsga2_rng_t rng;
    size_t n, m;       /* genes; objectives (0 until the first ok result) */
    size_t pop;        /* N */
    double *genomes;   /* 2N x n: parents first, then offspring */
    double *fitness;   /* 2N x m */
    int *ok;           /* 2N: some replicate ok */
    uint64_t *seeds;   /* 2N: replicate 0's evaluation seed, as the broker derived it */
    size_t *rank;      /* 2N */
    double *crowd;     /* 2N */
    size_t *order, *start; /* scratch of nsga2_sort, 2N and 2N + 1 */
    double *ref;       /* m */
    double *rep;       /* scratch: one objective over the replicates */
} s_search_t;

static void *s_alloc(size_t count, size_t size)
{
    void *p = calloc(count ? count : 1, size);
    if (!p) {
        fprintf(stderr, "fitfarm-nsga2: out of memory\n");
        exit(1);
    }
    return p;
}

static int s_cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Evaluates genomes [0, count) as one batch and fills fitness and ok.
 * *evaluations and *cached get this batch's counts from the run's stats. */
static int s_evaluate(s_search_t *s, size_t count, uint64_t *evaluations, uint64_t *cached,
                      size_t *failed)
{
    const nsga2_search_options_t *o = s->o;
    fitfarm_batch_t *batch = NULL;
    fitfarm_run_stats_t before = FITFARM_RUN_STATS_INIT, after = FITFARM_RUN_STATS_INIT;
    int rc = fitfarm_batch_new(o->plugin, o->params, o->replicates, &batch);
    for (size_t i = 0; rc == 0 && i < count; i++) {
        long idx = fitfarm_batch_add_f64(batch, s->genomes + i * s->n, s->n);
        if (idx < 0)
            rc = (int)idx;
    }
    if (rc != 0) {
        fprintf(stderr, "fitfarm-nsga2: cannot build a batch: %s\n", fitfarm_strerror(rc));
        fitfarm_batch_destroy(&batch);
        return 1;
    }
    fitfarm_run_stats(s->run, &before);
    rc = fitfarm_evaluate(s->run, batch, NULL, NULL, -1);
    if (rc != 0) {
        fprintf(stderr, "fitfarm-nsga2: %s\n", fitfarm_client_error(s->client));
        if (rc == FITFARM_ENOTRECORDED)
            fprintf(stderr, "fitfarm-nsga2: --replay needs the same plugin, params, bounds, "
                            "population, seed and run id as the recorded search\n");
        fitfarm_batch_destroy(&batch);
        return 1;
    }
    fitfarm_run_stats(s->run, &after);
    /* A replay repeats the recorded "cached" flags bit for bit, but the
     * broker answers it from the store alone (it refuses anything the run
     * never recorded), so nothing of it was simulated now. */
    *cached = o->replay ? after.delivered - before.delivered : after.cached - before.cached;
    *evaluations = (after.delivered - before.delivered) - *cached;
    *failed = 0;
    char first_error[512] = "";
    for (size_t i = 0; i < count; i++) {
        double *fit = s->fitness + i * (s->m ? s->m : 1);
        unsigned n_ok = 0;
        fitfarm_result_t r = FITFARM_RESULT_INIT;
        /* The first ok result fixes the number of objectives. */
        for (unsigned k = 0; k < o->replicates; k++)
            if (fitfarm_batch_result(batch, i, k, &r) == 0 && r.status == FITFARM_STATUS_OK) {
                if (s->m == 0) {
                    if (r.n_fitness == 0) {
                        fprintf(stderr, "fitfarm-nsga2: plugin %s returned no objectives\n",
                                o->plugin);
                        fitfarm_batch_destroy(&batch);
                        return 1;
                    }
                    s->m = r.n_fitness;
                    free(s->fitness);
                    s->fitness = s_alloc(2 * s->pop * s->m, sizeof *s->fitness);
                    s->ref = s_alloc(s->m, sizeof *s->ref);
                    fit = s->fitness + i * s->m;
                }
                if (r.n_fitness != s->m) {
                    fprintf(stderr, "fitfarm-nsga2: plugin %s returned %zu objectives for genome "
                                    "%zu, %zu before\n", o->plugin, r.n_fitness, i, s->m);
                    fitfarm_batch_destroy(&batch);
                    return 1;
                }
                n_ok++;
            }
        s->ok[i] = n_ok > 0;
        s->seeds[i] = fitfarm_batch_result(batch, i, 0, &r) == 0 ? r.seed : 0;
        if (!n_ok && !first_error[0] && fitfarm_batch_result(batch, i, 0, &r) == 0)
            snprintf(first_error, sizeof first_error, "%s: %s", fitfarm_status_name(r.status),
                     r.error[0] ? r.error : "no message");
        if (s->m == 0)
            continue; /* nothing ok yet: fitness is filled once m is known */
        for (size_t j = 0; j < s->m; j++) {
            size_t c = 0;
            for (unsigned k = 0; k < o->replicates; k++)
                if (fitfarm_batch_result(batch, i, k, &r) == 0 && r.status == FITFARM_STATUS_OK)
                    s->rep[c++] = r.fitness[j];
            double v = INFINITY;
            if (c > 0 && o->aggregate == NSGA2_AGGREGATE_MEDIAN) {
                qsort(s->rep, c, sizeof *s->rep, s_cmp_double);
                v = c % 2 ? s->rep[c / 2] : (s->rep[c / 2 - 1] + s->rep[c / 2]) / 2.0;
            } else if (c > 0) {
                double sum = 0.0; /* in replicate order: the bits depend on the results only */
                for (size_t k = 0; k < c; k++)
                    sum += s->rep[k];
                v = sum / (double)c;
            }
            fit[j] = v;
        }
        if (!s->ok[i])
            (*failed)++;
    }
    fitfarm_batch_destroy(&batch);
    if (s->m == 0) {
        fprintf(stderr, "fitfarm-nsga2: no genome of the first generation got an ok result from "
                        "plugin %s; the first said: %s\n", o->plugin, first_error);
        return 1;
    }
    /* Rows evaluated before m was known are all failed: infinity. */
    for (size_t i = 0; i < count; i++)
        if (!s->ok[i])
            for (size_t j = 0; j < s->m; j++)
                s->fitness[i * s->m + j] = INFINITY;
    return 0;
}

/* Ranks and crowding of points [0, count); the fronts stay in order/start.
 * Returns the number of fronts. */
static long s_rank(s_search_t *s, size_t count)
{
    long fronts = nsga2_sort(s->fitness, count, s->m, s->rank, s->order, s->start);
    if (fronts < 0) {
        fprintf(stderr, "fitfarm-nsga2: out of memory\n");
        exit(1);
    }
    double *d = s_alloc(count, sizeof *d);
    for (long k = 0; k < fronts; k++) {
        size_t b = s->start[k], e = s->start[k + 1];
        if (nsga2_crowding(s->fitness, s->m, s->order + b, e - b, d) != 0) {
            fprintf(stderr, "fitfarm-nsga2: out of memory\n");
            exit(1);
        }
        for (size_t i = b; i < e; i++)
            s->crowd[s->order[i]] = d[i - b];
    }
    free(d);
    return fronts;
}

typedef struct {
    const double *crowd;
} s_crowd_ctx_t;

/* Larger crowding first; ties by index. */
static int s_cmp_crowd(const void *a, const void *b, void *arg)
{
    const s_crowd_ctx_t *c = arg;
    size_t i = *(const size_t *)a, k = *(const size_t *)b;
    if (c->crowd[i] != c->crowd[k])
        return c->crowd[i] > c->crowd[k] ? -1 : 1;
    return (i > k) - (i < k);
}

static int s_cmp_index(const void *a, const void *b)
{
    size_t x = *(const size_t *)a, y = *(const size_t *)b;
    return (x > y) - (x < y);
}

/* Keeps the best N of the 2N (already ranked) and moves them, with their
 * fitness, rank and crowding, to [0, N) in increasing old index. */
static void s_select(s_search_t *s, long fronts)
{
    const size_t N = s->pop, n = s->n, m = s->m;
    size_t *keep = s_alloc(N, sizeof *keep);
    size_t kept = 0;
    for (long k = 0; k < fronts && kept < N; k++) {
        size_t b = s->start[k], e = s->start[k + 1];
        if (kept + (e - b) > N) {
            s_crowd_ctx_t ctx = {s->crowd};
            qsort_r(s->order + b, e - b, sizeof *s->order, s_cmp_crowd, &ctx);
        }
        for (size_t i = b; i < e && kept < N; i++)
            keep[kept++] = s->order[i];
    }
    /* In increasing index, moving row keep[i] down to row i never overwrites
     * a row still to move (keep[i] >= i). */
    qsort(keep, kept, sizeof *keep, s_cmp_index);
    for (size_t i = 0; i < kept; i++) {
        size_t from = keep[i];
        if (from == i)
            continue;
        memmove(s->genomes + i * n, s->genomes + from * n, n * sizeof *s->genomes);
        memmove(s->fitness + i * m, s->fitness + from * m, m * sizeof *s->fitness);
        s->ok[i] = s->ok[from];
        s->seeds[i] = s->seeds[from];
        s->rank[i] = s->rank[from];
        s->crowd[i] = s->crowd[from];
    }
    free(keep);
}

/* The hypervolume of the first front among [0, count) (ranks set). */
static double s_hv(s_search_t *s, size_t count)
{
    double *front = s_alloc(count * s->m, sizeof *front);
    size_t k = 0;
    for (size_t i = 0; i < count; i++)
        if (s->rank[i] == 0 && s->ok[i])
            memcpy(front + (k++) * s->m, s->fitness + i * s->m, s->m * sizeof *front);
    nsga2_hv_t hv;
    if (nsga2_hypervolume(front, k, s->m, s->ref, S_HV_SAMPLES, &hv) != 0) {
        fprintf(stderr, "fitfarm-nsga2: out of memory\n");
        exit(1);
    }
    free(front);
    return hv.value;
}

/* The reference point: given, or our rule (hypervolume.h) applied once to
 * generation 0's ok results, so every generation is measured alike. */
static int s_set_ref(s_search_t *s)
{
    const nsga2_search_options_t *o = s->o;
    if (o->ref) {
        if (o->n_ref != s->m) {
            fprintf(stderr, "fitfarm-nsga2: --ref has %zu values but plugin %s has %zu "
                            "objectives\n", o->n_ref, o->plugin, s->m);
            return 1;
        }
        memcpy(s->ref, o->ref, s->m * sizeof *s->ref);
    } else {
        double *okf = s_alloc(s->pop * s->m, sizeof *okf);
        size_t k = 0;
        for (size_t i = 0; i < s->pop; i++)
            if (s->ok[i])
                memcpy(okf + (k++) * s->m, s->fitness + i * s->m, s->m * sizeof *okf);
        nsga2_hypervolume_default_ref(okf, k, s->m, s->ref);
        free(okf);
    }
    printf("reference point for the hypervolume (%s): ",
           o->ref ? "--ref" : "generation 0's worst + 10% of its range");
    for (size_t j = 0; j < s->m; j++)
        printf("%s%.17g", j ? ", " : "", s->ref[j]);
    printf("\n");
    return 0;
}

static void s_breed(s_search_t *s)
{
    const nsga2_search_options_t *o = s->o;
    const size_t N = s->pop, n = s->n;
    for (size_t i = 0; i < N; i += 2) {
        size_t a = nsga2_tournament(&s->rng, N, s->rank, s->crowd);
        size_t b = nsga2_tournament(&s->rng, N, s->rank, s->crowd);
        double *c1 = s->genomes + (N + i) * n, *c2 = s->genomes + (N + i + 1) * n;
        nsga2_sbx(&s->rng, s->genomes + a * n, s->genomes + b * n, o->lo, o->hi, n, o->pc,
                  o->eta_c, c1, c2);
        nsga2_mutate(&s->rng, c1, o->lo, o->hi, n, o->pm, o->eta_m);
        nsga2_mutate(&s->rng, c2, o->lo, o->hi, n, o->pm, o->eta_m);
    }
}

static void s_report_population(s_search_t *s, size_t gen, int last)
{
    for (size_t i = 0; i < s->pop; i++)
        nsga2_report_individual(s->report, gen, s->rank[i], s->ok[i] ? s->fitness + i * s->m : NULL,
                                s->m, s->genomes + i * s->n, s->n, s->seeds[i],
                                last && s->rank[i] == 0);
}

int nsga2_search_run(fitfarm_client_t *client, const nsga2_search_options_t *o)
{
    s_search_t s = {.o = o, .client = client, .n = o->genes, .pop = o->population};
    const size_t N2 = 2 * s.pop;
    int rc = 1;
    s.genomes = s_alloc(N2 * s.n, sizeof *s.genomes);
    s.fitness = s_alloc(N2, sizeof *s.fitness); /* grown once m is known */
    s.ok = s_alloc(N2, sizeof *s.ok);
    s.seeds = s_alloc(N2, sizeof *s.seeds);
    s.rank = s_alloc(N2, sizeof *s.rank);
    s.crowd = s_alloc(N2, sizeof *s.crowd);
    s.order = s_alloc(N2, sizeof *s.order);
    s.start = s_alloc(N2 + 1, sizeof *s.start);
    s.rep = s_alloc(o->replicates, sizeof *s.rep);
    nsga2_rng_seed(&s.rng, o->seed);

    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = o->run_id;
    ro.seed = o->seed;
    ro.replay = o->replay;
    int frc = fitfarm_run_open(client, &ro, &s.run);
    if (frc != 0) {
        fprintf(stderr, "fitfarm-nsga2: cannot open run %s: %s\n", o->run_id,
                fitfarm_client_error(client));
        goto done;
    }
    if (nsga2_report_new(o->out_dir, &s.report) != 0)
        goto done;
    printf("run %s, seed %llu: %zu generations of %zu on plugin %s%s\n", fitfarm_run_id(s.run),
           (unsigned long long)o->seed, o->generations, s.pop, o->plugin,
           o->replay ? " (replay: answers from the store only)" : "");

    for (size_t i = 0; i < s.pop; i++)
        for (size_t k = 0; k < s.n; k++)
            s.genomes[i * s.n + k] = o->lo[k] + (o->hi[k] - o->lo[k]) * nsga2_rng_uniform(&s.rng);
    uint64_t ev, cached, total_ev = 0, total_cached = 0;
    size_t failed;
    if (s_evaluate(&s, s.pop, &ev, &cached, &failed) != 0 || s_set_ref(&s) != 0)
        goto done;
    s_rank(&s, s.pop);
    nsga2_report_generation(s.report, 0, ev, cached, failed, s_hv(&s, s.pop));
    total_ev += ev;
    total_cached += cached;
    if (o->generations == 0)
        s_report_population(&s, 0, 1);

    for (size_t g = 1; g <= o->generations; g++) {
        s_report_population(&s, g - 1, 0);
        s_breed(&s);
        if (s_evaluate(&s, N2, &ev, &cached, &failed) != 0)
            goto done;
        long fronts = s_rank(&s, N2);
        s_select(&s, fronts);
        /* The kept fronts are whole but for the last, so a rank within the
         * 2N is the rank within the survivors. */
        nsga2_report_generation(s.report, g, ev, cached, failed, s_hv(&s, s.pop));
        total_ev += ev;
        total_cached += cached;
        if (g == o->generations)
            s_report_population(&s, g, 1);
    }
    size_t front = 0;
    for (size_t i = 0; i < s.pop; i++)
        front += s.rank[i] == 0 && s.ok[i];
    printf("done: %zu genomes on the final front; %llu evaluations, %llu answered from the store; "
           "files in %s/\n", front, (unsigned long long)total_ev, (unsigned long long)total_cached,
           o->out_dir);
    /* --plugin: the axes carry the objective names the plugin declares. */
    printf("picture: fitfarm front %s/population.jsonl --png %s/front.png --plugin %s\n",
           o->out_dir, o->out_dir, o->plugin);
    rc = 0;
done:
    if (nsga2_report_destroy(&s.report) != 0)
        rc = 1;
    fitfarm_run_destroy(&s.run);
    free(s.genomes);
    free(s.fitness);
    free(s.ok);
    free(s.seeds);
    free(s.rank);
    free(s.crowd);
    free(s.order);
    free(s.start);
    free(s.ref);
    free(s.rep);
    return rc;
}
