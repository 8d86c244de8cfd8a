/* zdt.c: the ZDT1, ZDT2 and ZDT3 two-objective benchmarks (Zitzler, Deb,
 * Thiele, "Comparison of Multiobjective Evolutionary Algorithms: Empirical
 * Results", Evolutionary Computation 8(2), 2000). One source, compiled three
 * times with -DZDT_VARIANT=1, 2 or 3 into zdt1.so, zdt2.so, zdt3.so.
 *
 * Params {"n": 30}: the number of decision variables (default 30, as in the
 * paper). The genome is n little-endian doubles in [0, 1]; anything else is
 * EINVAL naming the offending index and value. Deterministic: the seed is
 * ignored. Not here: the parsing helpers (bench_params.h). */
#include <math.h>
#include <stdlib.h>

#include "bench_params.h"

#if !defined(ZDT_VARIANT) || ZDT_VARIANT < 1 || ZDT_VARIANT > 3
#error "compile with -DZDT_VARIANT=1, 2 or 3"
#endif

#define ZDT_STR2(x) #x
#define ZDT_STR(x) ZDT_STR2(x)
#define ZDT_NAME "zdt" ZDT_STR(ZDT_VARIANT)

typedef struct {
    size_t n;
} zdt_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    static const char *const allowed[] = {"n", NULL};
    json_t *root = bench_params_open(ZDT_NAME, params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    long long n = 30;
    int rc = bench_params_int(ZDT_NAME, root, "n", 2, BENCH_MAX_DOUBLES, &n, err, errlen);
    json_decref(root);
    if (rc < 0)
        return FITFARM_PLUGIN_EINVAL;
    zdt_ctx_t *self = malloc(sizeof *self);
    if (!self) {
        bench_errf(err, errlen, ZDT_NAME ": out of memory");
        return FITFARM_PLUGIN_EFAIL;
    }
    self->n = (size_t)n;
    info->objectives = 2;
    info->genome_bytes = (uint32_t)(self->n * 8);
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)seed;
    const zdt_ctx_t *self = ctx;
    if (!bench_genome_check(ZDT_NAME, genome, genome_len, self->n, self->n, 0.0, 1.0, err,
                            errlen))
        return FITFARM_PLUGIN_EINVAL;
    const size_t n = self->n;
    double f1 = fitfarm_genome_f64(genome, 0);
    double sum = 0.0;
    for (size_t i = 1; i < n; i++)
        sum += fitfarm_genome_f64(genome, i);
    double g = 1.0 + 9.0 * sum / (double)(n - 1);
    double r = f1 / g;
#if ZDT_VARIANT == 1
    double h = 1.0 - sqrt(r);
#elif ZDT_VARIANT == 2
    double h = 1.0 - r * r;
#else
    double h = 1.0 - sqrt(r) - r * sin(10.0 * M_PI * f1);
#endif
    fitness[0] = f1;
    fitness[1] = g * h;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = ZDT_NAME,
    .version = "1.0.0",
    .objectives = 2,
    .flags = FITFARM_PLUGIN_DETERMINISTIC,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

/* The defaults s_create uses, so {} and the explicit defaults (or 30
 * and 30.0) are one evaluation to the broker (fitfarm_plugin.h). */
FITFARM_PLUGIN_EXPORT const char *fitfarm_plugin_param_defaults = "{\"n\": 30}";

/* The benchmark's own names (Zitzler, Deb, Thiele 2000): pure numbers. */
static const fitfarm_plugin_objective_t s_objectives[] = {{"f1", NULL}, {"f2", NULL}, {NULL, NULL}};
FITFARM_PLUGIN_EXPORT const fitfarm_plugin_objective_t *fitfarm_plugin_objective_names =
    s_objectives;

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
