/* bench_speculate.c: what one scan for stragglers (broker/speculate.h)
 * costs the broker's loop with many workers: N workers of one slot, each
 * running one job that is long overdue, N more idle ones with credits; one
 * broker_speculate_turn starts BROKER_SPECULATE_MAX copies. Prints the
 * median scan time over repeats (a fresh broker each time, no sockets).
 * Usage: bench_speculate [N (default 1000)] [repeats (default 7)] */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "broker/client_io.h"
#include "broker/core.h"
#include "broker/dispatch.h"
#include "broker/speculate.h"
#include "broker/timing.h"
#include "broker/worker_io.h"
#include "common/clock.h"

static void s_worker(broker_t *b, const char *name, uint32_t credits)
{
    proto_plugin_info_t pi = {.name = (char *)"spin", .version = (char *)"1.0", .objectives = 2};
    proto_hello_t h = {.name = (char *)name, .host = (char *)"h", .arch = (char *)"x86_64",
                       .slots = 1, .n_plugins = 1, .plugins = &pi};
    broker_worker_t *w = broker_worker_on_hello(b, (const uint8_t *)name, strlen(name), &h);
    broker_registry_add_credits(&b->registry, w, credits);
    for (int i = 0; i < BROKER_TIMING_SAMPLES; i++) /* a worker that has run a while */
        broker_timing_add(&w->timing[0], 0.010 + 1e-4 * (i % 7));
}

static int s_cmp(const void *a, const void *c)
{
    double x = *(const double *)a, y = *(const double *)c;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    int n = argc > 1 ? atoi(argv[1]) : 1000, repeats = argc > 2 ? atoi(argv[2]) : 7;
    double *us = calloc((size_t)repeats, sizeof *us);
    for (int r = 0; r < repeats; r++) {
        broker_t *b = calloc(1, sizeof *b);
        broker_core_init(b, 5000, 1000, 3, NULL);
        char name[32];
        for (int i = 0; i < n; i++) {
            snprintf(name, sizeof name, "busy%d", i);
            s_worker(b, name, 1);
        }
        double *g = calloc((size_t)n, sizeof *g);
        proto_item_t *items = calloc((size_t)n, sizeof *items);
        for (int i = 0; i < n; i++) {
            g[i] = i;
            items[i] = (proto_item_t){.tag = (uint64_t)i, .genome_len = 8, .genome = (uint8_t *)&g[i]};
        }
        proto_submit_t s = {.run_id = (char *)"r", .run_seed = 1, .batch_tag = 1,
                            .plugin = (char *)"spin", .params = (char *)"{}",
                            .n_items = (uint32_t)n, .items = items};
        broker_client_submit(b, (const uint8_t *)"c", 1, "local", &s);
        broker_dispatch_turn(b);
        for (int i = 0; i < n; i++) {
            snprintf(name, sizeof name, "idle%d", i);
            s_worker(b, name, 4);
        }
        broker_plugin_t *p = broker_catalog_first(&b->catalog, "spin");
        for (int i = 0; i < 31; i++)
            broker_timing_add(&p->timing, 0.010);
        b->now_ms += 10000;
        int64_t t0 = common_clock_us();
        broker_speculate_turn(b);
        us[r] = (double)(common_clock_us() - t0);
        if (b->spec.n != BROKER_SPECULATE_MAX)
            fprintf(stderr, "bench_speculate: %u copies, expected %d\n", b->spec.n,
                    BROKER_SPECULATE_MAX);
        broker_core_fini(b);
        free(b);
        free(items);
        free(g);
    }
    qsort(us, (size_t)repeats, sizeof *us, s_cmp);
    printf("scan_with_%d_busy_and_%d_idle_workers: %.0f us (median of %d; min %.0f, max %.0f)\n",
           n, n, us[repeats / 2], repeats, us[0], us[repeats - 1]);
    free(us);
    return 0;
}
