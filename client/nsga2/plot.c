/* plot.c: the front and hypervolume pictures (see plot.h). */
#include "plot.h"

#include <cairo-svg.h>
#include <cairo.h>
#include <fontconfig/fontconfig.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define S_PANEL_W 470.0
#define S_PANEL_H 440.0
#define S_TITLE_H 50.0
#define S_MARGIN_L 78.0
#define S_MARGIN_R 22.0
#define S_MARGIN_T 34.0
#define S_MARGIN_B 58.0
#define S_MAX_PAIRS 6 /* pairs of the first four objectives */

typedef struct {
    double x0, y0, w, h;       /* plot area on the canvas */
    double lo[2], hi[2];       /* data range on x and y */
} s_area_t;

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

static void s_range(double *lo, double *hi)
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

static double s_px(const s_area_t *a, double x)
{
    return a->x0 + (x - a->lo[0]) / (a->hi[0] - a->lo[0]) * a->w;
}

static double s_py(const s_area_t *a, double y)
{
    return a->y0 + a->h - (y - a->lo[1]) / (a->hi[1] - a->lo[1]) * a->h;
}

static void s_text(cairo_t *cr, double x, double y, const char *s, double size, double align,
                   int bold)
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

/* Frame, grid, ticks and labels of one panel. */
static void s_axes(cairo_t *cr, const s_area_t *a, const char *xlabel, const char *ylabel)
{
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_rectangle(cr, a->x0, a->y0, a->w, a->h);
    cairo_fill(cr);
    char buf[64];
    for (int axis = 0; axis < 2; axis++) {
        double lo = a->lo[axis], hi = a->hi[axis];
        double step = s_nice(s_nice(hi - lo, 0) / 5.0, 1);
        for (double v = ceil(lo / step) * step; v <= hi + 1e-9 * step; v += step) {
            double p = axis == 0 ? s_px(a, v) : s_py(a, v);
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
                s_text(cr, p, a->y0 + a->h + 17, buf, 11.5, 0.5, 0);
            else
                s_text(cr, a->x0 - 7, p + 4, buf, 11.5, 1.0, 0);
        }
    }
    cairo_set_source_rgb(cr, 0.25, 0.25, 0.25);
    cairo_set_line_width(cr, 1.2);
    cairo_rectangle(cr, a->x0, a->y0, a->w, a->h);
    cairo_stroke(cr);
    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    s_text(cr, a->x0 + a->w / 2, a->y0 + a->h + 42, xlabel, 13.5, 0.5, 0);
    cairo_save(cr);
    cairo_translate(cr, a->x0 - 58, a->y0 + a->h / 2);
    cairo_rotate(cr, -M_PI / 2);
    s_text(cr, 0, 0, ylabel, 13.5, 0.5, 0);
    cairo_restore(cr);
}

static void s_panel_area(s_area_t *a, double left)
{
    a->x0 = left + S_MARGIN_L;
    a->y0 = S_TITLE_H + S_MARGIN_T;
    a->w = S_PANEL_W - S_MARGIN_L - S_MARGIN_R;
    a->h = S_PANEL_H - S_MARGIN_T - S_MARGIN_B;
}

typedef struct {
    const long *gen;
} s_gen_ctx_t;

static int s_cmp_gen(const void *a, const void *b, void *arg)
{
    const long *g = ((const s_gen_ctx_t *)arg)->gen;
    size_t i = *(const size_t *)a, k = *(const size_t *)b;
    if (g[i] != g[k])
        return g[i] < g[k] ? -1 : 1;
    return (i > k) - (i < k);
}

typedef struct {
    const double *f;
    size_t m, j;
} s_obj_ctx_t;

static int s_cmp_obj(const void *a, const void *b, void *arg)
{
    const s_obj_ctx_t *c = arg;
    double x = c->f[*(const size_t *)a * c->m + c->j], y = c->f[*(const size_t *)b * c->m + c->j];
    return (x > y) - (x < y);
}

