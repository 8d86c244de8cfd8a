/* spin.c: a stochastic plugin that burns a fixed amount of CPU time, for
 * load tests, prefetch tuning and seed-handling checks.
 *
 * Params {"ms": 5}: CPU milliseconds to burn per evaluation (0..600000),
 * measured with CLOCK_THREAD_CPUTIME_ID so that a loaded machine burns the same
 * work, not the same wall time. Returns two objectives: the sum of the genome's
 * doubles (any number, including none) and u, the first fitfarm_rng_uniform()
 * draw after fitfarm_rng_seed(seed), so equal seeds give equal bits and the
 * broker's seed derivation is visible in the results. Not deterministic.
 *
 * Test knob: FITFARM_SPIN_SLOWDOWN=F (a number from 1 to 100) in the
 * worker's environment makes each evaluation take F times its wall time:
 * after the CPU work it sleeps (F - 1) x ms. A machine F times slower, for
 * the straggler benchmark (tests/bench/stragglers) and tests; the fitness
 * never depends on it. */
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <time.h>

#include "bench_params.h"

typedef struct {
    long long ms;
    double slowdown; /* FITFARM_SPIN_SLOWDOWN, 1 when unset */
} spin_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    static const char *const allowed[] = {"ms", NULL};
    json_t *root = bench_params_open("spin", params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    long long ms = 5;
    int rc = bench_params_int("spin", root, "ms", 0, 600000, &ms, err, errlen);
    json_decref(root);
    if (rc < 0)
        return FITFARM_PLUGIN_EINVAL;
    spin_ctx_t *self = malloc(sizeof *self);
    if (!self) {
        bench_errf(err, errlen, "spin: out of memory");
        return FITFARM_PLUGIN_EFAIL;
    }
    self->ms = ms;
    self->slowdown = 1.0;
    const char *slow = getenv("FITFARM_SPIN_SLOWDOWN");
    if (slow && *slow) {
        char *end = NULL;
        double f = strtod(slow, &end);
        if (*end || !(f >= 1.0 && f <= 100.0)) {
            bench_errf(err, errlen,
                       "spin: FITFARM_SPIN_SLOWDOWN is '%s', not a number from 1 to 100", slow);
            free(self);
            return FITFARM_PLUGIN_EINVAL;
        }
        self->slowdown = f;
    }
    info->objectives = 2;
    info->genome_bytes = 0;
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

static int64_t s_thread_cpu_ns(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    const spin_ctx_t *self = ctx;
    if (genome_len % 8 != 0) {
        bench_errf(err, errlen, "spin: genome is %zu bytes, not a whole number of doubles",
                   genome_len);
        return FITFARM_PLUGIN_EINVAL;
    }
    double sum = 0.0;
    for (size_t i = 0; i < genome_len / 8; i++) {
        double x = fitfarm_genome_f64(genome, i);
        if (!isfinite(x)) {
            bench_errf(err, errlen, "spin: x[%zu] = %g is not finite", i, x);
            return FITFARM_PLUGIN_EINVAL;
        }
        sum += x;
    }
    /* volatile keeps the compiler from proving the loop useless. */
    volatile uint64_t sink = 0;
    const int64_t until = s_thread_cpu_ns() + self->ms * 1000000;
    while (s_thread_cpu_ns() < until)
        for (int i = 0; i < 1000; i++)
            sink = sink * 6364136223846793005ULL + 1442695040888963407ULL;
    if (self->slowdown > 1.0) {
        double extra_ns = (self->slowdown - 1.0) * (double)self->ms * 1e6;
        struct timespec ts = {.tv_sec = (time_t)(extra_ns / 1e9),
                              .tv_nsec = (long)fmod(extra_ns, 1e9)};
        while (nanosleep(&ts, &ts) != 0 && errno == EINTR)
            ;
    }
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, seed);
    fitness[0] = sum;
    fitness[1] = fitfarm_rng_uniform(&rng);
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "spin",
    .version = "1.0.0",
    .objectives = 2,
    .flags = 0,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

/* The defaults s_create uses, so {} and the explicit defaults (or 30
 * and 30.0) are one evaluation to the broker (fitfarm_plugin.h). */
FITFARM_PLUGIN_EXPORT const char *fitfarm_plugin_param_defaults = "{\"ms\": 5}";

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
