/* sphere_alt.c: a deliberately different build of the bundled sphere plugin,
 * for `fitfarm verify` and the broker's mixed-build warning: the same name
 * and version ("sphere" 1.0.0) and the same parameters, but every fitness is
 * one unit in the last place above sum x_i^2. Built into its own folder
 * (test-plugins-alt/sphere.so) so that a worker loads it only when a test
 * points --plugin-dir there. */
#include <math.h>
#include <stdlib.h>

#include "bench_params.h"

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    return bench_dim_create("sphere", 1, params_json, ctx, info, err, errlen);
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)seed;
    const bench_dim_ctx_t *self = ctx;
    size_t n = bench_genome_check("sphere", genome, genome_len, self->n, 1, 1.0, 0.0, err,
                                  errlen);
    if (!n)
        return FITFARM_PLUGIN_EINVAL;
    double f = 0.0;
    for (size_t i = 0; i < n; i++) {
        double x = fitfarm_genome_f64(genome, i);
        f += x * x;
    }
    fitness[0] = nextafter(f, INFINITY); /* the last bit differs */
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "sphere",
    .version = "1.0.0",
    .objectives = 1,
    .flags = FITFARM_PLUGIN_DETERMINISTIC,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
