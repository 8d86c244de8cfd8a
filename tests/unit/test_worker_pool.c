/* test_worker_pool.c: the worker's child pool against the test-only fault
 * plugin (tests/plugins/fault.c): every way a plugin can misbehave becomes a
 * status, and the pool keeps serving good jobs afterwards with respawned
 * children. Drives worker/pool.h directly; no broker, no network. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "common/clock.h"
#include "worker/pool.h"
#include "worker/registry.h"

static worker_registry_t *s_registry;

static int s_setup(void **state)
{
    (void)state;
    const char *build = getenv("FITFARM_BUILD_DIR");
    if (!build) {
        fprintf(stderr, "FITFARM_BUILD_DIR is not set\n");
        return -1;
    }
    char dir[4096];
    snprintf(dir, sizeof dir, "%s/test-plugins", build);
    s_registry = worker_registry_new();
    if (worker_registry_load_dir(s_registry, dir) < 1 ||
        !worker_registry_find(s_registry, "fault")) {
        fprintf(stderr, "no fault plugin in %s\n", dir);
        return -1;
    }
    return 0;
}

static int s_teardown(void **state)
{
    (void)state;
    worker_registry_destroy(&s_registry);
    return 0;
}

/* Little-endian bytes of one double, as clients send genomes. */
static void s_genome1(uint8_t out[8], double x)
{
    uint64_t bits;
    memcpy(&bits, &x, sizeof bits);
    for (int i = 0; i < 8; i++)
        out[i] = (uint8_t)(bits >> (8 * i));
}

static worker_pool_t *s_pool(unsigned slots, size_t mem_limit_mb)
{
    worker_pool_config_t config = {.slots = slots,
                                   .registry = s_registry,
                                   .mem_limit_mb = mem_limit_mb,
                                   .default_timeout_ms = 30000};
    worker_pool_t *pool = worker_pool_new(&config);
    assert_non_null(pool);
    assert_int_equal(worker_pool_idle(pool), slots);
    return pool;
}

/* Runs one fault job (behaviour chosen by x0) and waits for its result. */
static worker_pool_result_t s_run(worker_pool_t *pool, uint64_t job_id, const char *plugin,
                                  const char *params, double x0, uint32_t timeout_ms)
{
    uint8_t genome[8];
    s_genome1(genome, x0);
    proto_job_t job = {.job_id = job_id,
                       .plugin = (char *)plugin,
                       .params = (char *)params,
                       .seed = 42,
                       .timeout_ms = timeout_ms,
                       .genome_len = 8,
                       .genome = genome};
    assert_int_equal(worker_pool_start(pool, &job), 0);
    worker_pool_result_t r;
    int64_t until = common_clock_ms() + 60000;
    while (!worker_pool_take(pool, &r)) {
        assert_true(common_clock_ms() < until);
        worker_pool_wait(pool, 1000);
    }
    assert_int_equal(r.outcome.job_id, job_id);
    assert_non_null(r.outcome.error);
    return r;
}

/* A good job after a failure: the pool answers it correctly and every slot
 * is live again (the dead child was respawned). */
static void s_assert_serves(worker_pool_t *pool, uint64_t job_id)
{
    worker_pool_result_t r = s_run(pool, job_id, "fault", "{}", 0.25, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_OK);
    assert_int_equal(r.outcome.n_fitness, 1);
    assert_true(r.outcome.fitness[0] == 0.25); /* behaviour 0 returns x0 bit for bit */
    assert_string_equal(r.outcome.error, "");
    worker_pool_result_clear(&r);
    assert_int_equal(worker_pool_idle(pool), worker_pool_slots(pool));
}

