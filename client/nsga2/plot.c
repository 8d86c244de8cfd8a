/* plot.c: the front and hypervolume pictures (see plot.h). */
#include "plot.h"

#include "canvas.h"

#include <cairo.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define S_TITLE_H 50.0
#define S_MAX_PAIRS 6 /* pairs of the first four objectives */

static void s_panel_area(draw_area_t *a, double left)
{
    draw_panel_area(a, left, S_TITLE_H);
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

static void s_legend(cairo_t *cr, const draw_area_t *a, const nsga2_plot_t *p)
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
        draw_text(cr, x + 28, cy + 4, rows[r], 11.5, 0.0, 0);
    }
}

/* One scatter panel: objective j across, objective k up. */
static void s_scatter(cairo_t *cr, const nsga2_plot_t *p, size_t j, size_t k, double left,
                      const size_t *draw_order, int legend)
{
    draw_area_t a;
    s_panel_area(&a, left);
    a.lo[0] = a.hi[0] = p->f[j];
    a.lo[1] = a.hi[1] = p->f[k];
    for (size_t i = 0; i < p->n; i++) {
        a.lo[0] = fmin(a.lo[0], p->f[i * p->m + j]);
        a.hi[0] = fmax(a.hi[0], p->f[i * p->m + j]);
        a.lo[1] = fmin(a.lo[1], p->f[i * p->m + k]);
        a.hi[1] = fmax(a.hi[1], p->f[i * p->m + k]);
    }
    draw_range(&a.lo[0], &a.hi[0]);
    draw_range(&a.lo[1], &a.hi[1]);
    draw_axes(cr, &a, p->labels[j], p->labels[k]);
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
        cairo_arc(cr, draw_px(&a, p->f[i * p->m + j]), draw_py(&a, p->f[i * p->m + k]), r_dot, 0,
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
                double x = draw_px(&a, p->f[fo[t] * 2]), y = draw_py(&a, p->f[fo[t] * 2 + 1]);
                if (t == 0)
                    cairo_move_to(cr, x, y);
                else
                    cairo_line_to(cr, x, y);
                if (t + 1 < p->n_front)
                    cairo_line_to(cr, draw_px(&a, p->f[fo[t + 1] * 2]), y);
            }
            cairo_stroke(cr);
        }
        /* Smaller markers for a crowded front, so the darkest (latest)
         * dots beside it stay visible. */
        const double r_front = p->n_front > 200 ? 2.6 : 3.6;
        for (size_t t = 0; t < p->n_front; t++) {
            double x = draw_px(&a, p->f[fo[t] * p->m + j]), y = draw_py(&a, p->f[fo[t] * p->m + k]);
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
        double x = draw_px(&a, p->f[(size_t)p->knee * p->m + j]);
        double y = draw_py(&a, p->f[(size_t)p->knee * p->m + k]);
        cairo_set_source_rgb(cr, 0, 0, 0);
        cairo_set_line_width(cr, 2.0);
        cairo_new_path(cr);
        cairo_arc(cr, x, y, 9, 0, 2 * M_PI);
        cairo_stroke(cr);
        draw_text(cr, x + 12, y - 10, "knee", 12.5, 0.0, 1);
    }
    cairo_restore(cr);
    if (legend)
        s_legend(cr, &a, p);
}

static void s_hv_panel(cairo_t *cr, const nsga2_plot_t *p, double left)
{
    draw_area_t a;
    s_panel_area(&a, left);
    a.lo[0] = a.hi[0] = p->hv_gen[0];
    a.lo[1] = a.hi[1] = p->hv[0];
    for (size_t i = 1; i < p->n_hv; i++) {
        a.lo[0] = fmin(a.lo[0], p->hv_gen[i]);
        a.hi[0] = fmax(a.hi[0], p->hv_gen[i]);
        a.lo[1] = fmin(a.lo[1], p->hv[i]);
        a.hi[1] = fmax(a.hi[1], p->hv[i]);
    }
    draw_range(&a.lo[0], &a.hi[0]);
    draw_range(&a.lo[1], &a.hi[1]);
    draw_axes(cr, &a, "generation", "hypervolume of the generation's front");
    cairo_save(cr);
    cairo_rectangle(cr, a.x0, a.y0, a.w, a.h);
    cairo_clip(cr);
    cairo_set_source_rgb(cr, 0.06, 0.16, 0.42);
    draw_series(cr, &a, p->hv_gen, p->hv, p->n_hv, 1.8);
    if (p->n_hv <= 60)
        for (size_t i = 0; i < p->n_hv; i++) {
            cairo_arc(cr, draw_px(&a, p->hv_gen[i]), draw_py(&a, p->hv[i]), 2.6, 0, 2 * M_PI);
            cairo_fill(cr);
        }
    cairo_restore(cr);
    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    draw_text(cr, a.x0 + a.w / 2, a.y0 - 10, p->hv_note ? p->hv_note : "", 11.5, 0.5, 0);
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
    double W = DRAW_PANEL_W * (double)cols, H = S_TITLE_H + DRAW_PANEL_H * (double)rows;
    draw_canvas_t *canvas = draw_canvas_new(W, H, svg, path, err, errlen);
    if (!canvas)
        return -1;
    cairo_t *cr = draw_canvas_cairo(canvas);
    cairo_set_source_rgb(cr, 0.05, 0.05, 0.05);
    draw_text(cr, 14, 22, p->title ? p->title : "", 15, 0.0, 1);
    draw_text(cr, 14, 42, p->subtitle ? p->subtitle : "", 12.5, 0.0, 0);

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
            cairo_translate(cr, 0, DRAW_PANEL_H * (double)(q / cols));
            double left = DRAW_PANEL_W * (double)(q % cols);
            if (q < n_pairs)
                s_scatter(cr, p, pairs[q][0], pairs[q][1], left, order, q == 0);
            else
                s_hv_panel(cr, p, left);
            cairo_restore(cr);
        }
        free(order);
    }
    char why[512];
    if (draw_canvas_finish(&canvas, why, sizeof why) != 0 && rc == 0) {
        snprintf(err, errlen, "%s", why);
        rc = -1;
    }
    return rc;
}