static void s_legend(cairo_t *cr, const s_area_t *a, const nsga2_plot_t *p)
{
    const char *rows[3];
    char front[64];
    snprintf(front, sizeof front, "front (%zu points)", p->n_front);
    rows[0] = p->generation ? "all results, later generations darker" : "all results";
    rows[1] = front;
    rows[2] = "knee";
    int n_rows = p->knee >= 0 ? 3 : 2;
    double w = 230, h = 18.0 * n_rows + 8, x = a->x0 + a->w - w - 8, y = a->y0 + 8;
    cairo_set_source_rgba(cr, 1, 1, 1, 0.88);
    cairo_rectangle(cr, x, y, w, h);
    cairo_fill_preserve(cr);
    cairo_set_source_rgb(cr, 0.7, 0.7, 0.7);
    cairo_set_line_width(cr, 0.8);
    cairo_stroke(cr);
    for (int r = 0; r < n_rows; r++) {
        double cy = y + 13 + 18.0 * r, cx = x + 14;
        cairo_new_path(cr); /* no line from the last text's end to the marker */
        if (r == 0 && !p->generation) {
            cairo_set_source_rgb(cr, 0.45, 0.52, 0.66);
            cairo_arc(cr, cx, cy, 2.5, 0, 2 * M_PI);
            cairo_fill(cr);
        } else if (r == 0) {
            cairo_set_source_rgb(cr, 0.55, 0.62, 0.75);
            cairo_arc(cr, cx - 4, cy, 2.5, 0, 2 * M_PI);
            cairo_fill(cr);
            cairo_set_source_rgb(cr, 0.06, 0.16, 0.42);
            cairo_arc(cr, cx + 4, cy, 2.5, 0, 2 * M_PI);
            cairo_fill(cr);
        } else if (r == 1) {
            cairo_set_source_rgb(cr, 0.90, 0.38, 0.05);
            cairo_arc(cr, cx, cy, 4, 0, 2 * M_PI);
            cairo_fill(cr);
        } else {
            cairo_set_source_rgb(cr, 0, 0, 0);
            cairo_set_line_width(cr, 2);
            cairo_new_path(cr);
            cairo_arc(cr, cx, cy, 6, 0, 2 * M_PI);
            cairo_stroke(cr);
        }
        cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
        s_text(cr, x + 28, cy + 4, rows[r], 11.5, 0.0, 0);
    }
}