/* Usage: build a registry, start a pool, hand it a job, take the result. */
static void test_usage_example(void **state)
{
    (void)state;
    worker_pool_config_t config = {.slots = 2, .registry = s_registry};
    worker_pool_t *pool = worker_pool_new(&config);
    assert_non_null(pool);

    uint8_t genome[8];
    s_genome1(genome, 0.5);
    proto_job_t job = {.job_id = 7, .plugin = "fault", .params = "{}", .seed = 1,
                       .genome_len = 8, .genome = genome};
    assert_int_equal(worker_pool_start(pool, &job), 0);
    assert_int_equal(worker_pool_busy(pool), 1);

    worker_pool_result_t r;
    while (!worker_pool_take(pool, &r))
        worker_pool_wait(pool, 1000);
    assert_int_equal(r.outcome.job_id, 7);
    assert_int_equal(r.outcome.status, PROTO_STATUS_OK);
    assert_int_equal(r.outcome.n_fitness, 1);
    assert_true(r.outcome.fitness[0] == 0.5);
    assert_true(r.outcome.peak_rss_kb > 0);
    worker_pool_result_clear(&r);
    worker_pool_destroy(&pool);
    assert_null(pool);
}

static void test_segv_is_crashed(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(2, 0);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 1.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_CRASHED);
    assert_int_equal(r.outcome.n_fitness, 0);
    assert_non_null(strstr(r.outcome.error, "signal 11 (SIGSEGV)"));
    worker_pool_result_clear(&r);
    s_assert_serves(pool, 2);
    worker_pool_destroy(&pool);
}

static void test_abort_is_crashed(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(1, 0);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 2.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_CRASHED);
    assert_non_null(strstr(r.outcome.error, "signal 6 (SIGABRT)"));
    worker_pool_result_clear(&r);
    s_assert_serves(pool, 2);
    worker_pool_destroy(&pool);
}

static void test_hang_is_timeout(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(1, 0);
    int64_t t0 = common_clock_ms();
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 3.0, 1000);
    int64_t took = common_clock_ms() - t0;
    assert_int_equal(r.outcome.status, PROTO_STATUS_TIMEOUT);
    assert_string_equal(r.outcome.error, "evaluation exceeded 1 s");
    /* Killed at its deadline, not before, and not long after. */
    assert_true(took >= 1000);
    assert_true(took < 5000);
    worker_pool_result_clear(&r);
    s_assert_serves(pool, 2);
    worker_pool_destroy(&pool);
}

static void test_nan_is_failed(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(1, 0);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 5.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_FAILED);
    assert_int_equal(r.outcome.n_fitness, 0);
    assert_string_equal(r.outcome.error, "objective 0 is NaN");
    worker_pool_result_clear(&r);
    s_assert_serves(pool, 2);
    worker_pool_destroy(&pool);
}

static void test_exit_is_crashed(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(1, 0);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 7.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_CRASHED);
    assert_non_null(strstr(r.outcome.error, "exit status 3"));
    worker_pool_result_clear(&r);
    s_assert_serves(pool, 2);
    worker_pool_destroy(&pool);
}

static void test_plugin_errors_are_statuses(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(1, 0);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 8.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_FAILED);
    assert_string_equal(r.outcome.error, "fault: asked to fail");
    worker_pool_result_clear(&r);

    r = s_run(pool, 2, "fault", "{}", 9.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_INVALID);
    assert_string_equal(r.outcome.error, "fault: asked to call the request invalid");
    worker_pool_result_clear(&r);

    r = s_run(pool, 3, "nosuch", "{}", 0.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_INVALID);
    assert_non_null(strstr(r.outcome.error, "unknown plugin \"nosuch\""));
    assert_non_null(strstr(r.outcome.error, "fault")); /* names what the worker carries */
    worker_pool_result_clear(&r);

    r = s_run(pool, 4, "fault", "{\"speed\":1}", 0.0, 0);
    assert_int_equal(r.outcome.status, PROTO_STATUS_INVALID);
    assert_non_null(strstr(r.outcome.error, "unknown parameter \"speed\""));
    worker_pool_result_clear(&r);

    s_assert_serves(pool, 5);
    worker_pool_destroy(&pool);
}

