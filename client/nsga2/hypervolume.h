/* hypervolume.h: the hypervolume of a set of points for minimisation: the
 * measure of the region dominated by the set and bounded by a reference
 * point (Zitzler & Thiele, 1998). Points that do not dominate the reference
 * strictly in every objective add nothing and are ignored.
 *
 *   m = 2: exact, sort and sweep, O(n log n).
 *   m = 3: exact, dimension sweep: points in increasing third objective, the
 *          two-objective front of the points seen so far kept sorted, its
 *          area times the slab height summed (the slicing scheme of While,
 *          Hingston, Barone, Huband, IEEE TEC 10(1), 2006, in three
 *          dimensions; Fonseca, Paquete, López-Ibáñez, CEC 2006, improve it
 *          to O(n log n) with a balanced tree). O(n^2) here.
 *   m >= 4: Monte Carlo estimate: uniform samples in the box between the
 *          points' ideal and the reference; the value is the box volume
 *          times the dominated fraction, with the binomial standard error
 *          V sqrt(p (1 - p) / N). Samples come from a fixed seed, so one set
 *          gives one estimate.
 * Pure: no I/O. Also: the default reference point rule of the front tools. */
#ifndef CLIENT_NSGA2_HYPERVOLUME_H
#define CLIENT_NSGA2_HYPERVOLUME_H

#include <stddef.h>
#include <stdint.h>

enum {
    NSGA2_HV_EXACT = 0,
    NSGA2_HV_MONTE_CARLO = 1,
};

typedef struct {
    double value;
    double std_error; /* 0 when exact */
    int method;       /* NSGA2_HV_* */
    uint64_t samples; /* Monte Carlo samples drawn; 0 when exact */
} nsga2_hv_t;

#define NSGA2_HV_SAMPLES 1000000u /* default Monte Carlo samples */

/* Hypervolume of n points (row-major, m >= 1 objectives) against ref.
 * samples: Monte Carlo samples for m >= 4 (0 = NSGA2_HV_SAMPLES). Returns 0,
 * or -1 when out of memory or an input value is NaN. */
int nsga2_hypervolume(const double *f, size_t n, size_t m, const double *ref, uint64_t samples,
                      nsga2_hv_t *out);

/* The reference point when none is given (our rule): per objective, the
 * worst (largest) value among the n points plus 10 % of the points' range
 * in it; where every point has the same value v, v + 0.1 max(|v|, 1). n must
 * be at least 1. */
void nsga2_hypervolume_default_ref(const double *f, size_t n, size_t m, double *ref);

#endif