/* One scatter panel: objective j across, objective k up. */
static void s_scatter(cairo_t *cr, const nsga2_plot_t *p, size_t j, size_t k, double left,
                      const size_t *draw_order, int legend)
{
    s_area_t a;
    s_panel_area(&a, left);
    a.lo[0] = a.hi[0] = p->f[j];
    a.lo[1] = a.hi[1] = p->f[k];
    for (size_t i = 0; i < p->n; i++) {
        a.lo[0] = fmin(a.lo[0], p->f[i * p->m + j]);
        a.hi[0] = fmax(a.hi[0], p->f[i * p->m + j]);
        a.lo[1] = fmin(a.lo[1], p->f[i * p->m + k]);
        a.hi[1] = fmax(a.hi[1], p->f[i * p->m + k]);
    }
    s_range(&a.lo[0], &a.hi[0]);
    s_range(&a.lo[1], &a.hi[1]);
    s_axes(cr, &a, p->labels[j], p->labels[k]);
    cairo_save(cr);
    cairo_rectangle(cr, a.x0, a.y0, a.w, a.h);
    cairo_clip(cr);
    long gmin = 0, gmax = 0;
    if (p->generation && p->n) {
        gmin = gmax = p->generation[0];
        for (size_t i = 1; i < p->n; i++) {
            gmin = p->generation[i] < gmin ? p->generation[i] : gmin;
            gmax = p->generation[i] > gmax ? p->generation[i] : gmax;
        }
    }
    const double r_dot = p->n > 5000 ? 1.6 : 2.4;
    for (size_t t = 0; t < p->n; t++) {
        size_t i = draw_order[t];
        if (p->generation) {
            double u = gmax > gmin ? (double)(p->generation[i] - gmin) / (double)(gmax - gmin)
                                   : 1.0;
            cairo_set_source_rgb(cr, 0.80 - 0.74 * u, 0.85 - 0.69 * u, 0.93 - 0.51 * u);
        } else {
            cairo_set_source_rgb(cr, 0.45, 0.52, 0.66);
        }
        cairo_arc(cr, s_px(&a, p->f[i * p->m + j]), s_py(&a, p->f[i * p->m + k]), r_dot, 0,
                  2 * M_PI);
        cairo_fill(cr);
    }
    size_t *fo = malloc((p->n_front ? p->n_front : 1) * sizeof *fo);
    if (fo) {
        memcpy(fo, p->front, p->n_front * sizeof *fo);
        s_obj_ctx_t ctx = {p->f, p->m, j};
        qsort_r(fo, p->n_front, sizeof *fo, s_cmp_obj, &ctx);
        if (p->m == 2 && p->n_front > 1) {
            /* The attainment staircase: what the front dominates ends here. */
            cairo_set_source_rgb(cr, 0.90, 0.38, 0.05);
            cairo_set_line_width(cr, 1.4);
            for (size_t t = 0; t < p->n_front; t++) {
                double x = s_px(&a, p->f[fo[t] * 2]), y = s_py(&a, p->f[fo[t] * 2 + 1]);
                if (t == 0)
                    cairo_move_to(cr, x, y);
                else
                    cairo_line_to(cr, x, y);
                if (t + 1 < p->n_front)
                    cairo_line_to(cr, s_px(&a, p->f[fo[t + 1] * 2]), y);
            }
            cairo_stroke(cr);
        }
        /* Smaller markers for a crowded front, so the darkest (latest)
         * dots beside it stay visible. */
        const double r_front = p->n_front > 200 ? 2.6 : 3.6;
        for (size_t t = 0; t < p->n_front; t++) {
            double x = s_px(&a, p->f[fo[t] * p->m + j]), y = s_py(&a, p->f[fo[t] * p->m + k]);
            cairo_set_source_rgb(cr, 0.90, 0.38, 0.05);
            cairo_arc(cr, x, y, r_front, 0, 2 * M_PI);
            cairo_fill_preserve(cr);
            cairo_set_source_rgb(cr, 0.45, 0.15, 0.0);
            cairo_set_line_width(cr, 0.8);
            cairo_stroke(cr);
        }
        free(fo);
    }
    if (p->knee >= 0) {
        double x = s_px(&a, p->f[(size_t)p->knee * p->m + j]);
        double y = s_py(&a, p->f[(size_t)p->knee * p->m + k]);
        cairo_set_source_rgb(cr, 0, 0, 0);
        cairo_set_line_width(cr, 2.0);
        cairo_new_path(cr);
        cairo_arc(cr, x, y, 9, 0, 2 * M_PI);
        cairo_stroke(cr);
        s_text(cr, x + 12, y - 10, "knee", 12.5, 0.0, 1);
    }
    cairo_restore(cr);
    if (legend)
        s_legend(cr, &a, p);
}

static void s_hv_panel(cairo_t *cr, const nsga2_plot_t *p, double left)
{
    s_area_t a;
    s_panel_area(&a, left);
    a.lo[0] = a.hi[0] = p->hv_gen[0];
    a.lo[1] = a.hi[1] = p->hv[0];
    for (size_t i = 1; i < p->n_hv; i++) {
        a.lo[0] = fmin(a.lo[0], p->hv_gen[i]);
        a.hi[0] = fmax(a.hi[0], p->hv_gen[i]);
        a.lo[1] = fmin(a.lo[1], p->hv[i]);
        a.hi[1] = fmax(a.hi[1], p->hv[i]);
    }
    s_range(&a.lo[0], &a.hi[0]);
    s_range(&a.lo[1], &a.hi[1]);
    s_axes(cr, &a, "generation", "hypervolume of the generation's front");
    cairo_save(cr);
    cairo_rectangle(cr, a.x0, a.y0, a.w, a.h);
    cairo_clip(cr);
    cairo_set_source_rgb(cr, 0.06, 0.16, 0.42);
    cairo_set_line_width(cr, 1.8);
    for (size_t i = 0; i < p->n_hv; i++) {
        double x = s_px(&a, p->hv_gen[i]), y = s_py(&a, p->hv[i]);
        if (i == 0)
            cairo_move_to(cr, x, y);
        else
            cairo_line_to(cr, x, y);
    }
    cairo_stroke(cr);
    if (p->n_hv <= 60)
        for (size_t i = 0; i < p->n_hv; i++) {
            cairo_arc(cr, s_px(&a, p->hv_gen[i]), s_py(&a, p->hv[i]), 2.6, 0, 2 * M_PI);
            cairo_fill(cr);
        }
    cairo_restore(cr);
    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    s_text(cr, a.x0 + a.w / 2, a.y0 - 10, p->hv_note ? p->hv_note : "", 11.5, 0.5, 0);
}

