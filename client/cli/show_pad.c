/* show_pad.c: reads a granular trace into a show_pad_t (show_pad.h). The
 * trace comes from a plugin file, so every line is checked: known types,
 * finite numbers, array lengths equal to the header's grain count, bounded
 * counts. */
#include "show_pad.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define SHOW_MAX_LINE (4u * 1024u * 1024u) /* a grains line: 4 arrays of 4096 numbers */

static int s_num(const json_t *o, const char *key, double *out)
{
    const json_t *v = json_object_get(o, key);
    if (!json_is_number(v) || !isfinite(json_number_value(v)))
        return -1;
    *out = json_number_value(v);
    return 0;
}

static int s_array(const json_t *o, const char *key, size_t n, double **out)
{
    const json_t *a = json_object_get(o, key);
    if (!json_is_array(a) || json_array_size(a) != n)
        return -1;
    double *v = realloc(*out, (n ? n : 1) * sizeof *v);
    if (!v)
        return -1;
    *out = v;
    for (size_t i = 0; i < n; i++) {
        const json_t *x = json_array_get(a, i);
        if (!json_is_number(x) || !isfinite(json_number_value(x)))
            return -1;
        v[i] = json_number_value(x);
    }
    return 0;
}

/* Appends one sample to the series of (phase, frequency), opening it when new. */
static int s_sample(show_pad_t *pad, const char *phase, double hz, double t, double floor_y,
                    double plate_y)
{
    show_series_t *s = pad->n_series ? &pad->series[pad->n_series - 1] : NULL;
    if (!s || strcmp(s->phase, phase) != 0 || s->frequency != hz) {
        if (pad->n_series == SHOW_MAX_SERIES)
            return -1;
        s = &pad->series[pad->n_series++];
        snprintf(s->phase, sizeof s->phase, "%s", phase);
        s->frequency = hz;
        s->t_db = NAN;
    }
    if (s->n == s->cap) {
        if (s->n >= SHOW_MAX_SAMPLES)
            return -1;
        size_t cap = s->cap ? 2 * s->cap : 1024;
        double *a = realloc(s->t, cap * sizeof *a);
        if (a)
            s->t = a;
        double *b = realloc(s->floor_d, cap * sizeof *b);
        if (b)
            s->floor_d = b;
        double *c = realloc(s->plate_d, cap * sizeof *c);
        if (c)
            s->plate_d = c;
        if (!a || !b || !c)
            return -1;
        s->cap = cap;
    }
    s->t[s->n] = t;
    s->floor_d[s->n] = floor_y; /* heights now, displacements once the rest is known */
    s->plate_d[s->n] = plate_y;
    s->n++;
    return 0;
}

void show_pad_free(show_pad_t *pad)
{
    free(pad->x);
    free(pad->y);
    free(pad->r);
    free(pad->stiff);
    for (size_t i = 0; i < pad->n_series; i++) {
        free(pad->series[i].t);
        free(pad->series[i].floor_d);
        free(pad->series[i].plate_d);
    }
    memset(pad, 0, sizeof *pad);
}

