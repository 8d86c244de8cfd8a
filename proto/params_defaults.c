/* params_defaults.c: one set of params for one meaning, with the plugin's
 * help (params.h, proto_params_with_defaults). A plugin that declares its
 * parameters' defaults (fitfarm_plugin_param_defaults) lets the broker key a
 * request by what the plugin will compute: a parameter left out takes its
 * default, and a number is written as the type of its default (10.0 for a
 * real default given as 10, 30 for an integer default given as 30.0). Not
 * here: the canonical text itself (params.c). */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "limits.h"
#include "params.h"

/* Largest magnitude below which every integer is exactly a double (2^53). */
#define S_EXACT_INT 9007199254740992.0

static void s_err(char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static void s_err(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || errlen == 0)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

/* The given value as the type of the default, or NULL to keep it as it is. */
static json_t *s_as_type_of(json_t *given, json_t *dflt)
{
    if (json_is_integer(dflt) && json_is_real(given)) {
        double v = json_real_value(given);
        if (v == floor(v) && fabs(v) < S_EXACT_INT)
            return json_integer((json_int_t)v);
    }
    if (json_is_real(dflt) && json_is_integer(given)) {
        json_int_t v = json_integer_value(given);
        if (fabs((double)v) < S_EXACT_INT) /* exactly a double: no rounding */
            return json_real((double)v);
    }
    return NULL;
}

int proto_params_with_defaults(const char *canonical, const char *defaults, char **out,
                               char *err, size_t errlen)
{
    int rc = -1;
    json_t *root = NULL, *dflt = NULL;
    char *dumped = NULL;
    json_error_t jerr;
    if (err && errlen)
        err[0] = '\0';
    if (!out) {
        s_err(err, errlen, "params: no output pointer");
        return -1;
    }
    *out = NULL;
    if (!canonical || !defaults) {
        s_err(err, errlen, "params: no params or no defaults");
        return -1;
    }
    root = json_loads(canonical, JSON_REJECT_DUPLICATES, &jerr);
    dflt = json_loads(defaults, JSON_REJECT_DUPLICATES, &jerr);
    if (!json_is_object(root) || !json_is_object(dflt)) {
        s_err(err, errlen, "params: %s is not a JSON object", json_is_object(root) ? "the "
              "plugin's defaults" : "the request's params");
        goto cleanup;
    }
    const char *name;
    json_t *dv;
    json_object_foreach(dflt, name, dv) {
        json_t *given = json_object_get(root, name);
        if (!given) {
            if (json_object_set(root, name, dv) != 0)
                goto oom;
            continue;
        }
        json_t *typed = s_as_type_of(given, dv);
        if (typed && json_object_set_new(root, name, typed) != 0)
            goto oom;
    }
    dumped = json_dumps(root, JSON_COMPACT | JSON_SORT_KEYS | JSON_REAL_PRECISION(17) |
                                  JSON_ENSURE_ASCII);
    if (!dumped)
        goto oom;
    if (strlen(dumped) > PROTO_MAX_PARAMS_BYTES) {
        s_err(err, errlen, "params: %zu bytes with the plugin's defaults, limit %u",
              strlen(dumped), PROTO_MAX_PARAMS_BYTES);
        goto cleanup;
    }
    *out = dumped;
    dumped = NULL;
    rc = 0;
    goto cleanup;
oom:
    s_err(err, errlen, "params: out of memory");
cleanup:
    free(dumped);
    json_decref(root);
    json_decref(dflt);
    return rc;
}