/* Slots run in parallel: two 300 ms sleeps on two slots end in well under
 * the 600 ms they would take in series. */
static void test_slots_run_in_parallel(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(2, 0);
    uint8_t genome[8];
    s_genome1(genome, 6.0);
    int64_t t0 = common_clock_ms();
    for (uint64_t id = 1; id <= 2; id++) {
        proto_job_t job = {.job_id = id, .plugin = "fault", .params = "{\"ms\":300}",
                           .genome_len = 8, .genome = genome};
        assert_int_equal(worker_pool_start(pool, &job), 0);
    }
    proto_job_t third = {.job_id = 3, .plugin = "fault", .params = "{}", .genome_len = 8,
                         .genome = genome};
    assert_int_equal(worker_pool_start(pool, &third), -1); /* no idle slot */
    unsigned got = 0;
    while (got < 2) {
        worker_pool_result_t r;
        while (worker_pool_take(pool, &r)) {
            assert_int_equal(r.outcome.status, PROTO_STATUS_OK);
            assert_true(r.outcome.fitness[0] == 6.0);
            assert_true(r.wall_us >= 300000);
            worker_pool_result_clear(&r);
            got++;
        }
        if (got < 2)
            worker_pool_wait(pool, 1000);
    }
    int64_t took = common_clock_ms() - t0;
    assert_true(took >= 300);
    assert_true(took < 550);
    worker_pool_destroy(&pool);
}

/* Unbounded allocation under an address-space limit ends the job (out of
 * memory: FAILED, or the process killed: CRASHED), never the worker. */
static void test_mem_limit(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(1, 256);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 4.0, 20000);
    assert_true(r.outcome.status == PROTO_STATUS_FAILED ||
                r.outcome.status == PROTO_STATUS_CRASHED);
    worker_pool_result_clear(&r);
#if !defined(__SANITIZE_ADDRESS__)
    /* AddressSanitizer cannot run under an address-space limit at all, so
     * only plain builds can show a limited child serving good jobs. */
    s_assert_serves(pool, 2);
#endif
    worker_pool_destroy(&pool);
}

/* Hands job_id (behaviour chosen by x0) to the pool without waiting. */
static void s_hand(worker_pool_t *pool, uint64_t job_id, double x0, uint32_t timeout_ms)
{
    uint8_t genome[8];
    s_genome1(genome, x0);
    proto_job_t job = {.job_id = job_id, .plugin = "fault", .params = "{}", .seed = 42,
                       .timeout_ms = timeout_ms, .genome_len = 8, .genome = genome};
    assert_int_equal(worker_pool_start(pool, &job), 0);
}

/* Collects n results into by_id[job_id] (ids 1..n), failing on a duplicate
 * or an unknown id. */
static void s_collect_n(worker_pool_t *pool, worker_pool_result_t *by_id, unsigned n)
{
    unsigned got = 0;
    int64_t until = common_clock_ms() + 60000;
    while (got < n) {
        worker_pool_result_t r;
        while (worker_pool_take(pool, &r)) {
            assert_true(r.outcome.job_id >= 1 && r.outcome.job_id <= n);
            assert_null(by_id[r.outcome.job_id].outcome.error); /* reported once */
            by_id[r.outcome.job_id] = r;
            got++;
        }
        assert_true(common_clock_ms() < until);
        if (got < n)
            worker_pool_wait(pool, 1000);
    }
    worker_pool_result_t extra;
    worker_pool_wait(pool, 100);
    assert_int_equal(worker_pool_take(pool, &extra), 0); /* nothing reported twice */
}

static void s_assert_ok(const worker_pool_result_t *r, double x0)
{
    assert_int_equal(r->outcome.status, PROTO_STATUS_OK);
    assert_int_equal(r->outcome.n_fitness, 1);
    assert_true(r->outcome.fitness[0] == x0); /* behaviour 0 returns x0 bit for bit */
}

