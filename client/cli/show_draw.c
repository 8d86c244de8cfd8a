/* show_draw.c: the picture of `fitfarm show granular` (show_pad.h): the
 * pad to scale (grains coloured by material, side walls, the floor, the
 * plate resting on the grains, a legend), and with a trace one panel per
 * phase of plate and floor displacement over time. Axes, text and the file
 * are client/draw/canvas.c's. */
#include <math.h>
#include <stdio.h>

#include "canvas.h"
#include "show_pad.h"

#define S_W (2.0 * DRAW_PANEL_W)
#define S_TITLE_H 56.0
#define S_SIDE 60.0     /* pixels left and right of the container */
#define S_FLOOR_PX 16.0 /* the floor's band under y = 0 */
#define S_LEGEND_H 40.0

const double show_soft_rgb[3] = {0.96, 0.62, 0.27};  /* rubber-like: orange */
const double show_stiff_rgb[3] = {0.20, 0.36, 0.62}; /* glass-like: blue */
static const double s_plate_rgb[3] = {0.32, 0.32, 0.35};
static const double s_floor_rgb[3] = {0.62, 0.56, 0.48};
static const double s_floor_line[3] = {0.35, 0.45, 0.70};
static const double s_plate_line[3] = {0.85, 0.25, 0.10};

static void s_rgb(cairo_t *cr, const double *c)
{
    cairo_set_source_rgb(cr, c[0], c[1], c[2]);
}

static double s_mean_radius(const show_pad_t *pad)
{
    double sum = 0;
    for (size_t i = 0; i < pad->grains; i++)
        sum += pad->r[i];
    return sum / (double)pad->grains;
}

/* The floor as a hatched band from x0 to x1 under the line y. */
static void s_floor(cairo_t *cr, double x0, double x1, double y)
{
    s_rgb(cr, s_floor_rgb);
    cairo_rectangle(cr, x0, y, x1 - x0, S_FLOOR_PX);
    cairo_fill(cr);
    cairo_save(cr);
    cairo_rectangle(cr, x0, y, x1 - x0, S_FLOOR_PX);
    cairo_clip(cr);
    cairo_set_source_rgb(cr, 0.40, 0.36, 0.30);
    cairo_set_line_width(cr, 1.0);
    for (double x = x0 - S_FLOOR_PX; x < x1; x += 8) {
        cairo_move_to(cr, x, y + S_FLOOR_PX);
        cairo_line_to(cr, x + S_FLOOR_PX, y);
    }
    cairo_stroke(cr);
    cairo_restore(cr);
}

static void s_grain(cairo_t *cr, double x, double y, double r, double stiff)
{
    double q = stiff < 0 ? 0 : stiff > 1 ? 1 : stiff;
    cairo_set_source_rgb(cr, show_soft_rgb[0] + q * (show_stiff_rgb[0] - show_soft_rgb[0]),
                         show_soft_rgb[1] + q * (show_stiff_rgb[1] - show_soft_rgb[1]),
                         show_soft_rgb[2] + q * (show_stiff_rgb[2] - show_soft_rgb[2]));
    cairo_new_path(cr);
    cairo_arc(cr, x, y, r, 0, 2 * M_PI);
    cairo_fill_preserve(cr);
    cairo_set_source_rgb(cr, 0.15, 0.15, 0.15);
    cairo_set_line_width(cr, 0.8);
    cairo_stroke(cr);
}

static void s_legend(cairo_t *cr, double y, double r_px, int graded)
{
    const char *const text[] = {graded ? "soft (stiff share 0)" : "soft grain",
                                graded ? "stiff (1), graded between" : "stiff grain",
                                "plate (rests on the grains)", "floor (shaken)", "side wall"};
    double x = S_SIDE, cy = y + S_LEGEND_H / 2;
    for (int k = 0; k < 5; k++) {
        double rr = fmin(r_px, 9.0);
        if (k < 2) {
            s_grain(cr, x + rr, cy, rr, k);
        } else if (k == 2) {
            s_rgb(cr, s_plate_rgb);
            cairo_rectangle(cr, x, cy - 5, 2 * rr, 10);
            cairo_fill(cr);
        } else if (k == 3) {
            s_floor(cr, x, x + 2 * rr, cy - 6);
        } else {
            cairo_set_source_rgb(cr, 0.25, 0.25, 0.25);
            cairo_set_line_width(cr, 3);
            cairo_move_to(cr, x + rr, cy - 9);
            cairo_line_to(cr, x + rr, cy + 9);
            cairo_stroke(cr);
        }
        cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
        draw_text(cr, x + 2 * rr + 7, cy + 4.5, text[k], 12.5, 0.0, 0);
        cairo_text_extents_t te;
        cairo_text_extents(cr, text[k], &te);
        x += 2 * rr + 7 + te.x_advance + 26;
    }
}

