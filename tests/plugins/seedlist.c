/* seedlist.c: a test-only plugin built once per SEEDLIST_CASE, each exporting
 * a different fitfarm_plugin_seed_params (fitfarm_plugin.h), for the worker's
 * validation of that list (tests/unit/test_worker_seed_params.c):
 *   0 a valid list of two names     3 a name with an upper-case letter
 *   1 17 names (the limit is 16)    4 a name of 65 characters
 *   2 an empty name                 5 a NULL pointer
 *   6 the symbol not exported (no list)
 * The plugin itself returns the sum of its genome's bytes. */
#include <stdint.h>

#include "fitfarm_plugin.h"

#define S_STR(x) #x
#define S_NAME(x) "seedlist" S_STR(x)

static int s_create(const char *params, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    (void)params, (void)err, (void)errlen;
    *ctx = NULL;
    info->objectives = 1;
    info->genome_bytes = 0;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t len, uint64_t seed, double *fit,
                      char *err, size_t errlen)
{
    (void)ctx, (void)seed, (void)err, (void)errlen;
    double sum = 0.0;
    for (size_t i = 0; i < len; i++)
        sum += genome[i];
    fit[0] = sum;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    (void)ctx;
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = S_NAME(SEEDLIST_CASE),
    .version = "1.0.0",
    .objectives = 1,
    .flags = 0,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}

#if SEEDLIST_CASE == 0
static const char *const s_list[] = {"noise", "drift_2", NULL};
#elif SEEDLIST_CASE == 1
static const char *const s_list[] = {"a", "b", "c", "d", "e", "f", "g", "h", "i",
                                     "j", "k", "l", "m", "n", "o", "p", "q", NULL};
#elif SEEDLIST_CASE == 2
static const char *const s_list[] = {"noise", "", NULL};
#elif SEEDLIST_CASE == 3
static const char *const s_list[] = {"Noise", NULL};
#elif SEEDLIST_CASE == 4
static const char *const s_list[] = {
    "a234567890123456789012345678901234567890123456789012345678901234x", NULL};
#endif
#if SEEDLIST_CASE <= 4
FITFARM_PLUGIN_EXPORT const char *const *fitfarm_plugin_seed_params = s_list;
#elif SEEDLIST_CASE == 5
FITFARM_PLUGIN_EXPORT const char *const *fitfarm_plugin_seed_params = NULL;
#endif
