/* pad.h: the "pad" scenario, a granular vibration isolator.
 *
 * rows x columns grain sites in a hexagonal packing (rows alternate by half
 * a spacing; site spacing d = 2r(1 + scatter_radius + jitter), so no two
 * grains overlap at the start whatever the draws) fill a container of width
 * d*(columns + 1/2): a floor and two side walls, shaken together vertically
 * (base excitation). Site i = row*columns + column, row 0 on the floor,
 * column 0 at the left wall. Gene i (clamped to [0, 1]) sets site i's
 * material: "binary" soft below 0.5, stiff from 0.5; "graded" stiffness and
 * density linear in the gene.
 *
 * The seed draws manufacturing scatter: each grain's radius uniform in
 * r*(1 +- scatter_radius) and its start position moved by up to jitter*r,
 * uniformly over a disc. With both zero the seed changes nothing.
 *
 * One evaluation:
 *  Both settling phases add local damping (dem.h, 0.7 as in PFC) so that
 *  the pad reaches a quasi-static rest in settle_time; the shaking phase
 *  has only the contacts' own dashpots and friction.
 *  1. settle: the grains fall under gravity for settle_time (no plate);
 *     h0 = the highest grain top, the unloaded column height;
 *  2. load: the rigid plate (plate_mass, vertical motion only) is set at
 *     rest on h0 and the pad carries it for settle_time, no shaking;
 *     settlement = h0 - plate height at the end, in mm (objective 2);
 *  3. shake: from that settled state, for each frequency f in turn (one at a
 *     time, each from the same snapshot): y_f(t) = A*sin(2*pi*f*t), ramped
 *     in over transient_time/2, run transient_time, then measure a whole
 *     number of periods (measure_time rounded down, at least one) with the
 *     time step shrunk so a period is a whole number of steps. Goertzel's
 *     algorithm gives the plate's and the floor's acceleration amplitude at
 *     f over the window; T(f) = plate / floor.
 *  Objective 1 = 20*log10(max_f T(f)) in dB; objective 3 (when asked) = the
 *  share of stiff material (mean stiff share of the grains). All minimised.
 * Not here: the physics (dem.c, contact.c), parameter parsing (params.c). */
#ifndef GRANULAR_PAD_H
#define GRANULAR_PAD_H

#include <stddef.h>
#include <stdint.h>

#include "params.h"
#include "trace.h"

#define GRANULAR_SETTLE_DAMPING 0.7        /* local damping while settling (PFC's default) */
#define GRANULAR_DT_FRACTION (1.0 / 50.0)  /* dt = t_c/50 unless "dt" is given */
#define GRANULAR_DT_MAX_FRACTION 0.1       /* a given dt may be at most t_c/10 */
#define GRANULAR_MAX_STEPS 2000000000.0    /* refuse params that would run longer */
#define GRANULAR_MIN_STEPS_PER_PERIOD 20.0 /* resolve the fastest disturbance */

typedef struct {
    double fitness[3];
    double transmissibility[GRANULAR_MAX_FREQUENCIES]; /* ratio per frequency */
    double settlement_mm;
    double stiff_share;
    double dt;      /* the base time step used */
    uint64_t steps; /* time steps taken in all */
} granular_pad_result_t;

/* Runs one evaluation of genes (gene_count must be rows*columns) with the
 * evaluation seed. trace may be NULL. Returns 0 (FITFARM_PLUGIN_OK),
 * 1 (EINVAL: bad genome or params, e.g. a dt too large) or 2 (EFAIL: out of
 * memory, or the simulation went non-finite) with a sentence in err. */
int granular_pad_run(const granular_params_t *p, const double *genes, size_t gene_count,
                     uint64_t seed, granular_trace_t *trace, granular_pad_result_t *out, char *err,
                     size_t errlen);

#endif
