/* canvas.h: the one drawing layer of fitfarm's pictures (cairo, PNG or
 * SVG), shared by the front pictures (client/nsga2/plot.c) and the CLI's
 * granular drawings (client/cli/show_draw.c): a surface that becomes a file,
 * text, and plot areas with data-to-pixel mapping, padded ranges, and axes
 * whose tick steps are Heckbert's "nice numbers" (Graphics Gems, 1990).
 * Not here: what any picture shows. */
#ifndef CLIENT_DRAW_CANVAS_H
#define CLIENT_DRAW_CANVAS_H

#include <cairo.h>
#include <stddef.h>

/* Width and height of one standard plot panel, its margins inside. */
#define DRAW_PANEL_W 470.0
#define DRAW_PANEL_H 440.0

typedef struct {
    double x0, y0, w, h; /* plot area on the canvas, pixels */
    double lo[2], hi[2]; /* data range on x and y */
} draw_area_t;

typedef struct draw_canvas draw_canvas_t;

/* A w x h canvas (pixels; points for SVG) that draw_canvas_finish writes to
 * path: SVG when svg is set, else PNG. The background is painted. Returns
 * the canvas (caller finishes it) or NULL with the reason in err. */
draw_canvas_t *draw_canvas_new(double w, double h, int svg, const char *path, char *err,
                               size_t errlen);

/* The cairo context to draw with; borrowed, valid until finish. */
cairo_t *draw_canvas_cairo(draw_canvas_t *self);

/* Writes the file, frees the canvas, sets *self_p to NULL (accepts NULL).
 * Returns 0, or -1 with the reason in err. Releases cairo's and
 * fontconfig's process-wide caches: a CLI process draws once. */
int draw_canvas_finish(draw_canvas_t **self_p, char *err, size_t errlen);

/* Text at (x, y) baseline; align 0 left, 0.5 centred, 1 right. */
void draw_text(cairo_t *cr, double x, double y, const char *s, double size, double align, int bold);

/* Widens [lo, hi] by 4 % each side (an empty range by half its size or 0.5). */
void draw_range(double *lo, double *hi);

/* Data to pixels. */
double draw_px(const draw_area_t *a, double x);
double draw_py(const draw_area_t *a, double y);

/* The plot area of a standard panel whose cell starts at (left, top). */
void draw_panel_area(draw_area_t *a, double left, double top);

/* White plot area, grid, ticks, frame and the two axis labels. */
void draw_axes(cairo_t *cr, const draw_area_t *a, const char *xlabel, const char *ylabel);

/* A polyline through (x[i], y[i]) in the current colour, clipped to a. */
void draw_series(cairo_t *cr, const draw_area_t *a, const double *x, const double *y, size_t n,
                 double width);

#endif
