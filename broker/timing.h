/* timing.h: running medians of evaluation wall times, one per plugin version
 * (catalog.h) and one per worker and plugin (registry.h), fed by the
 * wall_seconds of each DONE outcome (msg.h). The straggler copies
 * (speculate.h) compare a running job's age with them, and STATUS shows
 * them. A median of the last BROKER_TIMING_SAMPLES, not a mean: one
 * evaluation that hung on a paging machine must not move the figure that
 * decides what is "much longer than usual" (common practice for latency
 * figures). Pure arithmetic, no clock. */
#ifndef BROKER_TIMING_H
#define BROKER_TIMING_H

#include <stdint.h>

#define BROKER_TIMING_SAMPLES 31

typedef struct {
    float seconds[BROKER_TIMING_SAMPLES]; /* ring of the latest samples */
    uint8_t n, pos;
    /* The median of the current samples once computed, until the next add:
     * a straggler scan asks for a thousand workers' medians and a sample
     * arrives far less often (tests/bench/bench_speculate). */
    uint8_t cached;
    double median;
} broker_timing_t;

/* Adds one evaluation's wall time; a value that is not finite or outside
 * [0, 1e7] seconds is ignored (the worker's figure is not trusted). */
void broker_timing_add(broker_timing_t *t, double seconds);

/* The median of the samples kept, or -1 with fewer than min_samples. Not
 * const: it keeps the median until the next add. */
double broker_timing_median(broker_timing_t *t, unsigned min_samples);

#endif