/* One child holding a queue of eight jobs, two of which kill it (SIGSEGV,
 * then exit(3)): exactly those two are CRASHED, each naming its own cause,
 * and the six good ones are evaluated and reported once each, by the
 * respawned children. */
static void test_queue_crash_blames_only_the_running_job(void **state)
{
    (void)state;
    worker_pool_config_t config = {.slots = 1, .registry = s_registry, .queue_depth = 8};
    worker_pool_t *pool = worker_pool_new(&config);
    assert_non_null(pool);
    const double x0[9] = {0, 0.125, 0.25, 1.0, 0.375, 0.5, 7.0, 0.625, 0.75};
    for (uint64_t id = 1; id <= 8; id++)
        s_hand(pool, id, x0[id], 0);
    assert_int_equal(worker_pool_busy(pool), 8);
    assert_int_equal(worker_pool_idle(pool), 0); /* the one child's queue is full */
    worker_pool_result_t by_id[9];
    memset(by_id, 0, sizeof by_id);
    s_collect_n(pool, by_id, 8);
    for (uint64_t id = 1; id <= 8; id++) {
        if (id == 3) {
            assert_int_equal(by_id[id].outcome.status, PROTO_STATUS_CRASHED);
            assert_non_null(strstr(by_id[id].outcome.error, "signal 11 (SIGSEGV)"));
        } else if (id == 6) {
            assert_int_equal(by_id[id].outcome.status, PROTO_STATUS_CRASHED);
            assert_non_null(strstr(by_id[id].outcome.error, "exit status 3"));
        } else {
            s_assert_ok(&by_id[id], x0[id]);
        }
        worker_pool_result_clear(&by_id[id]);
    }
    assert_int_equal(worker_pool_busy(pool), 0);
    s_assert_serves(pool, 9);
    worker_pool_destroy(&pool);
}

/* A hang with three jobs queued behind it, all with a 1 s time-out: only the
 * hung one times out; the others wait more than their own 1 s in the queue
 * yet are not charged for it, since a deadline starts when the child starts
 * the job. */
static void test_queue_hang_times_out_only_the_hung_job(void **state)
{
    (void)state;
    worker_pool_config_t config = {.slots = 1, .registry = s_registry, .queue_depth = 8};
    worker_pool_t *pool = worker_pool_new(&config);
    assert_non_null(pool);
    const double x0[5] = {0, 0.125, 3.0, 0.25, 0.375};
    int64_t t0 = common_clock_ms();
    for (uint64_t id = 1; id <= 4; id++)
        s_hand(pool, id, x0[id], 1000);
    worker_pool_result_t by_id[5];
    memset(by_id, 0, sizeof by_id);
    s_collect_n(pool, by_id, 4);
    int64_t took = common_clock_ms() - t0;
    assert_true(took >= 1000);
    assert_true(took < 5000);
    for (uint64_t id = 1; id <= 4; id++) {
        if (id == 2) {
            assert_int_equal(by_id[id].outcome.status, PROTO_STATUS_TIMEOUT);
            assert_string_equal(by_id[id].outcome.error, "evaluation exceeded 1 s");
            assert_true(by_id[id].wall_us >= 1000000);
        } else {
            s_assert_ok(&by_id[id], x0[id]);
            assert_true(by_id[id].wall_us < 1000000);
        }
        worker_pool_result_clear(&by_id[id]);
    }
    s_assert_serves(pool, 5);
    worker_pool_destroy(&pool);
}

/* Cancel (the broker's CANCEL, a copy finished first): job 2 hangs in a
 * child that holds jobs 1, 3 and 4 too (its answer to job 1 may still be
 * batched inside it). Cancelling job 2 kills that child at once (long
 * before the 30 s deadline); job 2 is never reported, jobs 1, 3 and 4 are
 * answered once each (an unanswered one again by the new child); an id
 * the pool does not hold is refused. */
