/* test_broker_speculate.c: straggler copies (broker/speculate.h) without
 * sockets, driven through the functions the loop calls, as in
 * test_broker_evals.c. Checked: never more than BROKER_SPECULATE_MAX copies
 * out, however many stragglers, also on one worker of many slots (a scan
 * once kept starting copies past the table's end there); a copy that finishes first is the one result delivered and
 * the first copy's late result is ignored; a first copy that finishes first
 * drops its copy, whose late result is ignored too; a trivial plugin's old
 * jobs are never copied. Expected counts follow from the rules in
 * speculate.h, worked by hand. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "broker/client_io.h"
#include "broker/core.h"
#include "broker/dispatch.h"
#include "broker/speculate.h"
#include "broker/timing.h"
#include "broker/worker_io.h"

static broker_t *s_broker(void)
{
    broker_t *b = calloc(1, sizeof *b);
    broker_core_init(b, 5000, 1000, 3, NULL);
    broker_worker_timers_start(b);
    return b;
}

static void s_broker_destroy(broker_t **b)
{
    broker_core_fini(*b);
    free(*b);
    *b = NULL;
}

/* A worker of `slots` slots carrying plugin "spin" 1.0, with credits. */
static broker_worker_t *s_worker_slots(broker_t *b, const char *name, uint32_t slots,
                                       uint32_t credits);

static broker_worker_t *s_worker(broker_t *b, const char *name, uint32_t credits)
{
    return s_worker_slots(b, name, 1, credits);
}

static broker_worker_t *s_worker_slots(broker_t *b, const char *name, uint32_t slots,
                                       uint32_t credits)
{
    proto_plugin_info_t pi = {.name = (char *)"spin", .version = (char *)"1.0", .objectives = 2};
    proto_hello_t h = {.name = (char *)name,
                       .host = (char *)"localhost",
                       .arch = (char *)"x86_64",
                       .slots = slots,
                       .n_plugins = 1,
                       .plugins = &pi};
    broker_worker_t *w = broker_worker_on_hello(b, (const uint8_t *)name, strlen(name), &h);
    broker_registry_add_credits(&b->registry, w, credits);
    return w;
}

static void s_submit(broker_t *b, const char *run_id, uint32_t n)
{
    double *g = calloc(n, sizeof *g);
    proto_item_t *items = calloc(n, sizeof *items);
    for (uint32_t i = 0; i < n; i++) {
        g[i] = 0.25 * i + 1000.0 * run_id[4]; /* another run, other genomes (no single flight) */
        items[i] = (proto_item_t){.tag = i, .genome_len = sizeof(double), .genome = (uint8_t *)&g[i]};
    }
    proto_submit_t s = {.run_id = (char *)run_id, .run_seed = 1, .seed_mode = PROTO_SEED_GENOME,
                        .batch_tag = 1, .plugin = (char *)"spin", .params = (char *)"{}",
                        .n_items = n, .items = items};
    assert_int_equal(broker_client_submit(b, (const uint8_t *)"c1", 2, "local", &s), 0);
    free(items);
    free(g);
}

/* The plugin's median becomes seconds (BROKER_SPECULATE_MIN_SAMPLES of it). */
static void s_teach(broker_t *b, double seconds)
{
    broker_plugin_t *p = broker_catalog_first(&b->catalog, "spin");
    assert_non_null(p);
    for (int i = 0; i < BROKER_SPECULATE_MIN_SAMPLES; i++)
        broker_timing_add(&p->timing, seconds);
}

static proto_outcome_t s_ok(uint64_t job_id, double f)
{
    static double fit[2];
    fit[0] = f;
    fit[1] = 0.5;
    return (proto_outcome_t){.job_id = job_id, .status = PROTO_STATUS_OK, .n_fitness = 2,
                             .fitness = fit, .error = (char *)"", .wall_seconds = 0.01};
}

/* 60 busy workers of one slot and 60 idle ones with 4 credits each; every
 * running job is 10 s old against a 10 ms median: 60 stragglers, 240 spare
 * credits, and the table holds 64. Two scans: still 64, never more. */
static void test_never_more_than_the_table(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    char name[16];
    for (int i = 0; i < 60; i++) {
        snprintf(name, sizeof name, "busy%d", i);
        s_worker(b, name, 1);
    }
    s_submit(b, "run-a", 60);
    assert_int_equal(broker_dispatch_turn(b), 60);
    for (int i = 0; i < 60; i++) {
        snprintf(name, sizeof name, "idle%d", i);
        s_worker(b, name, 4);
    }
    s_teach(b, 0.010);
    b->now_ms += 10000;
    broker_speculate_turn(b);
    /* each busy worker holds one running job: 60 stragglers, 60 copies */
    assert_int_equal(b->spec.n, 60);
    /* more stragglers than room: a second run of 60 on 60 more workers */
    for (int i = 0; i < 60; i++) {
        snprintf(name, sizeof name, "more%d", i);
        s_worker(b, name, 1);
    }
    s_submit(b, "run-b", 60);
    assert_int_equal(broker_dispatch_turn(b), 60);
    b->now_ms += 10000;
    b->spec.next_scan_ms = 0;
    broker_speculate_turn(b);
    assert_int_equal(b->spec.n, BROKER_SPECULATE_MAX);
    assert_int_equal(b->spec.started, BROKER_SPECULATE_MAX);
    b->spec.next_scan_ms = 0;
    broker_speculate_turn(b);
    assert_int_equal(b->spec.n, BROKER_SPECULATE_MAX);
    s_broker_destroy(&b);
}

