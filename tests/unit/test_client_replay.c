/* test_client_replay.c: an optimizer written against libfitfarm replays its
 * whole trajectory from the store without a single simulation.
 *
 * The optimizer is a (1+1) evolution strategy with the 1/5th success rule
 * (Rechenberg; Beyer & Schwefel, "Evolution strategies: a comprehensive
 * introduction", Natural Computing 1, 2002) on the stochastic spin plugin
 * with 2 replicates: each child genome depends on every earlier result, so a
 * single differing bit would change the rest of the path. It runs once live
 * on an embedded pool with a store folder, then again with replay on the same
 * run id and seed on a fresh embedded pool over the same store: the path is
 * identical bit for bit and the store records no new evaluation. A replay
 * that strays from the record stops with FITFARM_ENOTRECORDED.
 *
 * Outside reference: spin's first objective is the sum of the genome's
 * doubles (worker/plugins/spin.c), recomputed here in the same order. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "client/include/fitfarm.h"

#define DIM 4
#define GENERATIONS 40

typedef struct {
    double genome[GENERATIONS][DIM]; /* the child of each generation */
    double fitness[GENERATIONS];
    double best;
    int cached[GENERATIONS];
} es_path_t;

/* splitmix64 (Blackman & Vigna), top 53 bits; Box-Muller for normals. */
static double s_uniform(uint64_t *state)
{
    uint64_t z = (*state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    return ((double)(z >> 11) + 0.5) * 0x1.0p-53;
}

static double s_normal(uint64_t *state)
{
    double u1 = s_uniform(state), u2 = s_uniform(state);
    return sqrt(-2.0 * log(u1)) * cos(6.283185307179586 * u2);
}

static fitfarm_client_t *s_pool(const char *store)
{
    const char *build = getenv("FITFARM_BUILD_DIR");
    static char dir[4096];
    snprintf(dir, sizeof dir, "%s/plugins", build ? build : ".");
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.slots = 2;
    opts.plugin_dir = dir;
    opts.store_dir = store;
    opts.connect_timeout_ms = 20000;
    fitfarm_client_t *client = NULL;
    char err[1200];
    int rc = fitfarm_client_new(&opts, &client, err, sizeof err);
    if (rc != 0)
        fail_msg("embedded pool did not start (%s): %s", fitfarm_strerror(rc), err);
    return client;
}

/* Runs the ES. Returns 0, or the first failing library code. */
static int s_es(fitfarm_client_t *client, int replay, uint64_t run_seed, double start0,
                es_path_t *path)
{
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "es-path";
    ro.seed = run_seed;
    ro.replay = replay;
    fitfarm_run_t *run = NULL;
    int rc = fitfarm_run_open(client, &ro, &run);
    if (rc != 0)
        return rc;
    double parent[DIM] = {start0, 0.5, -0.25, 0.75};
    double parent_f = INFINITY, sigma = 0.5;
    uint64_t rng = 2024; /* the optimizer's own randomness */
    memset(path, 0, sizeof *path);
    for (int gen = 0; gen < GENERATIONS && rc == 0; gen++) {
        double child[DIM];
        for (int i = 0; i < DIM; i++)
            child[i] = gen == 0 ? parent[i] : parent[i] + sigma * s_normal(&rng);
        fitfarm_batch_t *b = NULL;
        rc = fitfarm_batch_new("spin", "{\"ms\":0}", 2, &b);
        if (rc == 0 && fitfarm_batch_add_f64(b, child, DIM) < 0)
            rc = FITFARM_EINVAL;
        if (rc == 0)
            rc = fitfarm_evaluate(run, b, NULL, NULL, 60000);
        if (rc == 0) {
            /* f = |sum x - 1| + 0.1 * mean noise: the noise steers the path. */
            double f = 0.0;
            for (unsigned r = 0; r < 2 && rc == 0; r++) {
                fitfarm_result_t res = FITFARM_RESULT_INIT;
                rc = fitfarm_batch_result(b, 0, r, &res);
                if (rc == 0) {
                    assert_int_equal(res.status, FITFARM_STATUS_OK);
                    double sum = 0.0;
                    for (int i = 0; i < DIM; i++)
                        sum += child[i];
                    assert_true(res.fitness[0] == sum); /* spin.c's first objective */
                    f += fabs(res.fitness[0] - 1.0) / 2.0 + 0.05 * res.fitness[1];
                    path->cached[gen] |= res.cached;
                }
            }
            memcpy(path->genome[gen], child, sizeof child);
            path->fitness[gen] = f;
            if (f < parent_f) {
                memcpy(parent, child, sizeof child);
                parent_f = f;
                sigma *= 1.5; /* 1/5th rule: grow on success ... */
            } else {
                sigma *= 0.9; /* ... shrink on failure (0.9^4 * 1.5 ~ 1) */
            }
        }
        fitfarm_batch_destroy(&b);
    }
    path->best = parent_f;
    fitfarm_run_destroy(&run);
    return rc;
}

/* Evaluations the store recorded for the run (rows in the results history). */
static long s_evaluations(const char *store)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/fitfarm.db", store);
    sqlite3 *db = NULL;
    long n = -1;
    if (sqlite3_open_v2(path, &db, SQLITE_OPEN_READONLY, NULL) == SQLITE_OK) {
        sqlite3_stmt *st = NULL;
        if (sqlite3_prepare_v2(db, "SELECT count(*) FROM simulations WHERE run_id = 'es-path'", -1,
                               &st, NULL) == SQLITE_OK &&
            sqlite3_step(st) == SQLITE_ROW)
            n = sqlite3_column_int64(st, 0);
        sqlite3_finalize(st);
    }
    sqlite3_close(db);
    return n;
}

static void test_es_replays_without_evaluating(void **state)
{
    (void)state;
    char store[] = "/tmp/fitfarm-es-XXXXXX";
    assert_non_null(mkdtemp(store));
    static es_path_t live, again, strayed;

    fitfarm_client_t *client = s_pool(store);
    assert_int_equal(s_es(client, 0, 77, 0.0, &live), 0);
    fitfarm_client_destroy(&client);
    long evaluated = s_evaluations(store);
    /* Two replicates per generation, each simulated once. */
    assert_int_equal(evaluated, 2 * GENERATIONS);
    assert_true(live.best < live.fitness[0]); /* the ES made progress */

    client = s_pool(store); /* a fresh pool on the same store */
    assert_int_equal(s_es(client, 1, 77, 0.0, &again), 0);
    assert_memory_equal(&live.genome, &again.genome, sizeof live.genome);
    assert_memory_equal(&live.fitness, &again.fitness, sizeof live.fitness);
    assert_memory_equal(&live.cached, &again.cached, sizeof live.cached);
    assert_int_equal(s_evaluations(store), evaluated); /* zero evaluations */

    /* Another starting point was never recorded: replay stops, simulating nothing. */
    assert_int_equal(s_es(client, 1, 77, 0.125, &strayed), FITFARM_ENOTRECORDED);
    assert_non_null(strstr(fitfarm_client_error(client), "never recorded"));
    fitfarm_client_destroy(&client);
    assert_int_equal(s_evaluations(store), evaluated);

    char cmd[4200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", store);
    assert_int_equal(system(cmd), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_es_replays_without_evaluating),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
