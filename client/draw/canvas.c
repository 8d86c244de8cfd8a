/* canvas.c: surfaces, text and axes for every picture (see canvas.h). */
#include "canvas.h"

#include <cairo-svg.h>
#include <fontconfig/fontconfig.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#define S_MARGIN_L 78.0
#define S_MARGIN_R 22.0
#define S_MARGIN_T 34.0
#define S_MARGIN_B 58.0

struct draw_canvas {
    cairo_surface_t *surf;
    cairo_t *cr;
    int svg;
    const char *path; /* borrowed from the caller */
};

draw_canvas_t *draw_canvas_new(double w, double h, int svg, const char *path, char *err,
                               size_t errlen)
{
    draw_canvas_t *self = calloc(1, sizeof *self);
    if (!self) {
        snprintf(err, errlen, "out of memory");
        return NULL;
    }
    self->svg = svg;
    self->path = path;
    self->surf = svg ? cairo_svg_surface_create(path, w, h)
                     : cairo_image_surface_create(CAIRO_FORMAT_ARGB32, (int)w, (int)h);
    self->cr = cairo_create(self->surf);
    cairo_set_source_rgb(self->cr, 0.97, 0.97, 0.96);
    cairo_paint(self->cr);
    return self;
}

cairo_t *draw_canvas_cairo(draw_canvas_t *self)
{
    return self->cr;
}

int draw_canvas_finish(draw_canvas_t **self_p, char *err, size_t errlen)
{
    draw_canvas_t *self = self_p ? *self_p : NULL;
    if (!self)
        return 0;
    int rc = 0;
    cairo_destroy(self->cr);
    if (!self->svg) {
        cairo_status_t st = cairo_surface_write_to_png(self->surf, self->path);
        if (st != CAIRO_STATUS_SUCCESS) {
            snprintf(err, errlen, "cannot write %s: %s", self->path, cairo_status_to_string(st));
            rc = -1;
        }
    }
    cairo_surface_finish(self->surf);
    cairo_status_t st = cairo_surface_status(self->surf);
    if (rc == 0 && st != CAIRO_STATUS_SUCCESS) {
        snprintf(err, errlen, "cannot write %s: %s", self->path, cairo_status_to_string(st));
        rc = -1;
    }
    cairo_surface_destroy(self->surf);
    free(self);
    *self_p = NULL;
    /* cairo and fontconfig keep font caches for the life of the process; the
     * CLI draws once, so release them (what cairo offers leak checkers). */
    cairo_debug_reset_static_data();
    FcFini();
    return rc;
}

/* Heckbert's nice number: 1, 2, 5 or 10 times a power of ten near x. */
static double s_nice(double x, int round_it)
{
    double e = floor(log10(x)), f = x / pow(10.0, e), nf;
    if (round_it)
        nf = f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10;
    else
        nf = f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10;
    return nf * pow(10.0, e);
}

void draw_range(double *lo, double *hi)
{
    if (!(*hi > *lo)) {
        double pad = 0.5 * fmax(fabs(*lo), 1.0);
        *lo -= pad;
        *hi += pad;
        return;
    }
    double pad = 0.04 * (*hi - *lo);
    *lo -= pad;
    *hi += pad;
}

double draw_px(const draw_area_t *a, double x)
{
    return a->x0 + (x - a->lo[0]) / (a->hi[0] - a->lo[0]) * a->w;
}

double draw_py(const draw_area_t *a, double y)
{
    return a->y0 + a->h - (y - a->lo[1]) / (a->hi[1] - a->lo[1]) * a->h;
}

void draw_text(cairo_t *cr, double x, double y, const char *s, double size, double align, int bold)
{
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL,
                           bold ? CAIRO_FONT_WEIGHT_BOLD : CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, size);
    cairo_text_extents_t te;
    cairo_text_extents(cr, s, &te);
    cairo_move_to(cr, x - align * te.x_advance, y);
    cairo_show_text(cr, s);
}

static void s_tick_label(char *buf, size_t len, double v, double step)
{
    if (fabs(v) < step * 1e-9)
        v = 0.0;
    snprintf(buf, len, "%.4g", v);
}

void draw_panel_area(draw_area_t *a, double left, double top)
{
    a->x0 = left + S_MARGIN_L;
    a->y0 = top + S_MARGIN_T;
    a->w = DRAW_PANEL_W - S_MARGIN_L - S_MARGIN_R;
    a->h = DRAW_PANEL_H - S_MARGIN_T - S_MARGIN_B;
}

void draw_axes(cairo_t *cr, const draw_area_t *a, const char *xlabel, const char *ylabel)
{
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_rectangle(cr, a->x0, a->y0, a->w, a->h);
    cairo_fill(cr);
    char buf[64];
    for (int axis = 0; axis < 2; axis++) {
        double lo = a->lo[axis], hi = a->hi[axis];
        double step = s_nice(s_nice(hi - lo, 0) / 5.0, 1);
        for (double v = ceil(lo / step) * step; v <= hi + 1e-9 * step; v += step) {
            double p = axis == 0 ? draw_px(a, v) : draw_py(a, v);
            cairo_set_source_rgb(cr, 0.90, 0.90, 0.90);
            cairo_set_line_width(cr, 1.0);
            if (axis == 0) {
                cairo_move_to(cr, p, a->y0);
                cairo_line_to(cr, p, a->y0 + a->h);
            } else {
                cairo_move_to(cr, a->x0, p);
                cairo_line_to(cr, a->x0 + a->w, p);
            }
            cairo_stroke(cr);
            cairo_set_source_rgb(cr, 0.2, 0.2, 0.2);
            s_tick_label(buf, sizeof buf, v, step);
            if (axis == 0)
                draw_text(cr, p, a->y0 + a->h + 17, buf, 11.5, 0.5, 0);
            else
                draw_text(cr, a->x0 - 7, p + 4, buf, 11.5, 1.0, 0);
        }
    }
    cairo_set_source_rgb(cr, 0.25, 0.25, 0.25);
    cairo_set_line_width(cr, 1.2);
    cairo_rectangle(cr, a->x0, a->y0, a->w, a->h);
    cairo_stroke(cr);
    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    draw_text(cr, a->x0 + a->w / 2, a->y0 + a->h + 42, xlabel, 13.5, 0.5, 0);
    cairo_save(cr);
    cairo_translate(cr, a->x0 - 58, a->y0 + a->h / 2);
    cairo_rotate(cr, -M_PI / 2);
    draw_text(cr, 0, 0, ylabel, 13.5, 0.5, 0);
    cairo_restore(cr);
}

void draw_series(cairo_t *cr, const draw_area_t *a, const double *x, const double *y, size_t n,
                 double width)
{
    cairo_save(cr);
    cairo_rectangle(cr, a->x0, a->y0, a->w, a->h);
    cairo_clip(cr);
    cairo_new_path(cr);
    cairo_set_line_width(cr, width);
    for (size_t i = 0; i < n; i++) {
        if (i == 0)
            cairo_move_to(cr, draw_px(a, x[i]), draw_py(a, y[i]));
        else
            cairo_line_to(cr, draw_px(a, x[i]), draw_py(a, y[i]));
    }
    cairo_stroke(cr);
    cairo_restore(cr);
}
