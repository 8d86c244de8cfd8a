/* versioned.c: one test plugin, "versioned", built once per version
 * (VERSIONED_VERSION, a string, and VERSIONED_MARK, a number) into a folder
 * of its own per version (tests/plugins/CMakeLists.txt), so that a test can
 * give workers different versions of one name and see in the bits which
 * version computed a result (test_version_routing.py).
 *
 * Deterministic, two objectives: the sum of x_i^2 over the genome's doubles
 * (as sphere computes it) and VERSIONED_MARK. Params {"ms": N}: wall-clock
 * milliseconds to sleep per evaluation (0..60000, default 0), so a test can
 * keep jobs in flight. */
#include <time.h>

#include "bench_params.h"

#ifndef VERSIONED_VERSION
#error "build with -DVERSIONED_VERSION=\"1.0\" -DVERSIONED_MARK=10"
#endif

typedef struct {
    long long ms;
} versioned_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    static const char *const allowed[] = {"ms", NULL};
    json_t *root = bench_params_open("versioned", params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    long long ms = 0;
    int rc = bench_params_int("versioned", root, "ms", 0, 60000, &ms, err, errlen);
    json_decref(root);
    if (rc < 0)
        return FITFARM_PLUGIN_EINVAL;
    versioned_ctx_t *self = malloc(sizeof *self);
    if (!self) {
        bench_errf(err, errlen, "versioned: out of memory");
        return FITFARM_PLUGIN_EFAIL;
    }
    self->ms = ms;
    info->objectives = 2;
    info->genome_bytes = 0;
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)seed;
    const versioned_ctx_t *self = ctx;
    size_t n = bench_genome_check("versioned", genome, genome_len, 0, 1, 1.0, 0.0, err, errlen);
    if (!n)
        return FITFARM_PLUGIN_EINVAL;
    if (self->ms > 0) {
        struct timespec ts = {.tv_sec = self->ms / 1000, .tv_nsec = (self->ms % 1000) * 1000000};
        while (nanosleep(&ts, &ts) != 0) {
        }
    }
    double f = 0.0;
    for (size_t i = 0; i < n; i++) {
        double x = fitfarm_genome_f64(genome, i);
        f += x * x;
    }
    fitness[0] = f;
    fitness[1] = VERSIONED_MARK;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "versioned",
    .version = VERSIONED_VERSION,
    .objectives = 2,
    .flags = FITFARM_PLUGIN_DETERMINISTIC,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const char *fitfarm_plugin_param_defaults = "{\"ms\": 0}";

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