/* One worker of 100 slots running 100 stragglers, one idle worker with 200
 * credits: one scan of that worker alone must stop at the table's size. */
static void test_one_worker_many_stragglers(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    s_worker_slots(b, "big", 100, 100);
    s_submit(b, "run-a", 100);
    assert_int_equal(broker_dispatch_turn(b), 100);
    s_worker_slots(b, "spare", 200, 200);
    s_teach(b, 0.010);
    b->now_ms += 10000;
    broker_speculate_turn(b);
    assert_int_equal(b->spec.n, BROKER_SPECULATE_MAX);
    assert_int_equal(b->spec.started, BROKER_SPECULATE_MAX);
    s_broker_destroy(&b);
}

/* One slow worker holding the only job, one idle: the copy wins, the first
 * copy's result later is ignored, and one result is delivered. */
static void test_copy_wins_once(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *slow = s_worker(b, "slow", 1);
    s_submit(b, "run-a", 1);
    assert_int_equal(broker_dispatch_turn(b), 1);
    broker_worker_t *fast = s_worker(b, "fast", 2);
    uint64_t first = slow->jobs_head->live->job_id;
    s_teach(b, 0.050);
    b->now_ms += 1000; /* 20 x the median */
    broker_speculate_turn(b);
    assert_int_equal(b->spec.n, 1);
    uint64_t copy = b->spec.copies[0].job_id;
    assert_true(b->spec.copies[0].w == fast);
    assert_int_equal(fast->copies, 1);
    proto_outcome_t o = s_ok(copy, 2.5);
    broker_dispatch_outcome(b, fast, &o);
    broker_run_t *run = broker_runs_get(&b->runs, "run-a");
    assert_int_equal(run->n_outbox, 1);
    assert_true(run->outbox[0].fitness[0] == 2.5);
    assert_int_equal(b->spec.won, 1);
    assert_int_equal(b->spec.n, 0);
    assert_int_equal(fast->copies, 0);
    assert_int_equal(slow->held, 0); /* the first was taken off the slow worker */
    o = s_ok(first, 9.0); /* its late result: no such job any more */
    broker_dispatch_outcome(b, slow, &o);
    assert_int_equal(run->n_outbox, 1);
    assert_true(run->outbox[0].fitness[0] == 2.5);
    s_broker_destroy(&b);
}

/* The first finishes first: its copy is dropped (beaten) and the copy's
 * result later is ignored. */
static void test_first_wins_once(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *slow = s_worker(b, "slow", 1);
    s_submit(b, "run-a", 1);
    broker_dispatch_turn(b);
    broker_worker_t *fast = s_worker(b, "fast", 2);
    uint64_t first = slow->jobs_head->live->job_id;
    s_teach(b, 0.050);
    b->now_ms += 1000;
    broker_speculate_turn(b);
    assert_int_equal(b->spec.n, 1);
    uint64_t copy = b->spec.copies[0].job_id;
    proto_outcome_t o = s_ok(first, 1.5);
    broker_dispatch_outcome(b, slow, &o);
    assert_int_equal(b->spec.beaten, 1);
    assert_int_equal(b->spec.n, 0);
    o = s_ok(copy, 7.0);
    broker_dispatch_outcome(b, fast, &o);
    broker_run_t *run = broker_runs_get(&b->runs, "run-a");
    assert_int_equal(run->n_outbox, 1);
    assert_true(run->outbox[0].fitness[0] == 1.5);
    assert_int_equal(b->spec.won, 0);
    s_broker_destroy(&b);
}

/* A plugin whose median is under BROKER_SPECULATE_MIN_MEDIAN_MS: old jobs
 * are scheduling noise, never copied; --no-speculation: none either. */
static void test_trivial_and_disabled(void **state)
{
    (void)state;
    for (int disabled = 0; disabled < 2; disabled++) {
        broker_t *b = s_broker();
        if (disabled)
            broker_speculate_init(&b->spec, 0, 0);
        s_worker(b, "slow", 1);
        s_submit(b, "run-a", 1);
        broker_dispatch_turn(b);
        s_worker(b, "fast", 2);
        s_teach(b, disabled ? 0.050 : 0.001);
        b->now_ms += 10000;
        broker_speculate_turn(b);
        assert_int_equal(b->spec.n, 0);
        assert_int_equal(b->spec.started, 0);
        s_broker_destroy(&b);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_never_more_than_the_table),
        cmocka_unit_test(test_one_worker_many_stragglers),
        cmocka_unit_test(test_copy_wins_once),
        cmocka_unit_test(test_first_wins_once),
        cmocka_unit_test(test_trivial_and_disabled),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