int show_pad_read(const char *path, show_pad_t *pad, char *err, size_t errlen)
{
    memset(pad, 0, sizeof *pad);
    FILE *f = fopen(path, "re");
    if (!f) {
        snprintf(err, errlen, "cannot read the trace %s", path);
        return -1;
    }
    char *line = NULL;
    size_t cap = 0, lineno = 0;
    ssize_t got;
    int rc = -1, header = 0, result = 0, grains_seen = 0;
    /* The plate is drawn at the load sample nearest the drawn grains. */
    double prev_t = NAN, prev_py = NAN, best_dt = INFINITY, transmissibility[SHOW_MAX_SERIES];
    size_t n_tr = 0;
    while ((got = getline(&line, &cap, f)) > 0) {
        lineno++;
        if ((size_t)got > SHOW_MAX_LINE) {
            snprintf(err, errlen, "trace line %zu is longer than %u bytes", lineno, SHOW_MAX_LINE);
            goto done;
        }
        json_error_t jerr;
        json_t *o = json_loadb(line, (size_t)got, 0, &jerr);
        const char *type = json_string_value(json_object_get(o, "type"));
        const char *phase = json_string_value(json_object_get(o, "phase"));
        int bad = !o || !type;
        if (!bad && strcmp(type, "header") == 0) {
            const char *plugin = json_string_value(json_object_get(o, "plugin"));
            json_int_t rows = json_integer_value(json_object_get(o, "rows"));
            json_int_t cols = json_integer_value(json_object_get(o, "columns"));
            bad = !plugin || strcmp(plugin, "granular") != 0 || rows < 1 || cols < 1 ||
                  rows * cols > SHOW_MAX_GRAINS || s_num(o, "width", &pad->width) != 0 ||
                  !(pad->width > 0);
            if (!bad) {
                pad->rows = (int)rows;
                pad->columns = (int)cols;
                pad->grains = (size_t)(rows * cols);
                header = 1;
            }
        } else if (!bad && !header) {
            bad = 1;
        } else if (!bad && strcmp(type, "sample") == 0) {
            double hz, t, fy, py = NAN;
            const json_t *pj = json_object_get(o, "plate_y");
            bad = !phase || s_num(o, "frequency", &hz) != 0 || s_num(o, "t", &t) != 0 ||
                  s_num(o, "floor_y", &fy) != 0 || (!json_is_null(pj) && s_num(o, "plate_y", &py));
            /* Settling has no plate: nothing to draw of it over time. */
            if (!bad && strcmp(phase, "settle") != 0) {
                bad = isnan(py) || s_sample(pad, phase, hz, t, fy, py) != 0;
                if (!bad && strcmp(phase, "load") == 0) {
                    pad->rest_plate = py;
                    pad->rest_floor = fy;
                    if (grains_seen && fabs(t - pad->grains_t) < best_dt) {
                        best_dt = fabs(t - pad->grains_t);
                        pad->plate_y = py;
                    }
                    prev_t = t;
                    prev_py = py;
                }
            }
        } else if (!bad && strcmp(type, "grains") == 0) {
            bad = !phase;
            if (!bad && strcmp(phase, "load") == 0) {
                bad = s_num(o, "t", &pad->grains_t) != 0 ||
                      s_array(o, "x", pad->grains, &pad->x) != 0 ||
                      s_array(o, "y", pad->grains, &pad->y) != 0 ||
                      s_array(o, "r", pad->grains, &pad->r) != 0 ||
                      s_array(o, "stiff", pad->grains, &pad->stiff) != 0;
                grains_seen = 1;
                best_dt = isnan(prev_t) ? INFINITY : fabs(prev_t - pad->grains_t);
                pad->plate_y = prev_py;
            }
        } else if (!bad && strcmp(type, "result") == 0) {
            const json_t *fit = json_object_get(o, "fitness");
            const json_t *tr = json_object_get(o, "transmissibility");
            pad->m = json_array_size(fit);
            n_tr = json_array_size(tr);
            bad = pad->m < 1 || pad->m > SHOW_MAX_OBJECTIVES || n_tr > SHOW_MAX_SERIES - 1;
            for (size_t j = 0; !bad && j < pad->m; j++) {
                const json_t *x = json_array_get(fit, j);
                bad = !json_is_number(x);
                pad->fitness[j] = json_number_value(x);
            }
            for (size_t j = 0; !bad && j < n_tr; j++) {
                const json_t *x = json_array_get(tr, j);
                bad = !json_is_number(x) || !(json_number_value(x) >= 0);
                transmissibility[j] = json_number_value(x);
            }
            result = !bad;
        } else if (!bad) {
            bad = 1;
        }
        json_decref(o);
        if (bad) {
            snprintf(err, errlen,
                     "trace line %zu is not a granular trace line as trace.h "
                     "describes it (or breaks a bound)",
                     lineno);
            goto done;
        }
    }
    if (!header || !grains_seen || !result || pad->n_series == 0 ||
        strcmp(pad->series[0].phase, "load") != 0) {
        snprintf(err, errlen, "the trace %s lacks a %s", path,
                 !header        ? "header"
                 : !grains_seen ? "grains line of the load phase"
                 : !result      ? "result line"
                                : "load phase");
        goto done;
    }
    for (size_t i = 0; i < pad->grains; i++)
        pad->graded |= pad->stiff[i] != 0.0 && pad->stiff[i] != 1.0;
    if (!isfinite(pad->plate_y))
        pad->plate_y = pad->rest_plate;
    if (pad->n_series - 1 != n_tr) {
        snprintf(err, errlen, "the trace %s shakes %zu frequencies but reports %zu", path,
                 pad->n_series - 1, n_tr);
        goto done;
    }
    for (size_t k = 0; k < pad->n_series; k++) {
        show_series_t *s = &pad->series[k];
        int load = k == 0;
        s->scale = load ? 1e3 : 1e6;
        s->unit = load ? "mm" : "\xc2\xb5m";
        if (!load)
            s->t_db = 20.0 * log10(fmax(transmissibility[k - 1], 1e-12));
        for (size_t i = 0; i < s->n; i++) {
            s->floor_d[i] = (s->floor_d[i] - pad->rest_floor) * s->scale;
            s->plate_d[i] = (s->plate_d[i] - pad->rest_plate) * s->scale;
        }
    }
    rc = 0;
done:
    free(line);
    fclose(f);
    if (rc != 0)
        show_pad_free(pad);
    return rc;
}