/* One displacement panel: floor and plate of one phase. */
static void s_series_panel(cairo_t *cr, const show_series_t *s, double left, double top)
{
    draw_area_t a;
    draw_panel_area(&a, left, top);
    a.lo[0] = a.hi[0] = s->t[0];
    a.lo[1] = a.hi[1] = s->floor_d[0];
    for (size_t i = 0; i < s->n; i++) {
        a.lo[0] = fmin(a.lo[0], s->t[i]);
        a.hi[0] = fmax(a.hi[0], s->t[i]);
        a.lo[1] = fmin(a.lo[1], fmin(s->floor_d[i], s->plate_d[i]));
        a.hi[1] = fmax(a.hi[1], fmax(s->floor_d[i], s->plate_d[i]));
    }
    draw_range(&a.lo[0], &a.hi[0]);
    draw_range(&a.lo[1], &a.hi[1]);
    char ylabel[64], title[128];
    snprintf(ylabel, sizeof ylabel, "displacement (%s)", s->unit);
    draw_axes(cr, &a, "time since the evaluation began (s)", ylabel);
    s_rgb(cr, s_floor_line);
    draw_series(cr, &a, s->t, s->floor_d, s->n, 1.6);
    s_rgb(cr, s_plate_line);
    draw_series(cr, &a, s->t, s->plate_d, s->n, 1.6);
    if (s->frequency > 0)
        snprintf(title, sizeof title, "shaken at %g Hz: transmissibility %.2f dB", s->frequency,
                 s->t_db);
    else
        snprintf(title, sizeof title, "load: the plate settles onto the grains");
    cairo_set_source_rgb(cr, 0.05, 0.05, 0.05);
    draw_text(cr, a.x0 + a.w / 2, a.y0 - 12, title, 12.5, 0.5, 1);
    /* Which line is which, in the panel's top right corner. */
    const char *names[2] = {"floor", "plate"};
    const double *cols[2] = {s_floor_line, s_plate_line};
    double bx = a.x0 + a.w - 84, by = a.y0 + 8;
    cairo_set_source_rgba(cr, 1, 1, 1, 0.88);
    cairo_rectangle(cr, bx, by, 76, 44);
    cairo_fill(cr);
    for (int k = 0; k < 2; k++) {
        double cy = by + 14 + 18.0 * k;
        s_rgb(cr, cols[k]);
        cairo_set_line_width(cr, 2.2);
        cairo_move_to(cr, bx + 8, cy);
        cairo_line_to(cr, bx + 30, cy);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
        draw_text(cr, bx + 36, cy + 4, names[k], 11.5, 0.0, 0);
    }
}

int show_pad_draw(const show_pad_t *pad, const char *title, int trace, const char *out, int svg,
                  show_layout_t *layout, char *err, size_t errlen)
{
    double r0 = s_mean_radius(pad);
    double scale = (S_W - 2 * S_SIDE) / pad->width;
    double plate_h = 1.2 * r0; /* drawn thickness; the plate is rigid, its size not simulated */
    double top_m = pad->plate_y + plate_h + 0.6 * r0;
    double floor_px = S_TITLE_H + 14 + top_m * scale;
    double legend_y = floor_px + S_FLOOR_PX + 6;
    double panels_y = legend_y + S_LEGEND_H + 8;
    size_t rows = trace ? (pad->n_series + 1) / 2 : 0;
    double H = ceil(panels_y + DRAW_PANEL_H * (double)rows + (trace ? 0 : 4));
    layout->width = S_W;
    layout->height = H;
    layout->x0 = S_SIDE;
    layout->floor = floor_px;
    layout->scale = scale;
    draw_canvas_t *canvas = draw_canvas_new(S_W, H, svg, out, err, errlen);
    if (!canvas)
        return -1;
    cairo_t *cr = draw_canvas_cairo(canvas);

    cairo_set_source_rgb(cr, 0.05, 0.05, 0.05);
    draw_text(cr, 14, 22, title, 15, 0.0, 1);
    char sub[512] = "";
    int used = 0;
    for (size_t j = 0; j < pad->m && used >= 0 && (size_t)used < sizeof sub; j++)
        used += snprintf(sub + used, sizeof sub - (size_t)used, "%s%s: %.4g", j ? ";  " : "",
                         pad->labels[j], pad->fitness[j]);
    draw_text(cr, 14, 44, sub, 12.5, 0.0, 0);

    /* Container: walls up to the plate's top, the floor under y = 0. */
    double x1 = S_SIDE + pad->width * scale, y_top = floor_px - top_m * scale;
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_rectangle(cr, S_SIDE, y_top, x1 - S_SIDE, floor_px - y_top);
    cairo_fill(cr);
    s_floor(cr, S_SIDE - 10, x1 + 10, floor_px);
    for (size_t i = 0; i < pad->grains; i++)
        s_grain(cr, S_SIDE + pad->x[i] * scale, floor_px - pad->y[i] * scale, pad->r[i] * scale,
                pad->stiff[i]);
    s_rgb(cr, s_plate_rgb);
    cairo_rectangle(cr, S_SIDE + 1.5, floor_px - (pad->plate_y + plate_h) * scale, x1 - S_SIDE - 3,
                    plate_h * scale);
    cairo_fill(cr);
    cairo_set_source_rgb(cr, 0.25, 0.25, 0.25);
    cairo_set_line_width(cr, 3);
    cairo_move_to(cr, S_SIDE - 1.5, y_top);
    cairo_line_to(cr, S_SIDE - 1.5, floor_px);
    cairo_move_to(cr, x1 + 1.5, y_top);
    cairo_line_to(cr, x1 + 1.5, floor_px);
    cairo_stroke(cr);
    s_legend(cr, legend_y, r0 * scale, pad->graded);

    for (size_t k = 0; trace && k < pad->n_series; k++)
        s_series_panel(cr, &pad->series[k], DRAW_PANEL_W * (double)(k % 2),
                       panels_y + DRAW_PANEL_H * (double)(k / 2));
    return draw_canvas_finish(&canvas, err, errlen);
}
