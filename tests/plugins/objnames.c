/* objnames<N>.so: a two-objective plugin whose fitfarm_plugin_objective_names
 * is case N (OBJNAMES_CASE): 0 a valid list with a non-ASCII unit, 1 a name
 * longer than 48 bytes, 2 a control character in a unit, 3 a bad UTF-8
 * sequence, 4 a NULL pointer. For `fitfarm front --plugin` (test_show.py):
 * every broken case must be refused with the reason. */
#include <stddef.h>

#include "fitfarm_plugin.h"

#ifndef OBJNAMES_CASE
#define OBJNAMES_CASE 0
#endif

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    (void)params_json, (void)err, (void)errlen;
    *ctx = NULL;
    info->objectives = 2;
    info->genome_bytes = 0;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)ctx, (void)genome, (void)seed, (void)err, (void)errlen;
    fitness[0] = (double)genome_len;
    fitness[1] = 0.0;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    (void)ctx;
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "objnames",
    .version = "1.0.0",
    .objectives = 2,
    .flags = FITFARM_PLUGIN_DETERMINISTIC,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}

#if OBJNAMES_CASE == 0
static const fitfarm_plugin_objective_t s_list[] = {
    {"peak acceleration", "m/s\xc2\xb2"}, {"cost", ""}, {NULL, NULL}};
#elif OBJNAMES_CASE == 1
static const fitfarm_plugin_objective_t s_list[] = {
    {"a name that goes on and on well past forty-eight bytes", "s"}, {NULL, NULL}};
#elif OBJNAMES_CASE == 2
static const fitfarm_plugin_objective_t s_list[] = {{"time", "s\n"}, {NULL, NULL}};
#elif OBJNAMES_CASE == 3
static const fitfarm_plugin_objective_t s_list[] = {{"mass", "k\xc3"}, {NULL, NULL}};
#endif

#if OBJNAMES_CASE == 4
FITFARM_PLUGIN_EXPORT const fitfarm_plugin_objective_t *fitfarm_plugin_objective_names = NULL;
#else
FITFARM_PLUGIN_EXPORT const fitfarm_plugin_objective_t *fitfarm_plugin_objective_names = s_list;
#endif