static void test_cancel_running_job(void **state)
{
    (void)state;
    worker_pool_config_t config = {.slots = 1, .registry = s_registry, .queue_depth = 8};
    worker_pool_t *pool = worker_pool_new(&config);
    assert_non_null(pool);
    const double x0[5] = {0, 0.125, 3.0, 0.25, 0.375};
    for (uint64_t id = 1; id <= 4; id++)
        s_hand(pool, id, x0[id], 30000);
    worker_pool_wait(pool, 300); /* job 1 is done by now and job 2 hangs */
    int64_t t0 = common_clock_ms();
    assert_int_equal(worker_pool_cancel(pool, 2), 0);
    assert_int_equal(worker_pool_cancel(pool, 99), -1);
    worker_pool_result_t by_id[5];
    memset(by_id, 0, sizeof by_id);
    unsigned got = 0;
    while (got < 3) {
        worker_pool_result_t r;
        while (worker_pool_take(pool, &r)) {
            uint64_t id = r.outcome.job_id;
            assert_true(id == 1 || id == 3 || id == 4);
            assert_null(by_id[id].outcome.error); /* once */
            by_id[id] = r;
            got++;
        }
        assert_true(common_clock_ms() - t0 < 5000);
        if (got < 3)
            worker_pool_wait(pool, 1000);
    }
    for (uint64_t id = 1; id <= 4; id++)
        if (id != 2) {
            s_assert_ok(&by_id[id], x0[id]);
            worker_pool_result_clear(&by_id[id]);
        }
    worker_pool_result_t extra;
    worker_pool_wait(pool, 100);
    assert_int_equal(worker_pool_take(pool, &extra), 0); /* job 2: nothing */
    s_assert_serves(pool, 5);
    worker_pool_destroy(&pool);
}

/* Adaptive depth: one job per child until an evaluation is measured, then
 * deep for a trivial plugin; jobs spread over both children. */
static void test_adaptive_depth(void **state)
{
    (void)state;
    worker_pool_t *pool = s_pool(2, 0);
    assert_int_equal(worker_pool_depth(pool), 1);
    worker_pool_result_t r = s_run(pool, 1, "fault", "{}", 0.5, 0);
    worker_pool_result_clear(&r);
    assert_true(worker_pool_depth(pool) > 1); /* behaviour 0 takes microseconds */
    unsigned depth = worker_pool_depth(pool);
    worker_pool_result_t *by_id = calloc(2 * depth + 1, sizeof *by_id);
    assert_non_null(by_id);
    for (uint64_t id = 1; id <= 2 * depth; id++)
        s_hand(pool, id, 0.5, 0);
    assert_int_equal(worker_pool_idle(pool), 0);
    proto_job_t more = {.job_id = 99, .plugin = "fault", .params = "{}", .genome_len = 0};
    assert_int_equal(worker_pool_start(pool, &more), -1); /* every queue is full */
    s_collect_n(pool, by_id, 2 * depth);
    for (uint64_t id = 1; id <= 2 * depth; id++) {
        s_assert_ok(&by_id[id], 0.5);
        worker_pool_result_clear(&by_id[id]);
    }
    free(by_id);
    worker_pool_destroy(&pool);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_segv_is_crashed),
        cmocka_unit_test(test_abort_is_crashed),
        cmocka_unit_test(test_hang_is_timeout),
        cmocka_unit_test(test_nan_is_failed),
        cmocka_unit_test(test_exit_is_crashed),
        cmocka_unit_test(test_plugin_errors_are_statuses),
        cmocka_unit_test(test_slots_run_in_parallel),
        cmocka_unit_test(test_mem_limit),
        cmocka_unit_test(test_queue_crash_blames_only_the_running_job),
        cmocka_unit_test(test_queue_hang_times_out_only_the_hung_job),
        cmocka_unit_test(test_adaptive_depth),
        cmocka_unit_test(test_cancel_running_job),
    };
    return cmocka_run_group_tests(tests, s_setup, s_teardown);
}
