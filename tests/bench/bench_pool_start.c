/* bench_pool_start.c: how long the embedded local pool takes to come up:
 * fitfarm_client_new with no broker (which returns once a worker has
 * registered with the pool's broker) timed from the call to its return, ten
 * times, median and range printed. fitfarm_client_destroy is timed too,
 * because an optimizer that starts a pool per experiment pays both.
 *
 * Not a test: it asserts nothing about speed. Run it by hand from the build
 * tree: build/tests/bench/bench_pool_start [starts]. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "client/include/fitfarm.h"

#define BENCH_MAX_STARTS 100

static double s_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

static int s_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double s_median(double *v, int n)
{
    qsort(v, (size_t)n, sizeof *v, s_cmp);
    return n % 2 ? v[n / 2] : (v[n / 2 - 1] + v[n / 2]) / 2;
}

int main(int argc, char **argv)
{
    int n = argc > 1 ? atoi(argv[1]) : 10;
    if (n < 1 || n > BENCH_MAX_STARTS) {
        fprintf(stderr, "usage: bench_pool_start [starts 1..%d]\n", BENCH_MAX_STARTS);
        return 2;
    }
    double start[BENCH_MAX_STARTS], stop[BENCH_MAX_STARTS];
    for (int i = 0; i < n; i++) {
        fitfarm_options_t opt = FITFARM_OPTIONS_INIT;
        opt.slots = 2;
        fitfarm_client_t *client = NULL;
        char err[1024];
        double t0 = s_now_ms();
        int rc = fitfarm_client_new(&opt, &client, err, sizeof err);
        double t1 = s_now_ms();
        if (rc != 0) {
            fprintf(stderr, "bench_pool_start: %s\n", err);
            return 1;
        }
        fitfarm_client_destroy(&client);
        double t2 = s_now_ms();
        start[i] = t1 - t0;
        stop[i] = t2 - t1;
    }
    double lo = start[0], hi = start[0];
    for (int i = 1; i < n; i++) {
        lo = start[i] < lo ? start[i] : lo;
        hi = start[i] > hi ? start[i] : hi;
    }
    printf("pool_start_median: %.1f ms (min %.1f, max %.1f, %d starts)\n", s_median(start, n),
           lo, hi, n);
    printf("pool_stop_median: %.1f ms\n", s_median(stop, n));
    return 0;
}
