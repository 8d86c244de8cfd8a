/* bench_params.h: parameter parsing and genome checks shared by the bundled
 * benchmark plugins, header-only so that each plugin shared object stands alone
 * (plugins depend on nothing of ours at run time; they link jansson).
 *
 * Params arrive as canonical JSON objects. Each plugin lists the keys it takes;
 * an unknown key, a wrong type or a value out of range fails create() with a
 * sentence naming the key, so a typo in a run's params is caught before any
 * evaluation is spent on it. Not here: the formulas (each plugin's own file). */
#ifndef BENCH_PARAMS_H
#define BENCH_PARAMS_H

#include <jansson.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fitfarm_plugin.h"

/* A genome is at most 1 MiB (proto/limits.h), i.e. this many doubles. */
#define BENCH_MAX_DOUBLES (1024u * 1024u / 8u)

static inline void bench_errf(char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static inline void bench_errf(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || errlen == 0)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

/* Parses params_json into an object and checks that every key is one of
 * allowed (NULL-terminated). Returns the object (caller json_decref()s it) or
 * NULL with a sentence in err. */
static inline json_t *bench_params_open(const char *plugin, const char *params_json,
                                        const char *const *allowed, char *err, size_t errlen)
{
    json_error_t jerr;
    json_t *root = json_loads(params_json ? params_json : "{}", JSON_REJECT_DUPLICATES, &jerr);
    if (!root) {
        bench_errf(err, errlen, "%s: params are not valid JSON: %s", plugin, jerr.text);
        return NULL;
    }
    if (!json_is_object(root)) {
        bench_errf(err, errlen, "%s: params must be a JSON object", plugin);
        json_decref(root);
        return NULL;
    }
    const char *key;
    json_t *value;
    json_object_foreach(root, key, value)
    {
        int known = 0;
        for (size_t i = 0; allowed[i]; i++)
            if (strcmp(key, allowed[i]) == 0)
                known = 1;
        if (!known) {
            char list[256] = "";
            size_t used = 0;
            for (size_t i = 0; allowed[i] && used < sizeof list; i++)
                used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "",
                                         allowed[i]);
            bench_errf(err, errlen, "%s: unknown parameter \"%.64s\" (it takes: %s)", plugin, key,
                       allowed[0] ? list : "none");
            json_decref(root);
            return NULL;
        }
    }
    return root;
}

/* Reads an optional integer key into *out (left unchanged when absent). Returns
 * 1 when present, 0 when absent, -1 (with err) on a wrong type or a value
 * outside [lo, hi]. */
static inline int bench_params_int(const char *plugin, json_t *root, const char *key, long long lo,
                                   long long hi, long long *out, char *err, size_t errlen)
{
    json_t *v = json_object_get(root, key);
    if (!v)
        return 0;
    /* 30.0 is accepted as 30: canonical JSON may print integral reals either way. */
    long long n;
    if (json_is_integer(v)) {
        n = json_integer_value(v);
    } else if (json_is_real(v) && json_real_value(v) == floor(json_real_value(v)) &&
               fabs(json_real_value(v)) < 9e15) {
        n = (long long)json_real_value(v);
    } else {
        bench_errf(err, errlen, "%s: parameter \"%s\" must be an integer", plugin, key);
        return -1;
    }
    if (n < lo || n > hi) {
        bench_errf(err, errlen, "%s: parameter \"%s\" is %lld, must be in [%lld, %lld]", plugin,
                   key, n, lo, hi);
        return -1;
    }
    *out = n;
    return 1;
}

/* Checks that the genome holds whole doubles, n of them when n > 0 (else at
 * least min_n), each finite and, when lo <= hi, inside [lo, hi]. Returns the
 * number of doubles, or 0 with err naming the first problem. */
static inline size_t bench_genome_check(const char *plugin, const uint8_t *genome, size_t len,
                                        size_t n, size_t min_n, double lo, double hi, char *err,
                                        size_t errlen)
{
    if (len % 8 != 0) {
        bench_errf(err, errlen, "%s: genome is %zu bytes, not a whole number of doubles", plugin,
                   len);
        return 0;
    }
    size_t have = len / 8;
    if (n > 0 && have != n) {
        bench_errf(err, errlen, "%s: genome has %zu doubles, expected %zu", plugin, have, n);
        return 0;
    }
    if (have < min_n || have == 0) {
        bench_errf(err, errlen, "%s: genome has %zu doubles, expected at least %zu", plugin, have,
                   min_n ? min_n : 1);
        return 0;
    }
    for (size_t i = 0; i < have; i++) {
        double x = fitfarm_genome_f64(genome, i);
        if (!isfinite(x)) {
            bench_errf(err, errlen, "%s: x[%zu] = %g is not finite", plugin, i, x);
            return 0;
        }
        if (lo <= hi && (x < lo || x > hi)) {
            bench_errf(err, errlen, "%s: x[%zu] = %.17g is outside [%g, %g]", plugin, i, x, lo,
                       hi);
            return 0;
        }
    }
    return have;
}

/* Context of the plugins whose one param is an optional dimension {"n": N}
 * (0: any length of at least one double). */
typedef struct {
    size_t n;
} bench_dim_ctx_t;

/* create() for such plugins: parses {"n"}, fills info with objectives and the
 * expected genome size. Returns a FITFARM_PLUGIN_* code. */
static inline int bench_dim_create(const char *plugin, uint32_t objectives,
                                   const char *params_json, void **ctx,
                                   fitfarm_plugin_info_t *info, char *err, size_t errlen)
{
    static const char *const allowed[] = {"n", NULL};
    json_t *root = bench_params_open(plugin, params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    long long n = 0;
    int rc = bench_params_int(plugin, root, "n", 1, BENCH_MAX_DOUBLES, &n, err, errlen);
    json_decref(root);
    if (rc < 0)
        return FITFARM_PLUGIN_EINVAL;
    bench_dim_ctx_t *self = malloc(sizeof *self);
    if (!self) {
        bench_errf(err, errlen, "%s: out of memory", plugin);
        return FITFARM_PLUGIN_EFAIL;
    }
    self->n = (size_t)n;
    info->objectives = objectives;
    info->genome_bytes = (uint32_t)(self->n * 8);
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

#endif
