/* params.c: plugin parameters in canonical JSON (jansson), round-trip
 * printing of doubles, and the all-zero test of seed params.
 *
 * Canonical form, chosen so that equal parameters give equal bytes and hence
 * equal content keys: a JSON object, dumped with JSON_COMPACT (no spaces),
 * JSON_SORT_KEYS (keys in byte order), JSON_REAL_PRECISION(17) (reals
 * round-trip to the same bits) and JSON_ENSURE_ASCII (every non-ASCII
 * character as \uXXXX with upper-case hex, as jansson writes it, so "é"
 * and "\u00e9" in the input give one form).
 * Integers stay integers and reals stay reals (jansson prints 1.0 as "1.0"),
 * so {"n":1} and {"n":1.0} are different parameters, as a plugin could tell
 * them apart. Duplicate keys are refused (JSON_REJECT_DUPLICATES): which one
 * would win is not defined by RFC 8259. Not here: what a plugin's parameters
 * mean (the plugin's job). */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "limits.h"
#include "params.h"

/* Input may be pretty-printed, so it gets more room than the canonical
 * output; still bounded so the parser never sees megabytes. */
#define S_MAX_INPUT_BYTES (4u * PROTO_MAX_PARAMS_BYTES)

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

int proto_params_canonical(const char *text, char **out, char *err, size_t errlen)
{
    int rc = -1;
    json_t *root = NULL;
    char *dumped = NULL;
    json_error_t jerr;

    if (out)
        *out = NULL;
    if (err && errlen)
        err[0] = '\0';
    if (!out) {
        s_err(err, errlen, "params: no output pointer");
        goto cleanup;
    }
    if (!text || !text[0])
        text = "{}";
    size_t in_len = strnlen(text, S_MAX_INPUT_BYTES + 1);
    if (in_len > S_MAX_INPUT_BYTES) {
        s_err(err, errlen, "params: text longer than %u bytes", S_MAX_INPUT_BYTES);
        goto cleanup;
    }
    root = json_loadb(text, in_len, JSON_REJECT_DUPLICATES, &jerr);
    if (!root) {
        s_err(err, errlen, "params: invalid JSON at line %d column %d: %s", jerr.line,
              jerr.column, jerr.text);
        goto cleanup;
    }
    if (!json_is_object(root)) {
        s_err(err, errlen, "params: must be a JSON object like {\"n\": 30}");
        goto cleanup;
    }
    dumped = json_dumps(root, JSON_COMPACT | JSON_SORT_KEYS | JSON_REAL_PRECISION(17) |
                                  JSON_ENSURE_ASCII);
    if (!dumped) {
        s_err(err, errlen, "params: out of memory");
        goto cleanup;
    }
    size_t n = strlen(dumped);
    if (n > PROTO_MAX_PARAMS_BYTES) {
        s_err(err, errlen, "params: %zu bytes in canonical form, limit %u", n,
              PROTO_MAX_PARAMS_BYTES);
        goto cleanup;
    }
    /* json_dumps allocates with jansson's allocator, which is malloc: no
     * part of fitfarm calls json_set_alloc_funcs. */
    *out = dumped;
    dumped = NULL;
    rc = 0;
cleanup:
    free(dumped);
    json_decref(root);
    return rc;
}

int proto_format_double(double v, char out[32])
{
    if (!isfinite(v)) {
        memcpy(out, "null", 5);
        return 4;
    }
    /* 17 significant digits identify every binary64 value (IEEE 754-2008,
     * 5.12.2); the longest output, e.g. "-2.2250738585072014e-308", is 24. */
    int n = snprintf(out, 32, "%.17g", v);
    return n;
}

int proto_params_all_zero(const char *canonical_json, char *const *names, uint32_t n)
{
    int all = 0;
    json_t *root = NULL;
    if (n == 0 || !names || !canonical_json)
        goto cleanup;
    size_t len = strnlen(canonical_json, S_MAX_INPUT_BYTES + 1);
    if (len > S_MAX_INPUT_BYTES)
        goto cleanup;
    root = json_loadb(canonical_json, len, JSON_REJECT_DUPLICATES, NULL);
    if (!json_is_object(root))
        goto cleanup;
    all = 1;
    for (uint32_t i = 0; i < n && all; i++) {
        const json_t *v = names[i] ? json_object_get(root, names[i]) : NULL;
        /* json_number_value reads integers and reals alike; -0.0 == 0 */
        all = json_is_number(v) && json_number_value(v) == 0.0;
    }
cleanup:
    json_decref(root);
    return all;
}
