/* trace.c: prints the trace lines described in trace.h. Owns formatting
 * only; the caller opens and closes the file and checks it for errors. */
#include "trace.h"

#include <inttypes.h>
#include <math.h>

/* JSON has no NaN or infinity: print null. */
static void s_num(FILE *f, const char *fmt, double v)
{
    if (isfinite(v))
        fprintf(f, fmt, v);
    else
        fputs("null", f);
}

static void s_array(FILE *f, const char *name, const double *v, size_t n)
{
    fprintf(f, ",\"%s\":[", name);
    for (size_t i = 0; i < n; i++) {
        if (i)
            fputc(',', f);
        s_num(f, "%.9g", v[i]);
    }
    fputc(']', f);
}

void granular_trace_header(granular_trace_t *self, uint64_t seed, int rows, int columns,
                           double width, double dt)
{
    fprintf(self->f,
            "{\"type\":\"header\",\"plugin\":\"granular\",\"version\":\"%s\",\"seed\":\"%" PRIu64
            "\",\"rows\":%d,\"columns\":%d,\"grains\":%d,\"width\":%.17g,\"dt\":%.17g,"
            "\"params\":%s}\n",
            self->version, seed, rows, columns, rows * columns, width, dt, self->params_json);
}

void granular_trace_sample(granular_trace_t *self, const char *phase, double frequency,
                           const granular_world_t *w)
{
    fprintf(self->f,
            "{\"type\":\"sample\",\"phase\":\"%s\",\"frequency\":%.9g,\"t\":%.9g,"
            "\"floor_y\":",
            phase, frequency, w->t);
    s_num(self->f, "%.9g", w->floor_y);
    fputs(",\"plate_y\":", self->f);
    if (w->has_plate)
        s_num(self->f, "%.9g", w->plate_y);
    else
        fputs("null", self->f);
    fputs(",\"plate_a\":", self->f);
    if (w->has_plate)
        s_num(self->f, "%.9g", w->plate_a);
    else
        fputs("null", self->f);
    fputs("}\n", self->f);
}

void granular_trace_grains(granular_trace_t *self, const char *phase, double frequency,
                           const granular_world_t *w, const double *stiff)
{
    fprintf(self->f, "{\"type\":\"grains\",\"phase\":\"%s\",\"frequency\":%.9g,\"t\":%.9g", phase,
            frequency, w->t);
    s_array(self->f, "x", w->x, w->n);
    s_array(self->f, "y", w->y, w->n);
    s_array(self->f, "r", w->r, w->n);
    s_array(self->f, "stiff", stiff, w->n);
    fputs("}\n", self->f);
}

void granular_trace_result(granular_trace_t *self, const double *fitness, int objectives,
                           const double *transmissibility, size_t frequencies, double settlement_mm,
                           double stiff_share)
{
    fputs("{\"type\":\"result\",\"fitness\":[", self->f);
    for (int i = 0; i < objectives; i++) {
        if (i)
            fputc(',', self->f);
        s_num(self->f, "%.17g", fitness[i]);
    }
    fputc(']', self->f);
    s_array(self->f, "transmissibility", transmissibility, frequencies);
    fputs(",\"settlement_mm\":", self->f);
    s_num(self->f, "%.17g", settlement_mm);
    fputs(",\"stiff_share\":", self->f);
    s_num(self->f, "%.17g", stiff_share);
    fputs("}\n", self->f);
}
