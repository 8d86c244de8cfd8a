/* trace.h: the optional time-series file of one evaluation, JSON Lines
 * (one JSON object per line, "\n" separated, UTF-8). Lines, by "type":
 *
 *   header  {"type":"header","plugin":"granular","version":V,"seed":"S" (a decimal string: 64 bits),
 *            "rows":R,"columns":C,"grains":N,"width":W (m),"dt":DT (s),
 *            "params":{...the params as given...}}
 *   sample  {"type":"sample","phase":P,"frequency":F,"t":T,"floor_y":Y,
 *            "plate_y":Y|null,"plate_a":A|null}
 *           floor and plate heights in m (the plate's bottom face), plate
 *           acceleration in m/s^2; t in s from the start of the evaluation,
 *           restarting at the snapshot for each frequency (each frequency is
 *           shaken from the same settled state)
 *   grains  {"type":"grains","phase":P,"frequency":F,"t":T,"x":[..],"y":[..],
 *            "r":[..],"stiff":[..]}  every grain's centre and radius (m) and
 *           stiff share (0 soft, 1 stiff, between for "graded")
 *   result  {"type":"result","fitness":[..],"transmissibility":[..],
 *            "settlement_mm":S,"stiff_share":Q}  transmissibility as a ratio
 *           per frequency, in the order of "frequencies"
 *
 * Phases: "settle" (grains fall under gravity, no plate), "load" (plate
 * rests on the grains, no shaking), "shake" (floor shaken at F Hz; F is 0
 * in the other phases). Samples come about every 0.1 ms while settling and
 * about 40 per period while shaking; grain lines about every 10 ms.
 * Not here: what is simulated (pad.c). */
#ifndef GRANULAR_TRACE_H
#define GRANULAR_TRACE_H

#include <stdint.h>
#include <stdio.h>

#include "dem.h"

typedef struct {
    FILE *f;                 /* borrowed */
    const char *version;     /* the plugin's, for the header */
    const char *params_json; /* one line of JSON, for the header */
} granular_trace_t;

/* Written by the scenario once the time step is known. */
void granular_trace_header(granular_trace_t *self, uint64_t seed, int rows, int columns,
                           double width, double dt);
void granular_trace_sample(granular_trace_t *self, const char *phase, double frequency,
                           const granular_world_t *world);
void granular_trace_grains(granular_trace_t *self, const char *phase, double frequency,
                           const granular_world_t *world, const double *stiff);
void granular_trace_result(granular_trace_t *self, const double *fitness, int objectives,
                           const double *transmissibility, size_t frequencies, double settlement_mm,
                           double stiff_share);

#endif
