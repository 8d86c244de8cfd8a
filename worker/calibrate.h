/* calibrate.h: the worker's speed score, measured once at start and reported
 * in HELLO so that `fitfarm status` can show how fast each machine is.
 * Internal to the worker.
 *
 * The score is the best of a few timed rounds of one fixed, deterministic
 * arithmetic loop (integer mixing and dependent floating-point multiply-adds,
 * no memory traffic beyond registers), in millions of loop rounds per second
 * of CLOCK_MONOTONIC. The best round, not the mean, is kept: on a shared
 * machine other processes only ever make a round slower. It measures one
 * core's arithmetic speed, not memory bandwidth or the plugins' own speed.
 * The whole measurement takes about WORKER_CALIBRATE_ROUNDS x
 * WORKER_CALIBRATE_ROUND_US microseconds on an idle core, and at most
 * WORKER_CALIBRATE_BUDGET_US however slow the machine. */
#ifndef WORKER_CALIBRATE_H
#define WORKER_CALIBRATE_H

#include <stdint.h>

#define WORKER_CALIBRATE_ROUNDS 5
#define WORKER_CALIBRATE_ROUND_US 20000
#define WORKER_CALIBRATE_BUDGET_US 400000

typedef struct {
    double score;       /* millions of loop rounds per second; 0 if it could not run */
    int64_t elapsed_us; /* the whole measurement */
    uint64_t checksum;  /* the loop's result: the same on every machine for the same rounds */
} worker_calibration_t;

/* Runs the calibration (blocks for well under a second). */
void worker_calibrate(worker_calibration_t *out);

/* The score HELLO reports: calibrated and logged, or with skip
 * (--no-calibration) 0, "not measured" (msg.h), logged as skipped. */
double worker_calibrate_at_start(int skip);

/* The fixed loop itself: n rounds from a fixed start. Its result depends on n
 * only, so a test can check that the compiler did not drop the work. */
uint64_t worker_calibrate_kernel(uint64_t n);

#endif
