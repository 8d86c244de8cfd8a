/* params.c: reads the granular plugin's JSON parameters with jansson and
 * checks each against its range (the table in params.h). Owns no physics. */
#include "params.h"

#include <jansson.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "contact.h"

static void s_errf(char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void s_errf(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || errlen == 0)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

void granular_params_default(granular_params_t *p)
{
    memset(p, 0, sizeof *p);
    p->rows = 6;
    p->columns = 12;
    p->radius = 0.005;
    p->density_soft = 1100.0;
    p->density_stiff = 2500.0;
    p->k_soft = 3000.0;
    p->k_stiff = 30000.0;
    p->damping_ratio = 0.2;
    p->friction = 0.5;
    p->plate_mass = 0.2;
    p->frequencies[0] = 30.0;
    p->frequencies[1] = 60.0;
    p->frequencies[2] = 120.0;
    p->frequency_count = 3;
    p->amplitude = 5e-6;
    p->settle_time = 0.1;
    p->transient_time = 0.1;
    p->measure_time = 0.1;
    p->scatter_radius = 0.05;
    p->jitter = 0.02;
    p->gravity = 9.81;
    p->objectives = 2;
    p->materials = GRANULAR_BINARY;
    p->dt = 0.0;
}

/* Reads an optional number into *out; lo_open/hi_open make a bound strict.
 * Returns 1 present, 0 absent, -1 bad (with err). */
static int s_real(json_t *root, const char *key, double lo, int lo_open, double hi, int hi_open,
                  double *out, char *err, size_t errlen)
{
    json_t *v = json_object_get(root, key);
    if (!v)
        return 0;
    if (!json_is_number(v)) {
        s_errf(err, errlen, "granular: parameter \"%s\" must be a number", key);
        return -1;
    }
    double x = json_number_value(v);
    if (!isfinite(x) || (lo_open ? x <= lo : x < lo) || (hi_open ? x >= hi : x > hi)) {
        s_errf(err, errlen, "granular: parameter \"%s\" is %g, must be in %s%g, %g%s", key, x,
               lo_open ? "(" : "[", lo, hi, hi_open ? ")" : "]");
        return -1;
    }
    *out = x;
    return 1;
}

static int s_int(json_t *root, const char *key, int lo, int hi, int *out, char *err, size_t errlen)
{
    json_t *v = json_object_get(root, key);
    if (!v)
        return 0;
    double x = json_is_number(v) ? json_number_value(v) : NAN;
    if (!json_is_number(v) || x != floor(x)) {
        s_errf(err, errlen, "granular: parameter \"%s\" must be an integer", key);
        return -1;
    }
    if (x < lo || x > hi) {
        s_errf(err, errlen, "granular: parameter \"%s\" is %g, must be in [%d, %d]", key, x, lo,
               hi);
        return -1;
    }
    *out = (int)x;
    return 1;
}

static const char *const s_keys[] = {
    "scenario",    "rows",      "columns",       "radius",         "density_soft", "density_stiff",
    "k_soft",      "k_stiff",   "damping_ratio", "restitution",    "friction",     "plate_mass",
    "frequencies", "amplitude", "settle_time",   "transient_time", "measure_time", "scatter_radius",
    "jitter",      "gravity",   "objectives",    "materials",      "dt",           NULL};

int granular_params_parse(const char *params_json, granular_params_t *p, char *err, size_t errlen)
{
    int rc = -1;
    granular_params_default(p);
    json_error_t jerr;
    json_t *root = json_loads(params_json ? params_json : "{}", JSON_REJECT_DUPLICATES, &jerr);
    if (!root) {
        s_errf(err, errlen, "granular: params are not valid JSON: %s", jerr.text);
        goto cleanup;
    }
    if (!json_is_object(root)) {
        s_errf(err, errlen, "granular: params must be a JSON object");
        goto cleanup;
    }
    const char *key;
    json_t *value;
    json_object_foreach(root, key, value)
    {
        int known = 0;
        for (size_t i = 0; s_keys[i]; i++)
            known |= strcmp(key, s_keys[i]) == 0;
        if (!known) {
            char list[512] = "";
            size_t used = 0;
            for (size_t i = 0; s_keys[i] && used < sizeof list; i++)
                used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "",
                                         s_keys[i]);
            s_errf(err, errlen, "granular: unknown parameter \"%.64s\" (it takes: %s)", key, list);
            goto cleanup;
        }
    }
    json_t *v = json_object_get(root, "scenario");
    if (v && !(json_is_string(v) && strcmp(json_string_value(v), "pad") == 0)) {
        s_errf(err, errlen, "granular: parameter \"scenario\" must be \"pad\"");
        goto cleanup;
    }
    v = json_object_get(root, "materials");
    if (v) {
        const char *m = json_is_string(v) ? json_string_value(v) : "";
        if (strcmp(m, "binary") == 0)
            p->materials = GRANULAR_BINARY;
        else if (strcmp(m, "graded") == 0)
            p->materials = GRANULAR_GRADED;
        else {
            s_errf(err, errlen,
                   "granular: parameter \"materials\" must be \"binary\" or \"graded\"");
            goto cleanup;
        }
    }
    if (s_int(root, "rows", 1, 100, &p->rows, err, errlen) < 0 ||
        s_int(root, "columns", 1, 100, &p->columns, err, errlen) < 0 ||
        s_int(root, "objectives", 2, 3, &p->objectives, err, errlen) < 0)
        goto cleanup;
    if (p->rows * p->columns > GRANULAR_MAX_SITES) {
        s_errf(err, errlen, "granular: rows*columns is %d, at most %d", p->rows * p->columns,
               GRANULAR_MAX_SITES);
        goto cleanup;
    }
    if (s_real(root, "radius", 0.0, 1, 1.0, 0, &p->radius, err, errlen) < 0 ||
        s_real(root, "density_soft", 0.0, 1, 1e6, 0, &p->density_soft, err, errlen) < 0 ||
        s_real(root, "density_stiff", 0.0, 1, 1e6, 0, &p->density_stiff, err, errlen) < 0 ||
        s_real(root, "k_soft", 0.0, 1, 1e12, 0, &p->k_soft, err, errlen) < 0 ||
        s_real(root, "k_stiff", 0.0, 1, 1e12, 0, &p->k_stiff, err, errlen) < 0 ||
        s_real(root, "damping_ratio", 0.0, 0, 1.0, 1, &p->damping_ratio, err, errlen) < 0 ||
        s_real(root, "friction", 0.0, 0, 10.0, 0, &p->friction, err, errlen) < 0 ||
        s_real(root, "plate_mass", 0.0, 1, 1e6, 0, &p->plate_mass, err, errlen) < 0 ||
        s_real(root, "amplitude", 0.0, 0, 1.0, 0, &p->amplitude, err, errlen) < 0 ||
        s_real(root, "settle_time", 0.0, 0, 100.0, 0, &p->settle_time, err, errlen) < 0 ||
        s_real(root, "transient_time", 0.0, 0, 100.0, 0, &p->transient_time, err, errlen) < 0 ||
        s_real(root, "measure_time", 0.0, 1, 100.0, 0, &p->measure_time, err, errlen) < 0 ||
        s_real(root, "scatter_radius", 0.0, 0, 0.5, 1, &p->scatter_radius, err, errlen) < 0 ||
        s_real(root, "jitter", 0.0, 0, 0.5, 0, &p->jitter, err, errlen) < 0 ||
        s_real(root, "gravity", 0.0, 0, 1000.0, 0, &p->gravity, err, errlen) < 0 ||
        s_real(root, "dt", 0.0, 1, 1.0, 0, &p->dt, err, errlen) < 0)
        goto cleanup;
    double e = 0.0;
    int has_e = s_real(root, "restitution", 0.0, 1, 1.0, 0, &e, err, errlen);
    if (has_e < 0)
        goto cleanup;
    if (has_e) {
        if (json_object_get(root, "damping_ratio")) {
            s_errf(err, errlen, "granular: give \"damping_ratio\" or \"restitution\", not both");
            goto cleanup;
        }
        p->damping_ratio = granular_zeta_from_restitution(e);
    }
    if (p->amplitude > p->radius) {
        s_errf(err, errlen, "granular: parameter \"amplitude\" (%g m) exceeds the radius (%g m)",
               p->amplitude, p->radius);
        goto cleanup;
    }
    v = json_object_get(root, "frequencies");
    if (v) {
        size_t count = json_is_array(v) ? json_array_size(v) : 0;
        if (count < 1 || count > GRANULAR_MAX_FREQUENCIES) {
            s_errf(err, errlen,
                   "granular: parameter \"frequencies\" must be an array of 1 to %d "
                   "numbers (Hz)",
                   GRANULAR_MAX_FREQUENCIES);
            goto cleanup;
        }
        for (size_t i = 0; i < count; i++) {
            json_t *f = json_array_get(v, i);
            double hz = json_is_number(f) ? json_number_value(f) : NAN;
            if (!(hz > 0.0 && hz <= 1e5)) {
                s_errf(err, errlen, "granular: frequencies[%zu] must be a number in (0, 1e5] Hz",
                       i);
                goto cleanup;
            }
            p->frequencies[i] = hz;
        }
        p->frequency_count = count;
    }
    rc = 0;
cleanup:
    json_decref(root);
    return rc;
}
