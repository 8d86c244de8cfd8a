/* bench_eval_memory: the broker's heap bytes per queued job and per cached
 * result, counted by the allocator (glibc's mallinfo2: bytes in use in the heap and
 * in mapped blocks, less
 * what SQLite reports it holds, sqlite3_memory_used), not estimated. The
 * broker's core is driven in this process the way its loop drives it, with
 * no sockets and its scratch store in memory, committed after every batch
 * as the loop commits every turn (tests/bench/bench_memory.py measures a
 * whole broker process with its store on disk from outside): a run
 * submits --count genomes of 8 doubles, then a worker with enough credits
 * takes them all and answers each with --objectives fitness values, then
 * every result is acknowledged and the run is dropped from RAM, so what
 * stays is the result cache alone. Prints 'name: value unit' lines:
 *   queued_job_bytes_beyond_genome   (heap after submit - before) / count - 64
 *   cached_result_bytes_beyond_fitness  (heap at the end - before) / count
 *                                       - 8 x objectives
 * Both include the allocator's per-allocation overhead and the hash
 * tables' slots at the fill they have at that count (a table doubles past
 * 3/4 full, so the share per entry swings between 21 and 43 bytes).
 * Usage: build/tests/bench/bench_eval_memory [--count N] [--objectives K] */
#include <malloc.h>
#include <sqlite3.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "broker/client_io.h"
#include "broker/core.h"
#include "broker/dispatch.h"
#include "broker/quota.h"
#include "broker/store.h"
#include "broker/worker_io.h"

#define DIM 8
#define BATCH 10000u

/* The broker's own heap bytes: everything in use but SQLite's. */
static double s_heap(void)
{
    malloc_trim(0);
    struct mallinfo2 mi = mallinfo2();
    /* uordblks: chunks in the heap; hblkhd: large ones mapped on their own
     * (a big table's slot array) */
    return (double)mi.uordblks + (double)mi.hblkhd - (double)sqlite3_memory_used();
}

static int s_submit(broker_t *b, uint32_t first, uint32_t n)
{
    static proto_item_t items[BATCH];
    static double genomes[BATCH][DIM];
    for (uint32_t i = 0; i < n; i++) {
        for (int d = 0; d < DIM; d++)
            genomes[i][d] = (double)(first + i) * 1e-3 + d;
        items[i] = (proto_item_t){.tag = first + i,
                                  .genome_len = sizeof genomes[i],
                                  .genome = (uint8_t *)genomes[i]};
    }
    proto_submit_t s = {.run_id = (char *)"bench",
                        .run_seed = 1,
                        .seed_mode = PROTO_SEED_GENOME,
                        .batch_tag = first,
                        .plugin = (char *)"spin",
                        .params = (char *)"{}",
                        .n_items = n,
                        .items = items};
    int rc = broker_client_submit(b, (const uint8_t *)"c1", 2, "local", &s);
    return rc != 0 ? rc : broker_store_commit(b->store);
}

int main(int argc, char **argv)
{
    uint32_t count = 200000, objectives = 1;
    for (int i = 1; i + 1 < argc; i += 2) {
        if (strcmp(argv[i], "--count") == 0)
            count = (uint32_t)strtoul(argv[i + 1], NULL, 10);
        else if (strcmp(argv[i], "--objectives") == 0)
            objectives = (uint32_t)strtoul(argv[i + 1], NULL, 10);
    }
    if (count < 1 || objectives < 1 || objectives > PROTO_MAX_OBJECTIVES) {
        fprintf(stderr, "usage: bench_eval_memory [--count N] [--objectives 1..%u]\n",
                PROTO_MAX_OBJECTIVES);
        return 2;
    }
    broker_t *b = calloc(1, sizeof *b);
    broker_core_init(b, 5000, 1000, 3, NULL);
    broker_worker_timers_start(b);
    b->max_queued_per_run = b->max_queued_per_client = count;
    b->max_queued_bytes = b->max_queued_bytes_per_key = b->max_queued_bytes_per_run = UINT64_MAX;
    broker_runs_set_caps(&b->runs, count, count);
    proto_plugin_info_t pi = {.name = (char *)"spin", .version = (char *)"1.0",
                              .objectives = objectives};
    proto_hello_t h = {.name = (char *)"w1", .host = (char *)"localhost",
                       .arch = (char *)"x86_64", .slots = 4, .n_plugins = 1, .plugins = &pi};
    broker_worker_t *w = broker_worker_on_hello(b, (const uint8_t *)"w1", 2, &h);

    /* The run and its plugin queue are made by the first batch and gone
     * again at the end: a few hundred bytes over the whole count. */
    double before = s_heap();
    for (uint32_t first = 0; first < count; first += BATCH) {
        uint32_t n = count - first < BATCH ? count - first : BATCH;
        if (s_submit(b, first + 1, n) != 0) {
            fprintf(stderr, "bench_eval_memory: the broker refused a batch\n");
            return 1;
        }
    }
    double queued = s_heap();

    double fit[PROTO_MAX_OBJECTIVES];
    for (uint32_t k = 0; k < objectives; k++)
        fit[k] = 0.5 + k;
    uint32_t answered = 0;
    while (answered < count) {
        broker_registry_add_credits(&b->registry, w, BATCH);
        if (broker_dispatch_turn(b) == 0)
            break;
        while (w->jobs_head) {
            proto_outcome_t o = {.job_id = w->jobs_head->live->job_id,
                                 .status = PROTO_STATUS_OK,
                                 .n_fitness = objectives,
                                 .fitness = fit,
                                 .error = (char *)"",
                                 .cpu_seconds = 0.001,
                                 .peak_rss_kb = 2048};
            broker_dispatch_outcome(b, w, &o);
            answered++;
        }
        if (broker_store_commit(b->store) != 0) {
            fprintf(stderr, "bench_eval_memory: the store did not commit\n");
            return 1;
        }
        broker_run_t *run = broker_runs_get(&b->runs, "bench");
        broker_client_flush(b); /* no sockets: the outbox moves to unacked */
        size_t cur = 0;
        broker_delivery_t *d;
        uint64_t *tags = malloc(broker_table_size(run->unacked) * sizeof *tags + 1);
        size_t n = 0;
        while ((d = broker_table_next(run->unacked, &cur)))
            tags[n++] = d->tag;
        for (size_t i = 0; i < n; i++)
            broker_runs_ack(&b->runs, run, tags[i]);
        free(tags);
    }
    if (answered != count) {
        fprintf(stderr, "bench_eval_memory: %u of %u answered\n", answered, count);
        return 1;
    }
    broker_quota_sweep(b, 0, 1); /* the idle run leaves RAM */
    double cached = s_heap();

    printf("count: %u genomes of %d doubles\n", count, DIM);
    printf("objectives: %u\n", objectives);
    printf("results_in_ram: %zu count\n", broker_table_size(b->evals.by_key));
    printf("queued_job_bytes_beyond_genome: %.1f bytes\n",
           (queued - before) / count - DIM * 8.0);
    printf("cached_result_bytes_beyond_fitness: %.1f bytes\n",
           (cached - before) / count - 8.0 * objectives);
    printf("sizeof_eval: %zu bytes\n", sizeof(broker_eval_t));
    printf("sizeof_live: %zu bytes\n", sizeof(broker_eval_live_t));
    broker_core_fini(b);
    free(b);
    return 0;
}
