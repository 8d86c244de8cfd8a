/* bench_decode: how fast the strict decoder reads the two busiest messages, a
 * JOBS of 256 jobs (broker -> worker) and a DONE of 256 outcomes (worker ->
 * broker). Prints 'name: value unit' lines. Usage:
 *     build/tests/bench/bench_decode [--rounds N]
 * For comparing builds, run under `valgrind --tool=callgrind` as well: the
 * instruction count is repeatable where wall time on a shared machine is not. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "proto/msg.h"

static double s_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static double s_rate(const uint8_t *buf, size_t len, long rounds)
{
    double t0 = s_now();
    for (long r = 0; r < rounds; r++) {
        proto_msg_t *m = NULL;
        proto_err_t err;
        if (proto_msg_decode(buf, len, NULL, &m, &err) != PROTO_OK) {
            fprintf(stderr, "bench_decode: %s\n", err.text);
            exit(1);
        }
        proto_msg_destroy(&m);
    }
    return (double)rounds / (s_now() - t0);
}

int main(int argc, char **argv)
{
    long rounds = 20000;
    if (argc == 3 && strcmp(argv[1], "--rounds") == 0)
        rounds = atol(argv[2]);
    if (rounds < 1) {
        fprintf(stderr, "usage: bench_decode [--rounds N]\n");
        return 2;
    }
    enum { N = 256, GENOME = 30 * 8 };
    static uint8_t genome[GENOME];
    static proto_job_t jobs[N];
    static proto_outcome_t outs[N];
    static double fit[2] = {0.25, 3.5};
    for (int i = 0; i < N; i++) {
        jobs[i] = (proto_job_t){.job_id = 1000000u + (uint64_t)i, .plugin = "zdt1",
                                .params = "{\"n\":30}", .seed = 0x9e3779b97f4a7c15ULL * (uint64_t)i,
                                .genome_len = GENOME, .genome = genome};
        outs[i] = (proto_outcome_t){.job_id = 1000000u + (uint64_t)i, .n_fitness = 2,
                                    .fitness = fit, .cpu_seconds = 1e-5, .peak_rss_kb = 4096,
                                    .error = ""};
    }
    proto_msg_t jm = {.type = PROTO_JOBS}, dm = {.type = PROTO_DONE};
    jm.u.jobs = (proto_jobs_t){.n_jobs = N, .jobs = jobs};
    dm.u.done = (proto_done_t){.credits = N, .n_outcomes = N, .outcomes = outs};
    uint8_t *jb = NULL, *db = NULL;
    size_t jl = 0, dl = 0;
    if (proto_msg_encode(&jm, &jb, &jl) != PROTO_OK || proto_msg_encode(&dm, &db, &dl) != PROTO_OK)
        return 1;
    double jr = s_rate(jb, jl, rounds);
    double dr = s_rate(db, dl, rounds);
    printf("jobs_message: %zu bytes\n", jl);
    printf("jobs_decode: %.0f jobs/s\n", jr * N);
    printf("done_message: %zu bytes\n", dl);
    printf("done_decode: %.0f outcomes/s\n", dr * N);
    free(jb);
    free(db);
    return 0;
}
