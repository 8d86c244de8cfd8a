/* ootnoise.c: a plugin written against the installed plugin SDK only, for
 * the install test. Two objectives: the sum of squares of the genome's
 * doubles (added in order), and the first fitfarm_rng_uniform() draw of the
 * generator seeded with the evaluation's seed, so the test sees both that
 * the genome arrived and that fitfarm_rng.h is the SDK's generator.
 * OOT_PLUGIN_NAME names it, so the pkg-config and the CMake build can sit in
 * one plugin folder side by side. */
#include <fitfarm_plugin.h>
#include <fitfarm_rng.h>

#ifndef OOT_PLUGIN_NAME
#define OOT_PLUGIN_NAME "ootnoise"
#endif

static int s_create(const char *params, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    (void)params;
    (void)err;
    (void)errlen;
    *ctx = NULL;
    info->objectives = 2;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t len, uint64_t seed, double *fitness,
                      char *err, size_t errlen)
{
    (void)ctx;
    (void)err;
    (void)errlen;
    double s = 0.0;
    for (size_t i = 0; i < len / 8; i++) {
        double x = fitfarm_genome_f64(genome, i);
        s += x * x;
    }
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, seed);
    fitness[0] = s;
    fitness[1] = fitfarm_rng_uniform(&rng);
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    (void)ctx;
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = OOT_PLUGIN_NAME,
    .version = "1",
    .objectives = 2,
    .flags = 0,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
