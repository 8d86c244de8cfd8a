/* bench_cache: what the content cache buys. 100,000 sphere genomes are
 * evaluated once on the embedded local pool (with a durable store in a
 * temporary folder); then the same batch is resubmitted under a new run id,
 * answered entirely from the cache; then once more with no-cache, so every
 * genome is simulated again. Prints 'name: value unit' lines: results per
 * second from the cache, evaluations per second with no-cache, and the
 * ratio. sphere costs nanoseconds, so the no-cache figure is fitfarm's own
 * dispatch throughput: the ratio is the smallest the cache ever buys; for a
 * simulation of a second it is that many thousand times larger. Usage:
 *     build/tests/bench/bench_cache [--count N] [--slots N] */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "client/include/fitfarm.h"

static double s_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

/* Evaluates count sphere genomes under run_id; returns results per second
 * and the number answered from the cache, or -1. */
static double s_pass(fitfarm_client_t *client, const char *run_id, int no_cache, long count,
                     long *n_cached)
{
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = run_id;
    ro.seed = 1;
    ro.no_cache = no_cache;
    fitfarm_run_t *run = NULL;
    fitfarm_batch_t *batch = NULL;
    double rate = -1;
    *n_cached = 0;
    if (fitfarm_run_open(client, &ro, &run) != 0 ||
        fitfarm_batch_new("sphere", NULL, 1, &batch) != 0)
        goto cleanup;
    double g[8];
    for (long i = 0; i < count; i++) {
        for (int d = 0; d < 8; d++)
            g[d] = (double)i * 1e-3 + d;
        if (fitfarm_batch_add_f64(batch, g, 8) < 0)
            goto cleanup;
    }
    double t0 = s_now();
    if (fitfarm_evaluate(run, batch, NULL, NULL, 900000) != 0) {
        fprintf(stderr, "bench_cache: %s\n", fitfarm_client_error(client));
        goto cleanup;
    }
    double dt = s_now() - t0;
    for (long i = 0; i < count; i++) {
        fitfarm_result_t r = FITFARM_RESULT_INIT;
        if (fitfarm_batch_result(batch, (size_t)i, 0, &r) == 0 && r.cached)
            (*n_cached)++;
    }
    rate = (double)count / dt;
cleanup:
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    return rate;
}

int main(int argc, char **argv)
{
    long count = 100000, slots = 2;
    for (int i = 1; i + 1 < argc; i += 2) {
        if (strcmp(argv[i], "--count") == 0)
            count = atol(argv[i + 1]);
        else if (strcmp(argv[i], "--slots") == 0)
            slots = atol(argv[i + 1]);
    }
    char store[] = "/tmp/fitfarm-bench-cache-XXXXXX";
    if (!mkdtemp(store))
        return 1;
    const char *build = getenv("FITFARM_BUILD_DIR");
    char dir[4096];
    snprintf(dir, sizeof dir, "%s/plugins", build ? build : ".");
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.slots = (unsigned)slots;
    opts.plugin_dir = build ? dir : NULL;
    opts.store_dir = store;
    fitfarm_client_t *client = NULL;
    char err[1200];
    int rc = 1;
    if (fitfarm_client_new(&opts, &client, err, sizeof err) != 0) {
        fprintf(stderr, "bench_cache: %s\n", err);
        goto cleanup;
    }
    long cached_first, cached_again, cached_nocache;
    double first = s_pass(client, "bench-first", 0, count, &cached_first);
    double again = s_pass(client, "bench-again", 0, count, &cached_again);
    double nocache = s_pass(client, "bench-nocache", 1, count, &cached_nocache);
    if (first < 0 || again < 0 || nocache < 0)
        goto cleanup;
    printf("genomes: %ld count\n", count);
    printf("first_pass_evals_per_s: %.0f results/s\n", first);
    printf("from_cache_results_per_s: %.0f results/s\n", again);
    printf("from_cache_answered: %ld count\n", cached_again);
    printf("no_cache_evals_per_s: %.0f evaluations/s\n", nocache);
    printf("no_cache_answered_from_cache: %ld count\n", cached_nocache);
    printf("ratio: %.2f x\n", again / nocache);
    rc = cached_again == count && cached_nocache == 0 ? 0 : 1;
cleanup:
    fitfarm_client_destroy(&client);
    char cmd[256];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", store);
    if (system(cmd) != 0)
        rc = 1;
    return rc;
}