int nsga2_plot_write(const nsga2_plot_t *p, const char *path, int svg, char *err, size_t errlen)
{
    size_t mm = p->m < 4 ? p->m : 4;
    size_t pairs[S_MAX_PAIRS][2], n_pairs = 0;
    for (size_t j = 0; j < mm; j++)
        for (size_t k = j + 1; k < mm; k++) {
            pairs[n_pairs][0] = j;
            pairs[n_pairs][1] = k;
            n_pairs++;
        }
    if (n_pairs == 0) {
        snprintf(err, errlen, "a picture needs at least two objectives");
        return -1;
    }
    size_t panels = n_pairs + (p->n_hv > 0);
    /* Three panels to a row, so six pairs and a curve still fit a screen. */
    size_t cols = panels < 3 ? panels : 3, rows = (panels + cols - 1) / cols;
    double W = S_PANEL_W * (double)cols, H = S_TITLE_H + S_PANEL_H * (double)rows;
    cairo_surface_t *surf = svg ? cairo_svg_surface_create(path, W, H)
                                : cairo_image_surface_create(CAIRO_FORMAT_ARGB32, (int)W, (int)H);
    cairo_t *cr = cairo_create(surf);
    cairo_set_source_rgb(cr, 0.97, 0.97, 0.96);
    cairo_paint(cr);
    cairo_set_source_rgb(cr, 0.05, 0.05, 0.05);
    s_text(cr, 14, 22, p->title ? p->title : "", 15, 0.0, 1);
    s_text(cr, 14, 42, p->subtitle ? p->subtitle : "", 12.5, 0.0, 0);

    size_t *order = malloc((p->n ? p->n : 1) * sizeof *order);
    int rc = 0;
    if (!order) {
        snprintf(err, errlen, "out of memory");
        rc = -1;
    } else {
        for (size_t i = 0; i < p->n; i++)
            order[i] = i;
        if (p->generation) {
            s_gen_ctx_t ctx = {p->generation};
            qsort_r(order, p->n, sizeof *order, s_cmp_gen, &ctx);
        }
        for (size_t q = 0; q < panels; q++) {
            cairo_save(cr);
            cairo_translate(cr, 0, S_PANEL_H * (double)(q / cols));
            double left = S_PANEL_W * (double)(q % cols);
            if (q < n_pairs)
                s_scatter(cr, p, pairs[q][0], pairs[q][1], left, order, q == 0);
            else
                s_hv_panel(cr, p, left);
            cairo_restore(cr);
        }
        free(order);
    }
    cairo_destroy(cr);
    if (rc == 0 && !svg) {
        cairo_status_t st = cairo_surface_write_to_png(surf, path);
        if (st != CAIRO_STATUS_SUCCESS) {
            snprintf(err, errlen, "cannot write %s: %s", path, cairo_status_to_string(st));
            rc = -1;
        }
    }
    cairo_surface_finish(surf);
    cairo_status_t st = cairo_surface_status(surf);
    if (rc == 0 && st != CAIRO_STATUS_SUCCESS) {
        snprintf(err, errlen, "cannot write %s: %s", path, cairo_status_to_string(st));
        rc = -1;
    }
    cairo_surface_destroy(surf);
    /* cairo and fontconfig keep font caches for the life of the process; the
     * CLI draws once, so release them (what cairo offers leak checkers). */
    cairo_debug_reset_static_data();
    FcFini();
    return rc;
}
