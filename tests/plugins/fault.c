/* fault.c: a test-only plugin "fault" whose genome chooses how it misbehaves,
 * so tests can drive every failure path of the worker through the real ABI.
 *
 * The genome's first double x0 selects the behaviour:
 *   0 return [x0] (ok)            5 return [NaN]
 *   1 SIGSEGV (write through NULL) 6 sleep params.ms milliseconds, then ok
 *   2 abort()                     7 _exit(3)
 *   3 hang forever                8 return EFAIL with a message
 *   4 allocate without bound,     9 return EINVAL with a message
 *     touching every page
 * Params {"ms": N} (default 100) for behaviour 6. Flags: none (stochastic), so
 * tests see seeds in keys. Not for installation: built into test-plugins/. */
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "bench_params.h"

typedef struct {
    long long ms;
} fault_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    static const char *const allowed[] = {"ms", NULL};
    json_t *root = bench_params_open("fault", params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    long long ms = 100;
    int rc = bench_params_int("fault", root, "ms", 0, 3600000, &ms, err, errlen);
    json_decref(root);
    if (rc < 0)
        return FITFARM_PLUGIN_EINVAL;
    fault_ctx_t *self = malloc(sizeof *self);
    if (!self)
        return FITFARM_PLUGIN_EFAIL;
    self->ms = ms;
    info->objectives = 1;
    info->genome_bytes = 0;
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

/* A real invalid store. Default action first and no sanitizer checks here,
 * so that sanitizer builds die from the signal too instead of reporting and
 * exiting. */
__attribute__((no_sanitize("address", "undefined"), noinline)) static void s_segv(void)
{
    signal(SIGSEGV, SIG_DFL);
    volatile int *volatile p = NULL;
    *p = 1;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)seed;
    const fault_ctx_t *self = ctx;
    if (genome_len < 8) {
        bench_errf(err, errlen, "fault: genome needs at least one double");
        return FITFARM_PLUGIN_EINVAL;
    }
    double x0 = fitfarm_genome_f64(genome, 0);
    switch ((int)x0) {
    case 0:
        break;
    case 1:
        s_segv();
        break;
    case 2:
        abort();
    case 3:
        for (;;)
            pause();
    case 4: {
        /* Touch every page so the memory is really committed; stop (EFAIL)
         * only when malloc itself says no, as under an address-space limit. */
        for (;;) {
            size_t chunk = 16u << 20;
            char *p = malloc(chunk);
            if (!p) {
                bench_errf(err, errlen, "fault: out of memory");
                return FITFARM_PLUGIN_EFAIL;
            }
            for (size_t i = 0; i < chunk; i += 4096)
                p[i] = 1;
        }
    }
    case 5:
        fitness[0] = NAN;
        return FITFARM_PLUGIN_OK;
    case 6: {
        struct timespec ts = {(time_t)(self->ms / 1000), (long)(self->ms % 1000) * 1000000L};
        while (nanosleep(&ts, &ts) != 0)
            ;
        break;
    }
    case 7:
        /* _exit, not exit: in sanitizer builds exit() would run the leak
         * checker over the worker's inherited heap and change the status. */
        _exit(3);
    case 8:
        bench_errf(err, errlen, "fault: asked to fail");
        return FITFARM_PLUGIN_EFAIL;
    case 9:
        bench_errf(err, errlen, "fault: asked to call the request invalid");
        return FITFARM_PLUGIN_EINVAL;
    default:
        bench_errf(err, errlen, "fault: unknown behaviour %g", x0);
        return FITFARM_PLUGIN_EINVAL;
    }
    fitness[0] = x0;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "fault",
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
