/* show_pad.h: one granular pad design as `fitfarm show` draws it, read
 * from the granular plugin's trace (worker/plugins/granular/trace.h): the
 * grains as they rest under the plate at the end of the load phase, and the
 * plate's and the floor's displacement over time. Displacement is a height
 * minus its height at the end of the load phase (the settled state every
 * frequency is shaken from): in mm for the load phase, in micrometres for
 * each shaking frequency. Owns reading and checking the trace
 * (show_pad_read) and drawing it (show_pad_draw, show_draw.c). */
#ifndef CLIENT_CLI_SHOW_PAD_H
#define CLIENT_CLI_SHOW_PAD_H

#include <stddef.h>

#include "cli_plugin.h"

#define SHOW_MAX_GRAINS 4096     /* the plugin's GRANULAR_MAX_SITES */
#define SHOW_MAX_SERIES 17       /* the load phase and up to 16 frequencies */
#define SHOW_MAX_SAMPLES 2000000 /* per series */
#define SHOW_MAX_OBJECTIVES 3

typedef struct {
    char phase[8];                 /* "load" or "shake" */
    double frequency;              /* Hz; 0 for load */
    double scale;                  /* metres to the unit below */
    const char *unit;              /* "mm" or "\xc2\xb5m" */
    double *t, *floor_d, *plate_d; /* n entries; t in s from the start */
    size_t n, cap;
    double t_db; /* shaken: 20 log10 T at this frequency; NaN for load */
} show_series_t;

typedef struct {
    int rows, columns;
    size_t grains;
    double width;              /* container width, m */
    double *x, *y, *r, *stiff; /* grains at grains_t */
    int graded;                /* some grain's stiff share is neither 0 nor 1 */
    double grains_t;
    double plate_y; /* plate bottom at the sample nearest grains_t, m */
    double rest_plate, rest_floor;
    show_series_t series[SHOW_MAX_SERIES];
    size_t n_series;
    double fitness[SHOW_MAX_OBJECTIVES];
    size_t m;
    char labels[SHOW_MAX_OBJECTIVES][CLI_PLUGIN_LABEL_BYTES];
} show_pad_t;

/* Where the drawing put the pad, for checking pixels: a grain at (x, y) m
 * is drawn centred on (x0 + x*scale, floor - y*scale). */
typedef struct {
    double width, height;
    double x0, floor, scale;
} show_layout_t;

/* The colours of soft and stiff grains (0..1 RGB). */
extern const double show_soft_rgb[3], show_stiff_rgb[3];

/* Reads the trace at path into pad (zeroed first). Returns 0, or -1 with a
 * sentence naming the line in err. */
int show_pad_read(const char *path, show_pad_t *pad, char *err, size_t errlen);

/* Frees what show_pad_read allocated. */
void show_pad_free(show_pad_t *pad);

/* Draws the design (and with trace the displacement panels) into out (SVG
 * when svg). Fills *layout. Returns 0, or -1 with the reason in err. */
int show_pad_draw(const show_pad_t *pad, const char *title, int trace, const char *out, int svg,
                  show_layout_t *layout, char *err, size_t errlen);

#endif
