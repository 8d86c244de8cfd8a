/* dtlz2.c: the DTLZ2 scalable many-objective benchmark (Deb, Thiele, Laumanns,
 * Zitzler, "Scalable Test Problems for Evolutionary Multi-Objective
 * Optimization", 2002).
 *
 * Params {"m": 3, "k": 10}: m objectives (2..64), k distance variables; the
 * genome is n = m + k - 1 little-endian doubles in [0, 1]. With
 * g = sum_{i >= m} (x_i - 0.5)^2 (0-based i),
 *   f_1 = (1+g) prod_{j<m-1} cos(x_j pi/2),
 *   f_p = (1+g) prod_{j<m-p} cos(x_j pi/2) * sin(x_{m-p} pi/2),  p = 2..m.
 * The Pareto front is the unit sphere's positive orthant (g = 0).
 * Deterministic. Not here: the parsing helpers (bench_params.h). */
#include <math.h>
#include <stdlib.h>

#include "bench_params.h"

#define DTLZ2_MAX_M 64 /* PROTO_MAX_OBJECTIVES */

typedef struct {
    size_t m, k, n;
} dtlz2_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    static const char *const allowed[] = {"k", "m", NULL};
    json_t *root = bench_params_open("dtlz2", params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    long long m = 3, k = 10;
    int rc = bench_params_int("dtlz2", root, "m", 2, DTLZ2_MAX_M, &m, err, errlen);
    if (rc >= 0)
        rc = bench_params_int("dtlz2", root, "k", 1, BENCH_MAX_DOUBLES - DTLZ2_MAX_M, &k, err,
                              errlen);
    json_decref(root);
    if (rc < 0)
        return FITFARM_PLUGIN_EINVAL;
    dtlz2_ctx_t *self = malloc(sizeof *self);
    if (!self) {
        bench_errf(err, errlen, "dtlz2: out of memory");
        return FITFARM_PLUGIN_EFAIL;
    }
    self->m = (size_t)m;
    self->k = (size_t)k;
    self->n = self->m + self->k - 1;
    info->objectives = (uint32_t)self->m;
    info->genome_bytes = (uint32_t)(self->n * 8);
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)seed;
    const dtlz2_ctx_t *self = ctx;
    if (!bench_genome_check("dtlz2", genome, genome_len, self->n, self->n, 0.0, 1.0, err,
                            errlen))
        return FITFARM_PLUGIN_EINVAL;
    const size_t m = self->m, n = self->n;
    double g = 0.0;
    for (size_t i = m - 1; i < n; i++) {
        double d = fitfarm_genome_f64(genome, i) - 0.5;
        g += d * d;
    }
    for (size_t p = 0; p < m; p++) { /* objective p+1 */
        double f = 1.0 + g;
        for (size_t j = 0; j + 1 + p < m; j++)
            f *= cos(fitfarm_genome_f64(genome, j) * M_PI / 2.0);
        if (p > 0)
            f *= sin(fitfarm_genome_f64(genome, m - 1 - p) * M_PI / 2.0);
        fitness[p] = f;
    }
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "dtlz2",
    .version = "1.0.0",
    .objectives = 3,
    .flags = FITFARM_PLUGIN_DETERMINISTIC,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

/* The defaults s_create uses, so {} and the explicit defaults (or 30
 * and 30.0) are one evaluation to the broker (fitfarm_plugin.h). */
FITFARM_PLUGIN_EXPORT const char *fitfarm_plugin_param_defaults = "{\"k\": 10, \"m\": 3}";

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
