/* bench_granular.c: speed of the granular plugin's simulation core.
 * Prints 'name: value unit' lines:
 *   granular_default: seconds per evaluation with the default params (6x12
 *     grains, a checkerboard genome), the cost a user pays per genome;
 *   granular_default_rate: grains x steps per second of that evaluation;
 *   granular_large_rate: grains x steps per second of a 2000-grain pad, which
 *     stays close to the default's when the cell list keeps the force loop
 *     O(N) (an O(N^2) search would be ~28x slower per grain here).
 * Usage: bench_granular [repeats] (default 5). */
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "worker/plugins/granular/pad.h"
#include "worker/plugins/granular/params.h"

static double s_cpu_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Runs params repeats times; returns CPU seconds per run, and grain-steps. */
static int s_bench(const char *json, int repeats, double *per_eval, double *grain_steps,
                   double *fitness)
{
    granular_params_t p;
    char err[256];
    if (granular_params_parse(json, &p, err, sizeof err) < 0) {
        fprintf(stderr, "bench_granular: %s\n", err);
        return -1;
    }
    size_t n = (size_t)p.rows * (size_t)p.columns;
    double *genes = malloc(n * sizeof *genes);
    if (!genes)
        return -1;
    for (size_t i = 0; i < n; i++)
        genes[i] = ((i / (size_t)p.columns + i % (size_t)p.columns) & 1) ? 0.9 : 0.1;
    granular_pad_result_t res = {0};
    double t0 = s_cpu_now();
    for (int r = 0; r < repeats; r++) {
        if (granular_pad_run(&p, genes, n, (uint64_t)r + 1, NULL, &res, err, sizeof err) != 0) {
            fprintf(stderr, "bench_granular: %s\n", err);
            free(genes);
            return -1;
        }
    }
    double t = s_cpu_now() - t0;
    *per_eval = t / repeats;
    *grain_steps = (double)n * (double)res.steps / *per_eval;
    fitness[0] = res.fitness[0];
    fitness[1] = res.fitness[1];
    free(genes);
    return 0;
}

int main(int argc, char **argv)
{
    int repeats = argc > 1 ? atoi(argv[1]) : 5;
    if (repeats < 1)
        repeats = 1;
    double per, rate, fit[2];
    if (s_bench("{}", repeats, &per, &rate, fit) < 0)
        return 1;
    printf("granular_default: %.4f s/eval\n", per);
    printf("granular_default_rate: %.3g grain-steps/s\n", rate);
    printf("granular_default_fitness: %.3f dB %.4f mm\n", fit[0], fit[1]);
    if (s_bench("{\"rows\":20,\"columns\":100,\"settle_time\":0.02,\"transient_time\":0.005,"
                "\"measure_time\":0.005,\"frequencies\":[200]}",
                1, &per, &rate, fit) < 0)
        return 1;
    printf("granular_large_rate: %.3g grain-steps/s\n", rate);
    return 0;
}
