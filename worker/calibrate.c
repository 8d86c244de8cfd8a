/* calibrate.c: the worker's speed score (calibrate.h). Owns only the timed
 * loop; sending it in HELLO is loop.c's. */
#include "calibrate.h"

#include <string.h>

#include "common/clock.h"
#include "common/log.h"

uint64_t worker_calibrate_kernel(uint64_t n)
{
    /* xorshift64 (Marsaglia, 2003) for the integer part; a dependent chain
     * of double multiply-adds kept in [0, 2) for the floating-point part.
     * Each round depends on the previous one, so neither vectorises away. */
    uint64_t x = 0x9E3779B97F4A7C15ull;
    double d = 0.5;
    for (uint64_t i = 0; i < n; i++) {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        d = d * 0.999999 + (double)(x >> 53) * 0x1p-11;
        if (d >= 2.0)
            d -= 1.0;
    }
    uint64_t bits;
    memcpy(&bits, &d, sizeof bits);
    return x ^ bits;
}

void worker_calibrate(worker_calibration_t *out)
{
    memset(out, 0, sizeof *out);
    int64_t start = common_clock_us();
    /* Find a round size worth timing (about ROUND_US), then time rounds. */
    uint64_t n = 1u << 14;
    int64_t took = 0;
    for (;;) {
        int64_t t0 = common_clock_us();
        out->checksum = worker_calibrate_kernel(n);
        took = common_clock_us() - t0;
        if (took >= WORKER_CALIBRATE_ROUND_US / 4 || n >= (1ull << 34) ||
            common_clock_us() - start > WORKER_CALIBRATE_BUDGET_US / 4)
            break;
        n *= 2;
    }
    if (took > 0)
        n = (uint64_t)((double)n * WORKER_CALIBRATE_ROUND_US / (double)took) + 1;
    double best = 0;
    for (int r = 0; r < WORKER_CALIBRATE_ROUNDS; r++) {
        if (common_clock_us() - start > WORKER_CALIBRATE_BUDGET_US)
            break;
        int64_t t0 = common_clock_us();
        out->checksum = worker_calibrate_kernel(n);
        int64_t us = common_clock_us() - t0;
        double score = us > 0 ? (double)n / (double)us : 0; /* rounds per us = millions per s */
        if (score > best)
            best = score;
    }
    out->score = best > 1e9 ? 1e9 : best;
    out->elapsed_us = common_clock_us() - start;
}

double worker_calibrate_at_start(int skip)
{
    if (skip) {
        LOG_INFO("calibration skipped (--no-calibration): speed reported as not measured");
        return 0;
    }
    worker_calibration_t cal;
    worker_calibrate(&cal);
    LOG_INFO("calibration: speed %.1f (million loop rounds per second, best of %d) in %.1f ms",
             cal.score, WORKER_CALIBRATE_ROUNDS, (double)cal.elapsed_us / 1000.0);
    return cal.score;
}
