/* plugin.c: the granular plugin's glue to the ABI (fitfarm_plugin.h): the
 * descriptor, create/evaluate/destroy, and the optional trace entry point.
 * Owns decoding the genome and turning results into a fitness vector; the
 * simulation is pad.c's.
 *
 * Not deterministic: the seed draws manufacturing scatter (pad.h). With
 * scatter_radius = 0 and jitter = 0 the seed changes nothing (every draw is
 * multiplied by zero), so those two are the plugin's seed params: requests
 * giving both as 0 are keyed without the seed and share one result. */
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>

#include "fitfarm_plugin.h"
#include "pad.h"
#include "params.h"
#include "trace.h"

#define GRANULAR_VERSION "1.0.0"

typedef struct {
    granular_params_t params;
    char *params_json; /* as given, for trace headers */
} granular_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    granular_ctx_t *self = calloc(1, sizeof *self);
    if (!self) {
        snprintf(err, errlen, "granular: out of memory");
        return FITFARM_PLUGIN_EFAIL;
    }
    if (granular_params_parse(params_json, &self->params, err, errlen) < 0) {
        free(self);
        return FITFARM_PLUGIN_EINVAL;
    }
    info->objectives = (uint32_t)self->params.objectives;
    info->genome_bytes = (uint32_t)(8 * self->params.rows * self->params.columns);
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

/* Decodes the genome into doubles. Returns the array (caller frees) or NULL
 * with err set and *rc the plugin code. */
static double *s_genes(const granular_params_t *p, const uint8_t *genome, size_t genome_len,
                       int *rc, char *err, size_t errlen)
{
    size_t want = (size_t)p->rows * (size_t)p->columns;
    if (genome_len != want * 8) {
        snprintf(err, errlen,
                 "granular: genome is %zu bytes (%zu doubles), expected %zu doubles "
                 "(rows*columns = %d*%d)",
                 genome_len, genome_len / 8, want, p->rows, p->columns);
        *rc = FITFARM_PLUGIN_EINVAL;
        return NULL;
    }
    double *genes = malloc(want * sizeof *genes);
    if (!genes) {
        snprintf(err, errlen, "granular: out of memory");
        *rc = FITFARM_PLUGIN_EFAIL;
        return NULL;
    }
    for (size_t i = 0; i < want; i++)
        genes[i] = fitfarm_genome_f64(genome, i);
    return genes;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    granular_ctx_t *self = ctx;
    int rc = FITFARM_PLUGIN_OK;
    double *genes = s_genes(&self->params, genome, genome_len, &rc, err, errlen);
    if (!genes)
        return rc;
    granular_pad_result_t res;
    rc = granular_pad_run(&self->params, genes, (size_t)self->params.rows * self->params.columns,
                          seed, NULL, &res, err, errlen);
    free(genes);
    if (rc == FITFARM_PLUGIN_OK)
        for (int i = 0; i < self->params.objectives; i++)
            fitness[i] = res.fitness[i];
    return rc;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "granular",
    .version = GRANULAR_VERSION,
    .objectives = 2,
    .flags = 0, /* stochastic: the seed draws scatter */
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}

/* Both zero: radii are exactly r and positions exactly the lattice sites. */
static const char *const s_seed_params[] = {"scatter_radius", "jitter", NULL};
FITFARM_PLUGIN_EXPORT const char *const *fitfarm_plugin_seed_params = s_seed_params;

/* What the fitness vector holds (pad.h): the worst transmissibility over the
 * disturbance frequencies in dB, the plate's settlement in mm, and with
 * "objectives": 3 the share of stiff material, a pure number in [0, 1]. */
static const fitfarm_plugin_objective_t s_objectives[] = {
    {"transmissibility", "dB"}, {"settlement", "mm"}, {"stiff share", NULL}, {NULL, NULL}};
FITFARM_PLUGIN_EXPORT const fitfarm_plugin_objective_t *fitfarm_plugin_objective_names =
    s_objectives;

/* The optional trace entry point (fitfarm_plugin_trace_fn): one evaluation
 * exactly as evaluate() does it, with the time series written to path as
 * JSON Lines (trace.h). */
FITFARM_PLUGIN_EXPORT int fitfarm_plugin_trace(const char *params_json, const uint8_t *genome,
                                               size_t genome_len, uint64_t seed, const char *path,
                                               char *err, size_t errlen)
{
    int rc = FITFARM_PLUGIN_EINVAL;
    granular_params_t p;
    double *genes = NULL;
    char *canon = NULL;
    FILE *f = NULL;
    if (granular_params_parse(params_json, &p, err, errlen) < 0)
        goto cleanup;
    genes = s_genes(&p, genome, genome_len, &rc, err, errlen);
    if (!genes)
        goto cleanup;
    /* Re-print the params so the header is one valid JSON line. */
    json_t *root = json_loads(params_json ? params_json : "{}", 0, NULL);
    canon = root ? json_dumps(root, JSON_COMPACT | JSON_SORT_KEYS) : NULL;
    json_decref(root);
    f = fopen(path, "w");
    if (!f) {
        snprintf(err, errlen, "granular: cannot write trace file %.200s", path);
        rc = FITFARM_PLUGIN_EFAIL;
        goto cleanup;
    }
    granular_trace_t trace = {
        .f = f, .version = GRANULAR_VERSION, .params_json = canon ? canon : "{}"};
    granular_pad_result_t res;
    rc = granular_pad_run(&p, genes, (size_t)p.rows * p.columns, seed, &trace, &res, err, errlen);
    if (fclose(f) != 0 && rc == FITFARM_PLUGIN_OK) {
        snprintf(err, errlen, "granular: writing trace file %.200s failed", path);
        rc = FITFARM_PLUGIN_EFAIL;
    }
    f = NULL;
cleanup:
    if (f)
        fclose(f);
    free(canon);
    free(genes);
    return rc;
}
