/* plot.h: pictures of a Pareto front with cairo (PNG or SVG): objective
 * against objective for every pair of the first four objectives, all results
 * as small dots (later generations darker when the input carries them), the
 * front highlighted (in two objectives joined by its attainment staircase),
 * the knee ringed; and, when given, a panel of hypervolume over generations.
 * Owns layout, markers and colours (axes and the surface are
 * client/draw/canvas.c's); not the front, the knee or the hypervolume, which the
 * caller computes. */
#ifndef CLIENT_NSGA2_PLOT_H
#define CLIENT_NSGA2_PLOT_H

#include <stddef.h>

typedef struct {
    const double *f;          /* n x m, every ok result */
    size_t n, m;
    const long *generation;   /* n entries, or NULL when the input has none */
    const size_t *front;      /* indices into f of the front's points */
    size_t n_front;
    long knee;                /* index into f, or -1 */
    const char *const *labels;/* m axis labels */
    const double *hv_gen, *hv;/* the hypervolume curve: n_hv (generation, value) */
    size_t n_hv;
    const char *title;        /* first line over the picture */
    const char *subtitle;     /* second line, e.g. the hypervolume; may be NULL */
    const char *hv_note;      /* under the curve's title, e.g. the reference point */
} nsga2_plot_t;

/* Draws p into path, an SVG when svg is set, else a PNG. Returns 0, or -1
 * with the reason in err. */
int nsga2_plot_write(const nsga2_plot_t *p, const char *path, int svg, char *err, size_t errlen);

#endif
