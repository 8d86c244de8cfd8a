/* test_worker_credits.c: the worker's prefetch depth (worker/credits.h).
 * The expected depths follow the rule in DEVELOPERS.md ("Prefetch"):
 * slots x (1 + rtt / median evaluation time), the extra part rounded up
 * (none where round trips cost under 1 %), at least slots, at most
 * slots x 64, slots x 4 until measured. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "worker/credits.h"

/* Usage: grant what want() says, note arrivals and evaluation times. */
static void test_usage_example(void **state)
{
    (void)state;
    worker_credits_t c;
    worker_credits_init(&c, 2);
    assert_int_equal(worker_credits_want(&c, 0), 8); /* 2 slots x 4 before any measurement */
    worker_credits_granted(&c, 8, 1000);
    assert_int_equal(worker_credits_want(&c, 0), 0); /* all granted, none arrived */
    worker_credits_jobs(&c, 8, 1300);                /* round trip 300 us */
    assert_int_equal(worker_credits_rtt_us(&c), 300);
    assert_int_equal(worker_credits_want(&c, 8), 0); /* 8 in hand */
}

/* The depth once a full window of evaluations took wall_us each. */
static uint32_t s_target_after(worker_credits_t *c, int64_t wall_us)
{
    for (int i = 0; i < WORKER_CREDITS_SAMPLES; i++)
        worker_credits_eval(c, wall_us);
    return worker_credits_target(c);
}

static void test_depth_follows_times(void **state)
{
    (void)state;
    worker_credits_t c;
    worker_credits_init(&c, 4);
    worker_credits_granted(&c, 16, 0);
    worker_credits_jobs(&c, 16, 1000); /* rtt 1 ms */
    /* Evaluations of 1 ms: 4 x (1 + 1) = 8. */
    assert_int_equal(s_target_after(&c, 1000), 8);
    /* Evaluations of 5 ms: 4 x 1/5 of a job rounds up to one in reserve. */
    assert_int_equal(s_target_after(&c, 5000), 5);
    /* Evaluations of 0.5 s: the round trips cost under 1 % (4 ms of 500),
     * so no reserve. */
    assert_int_equal(s_target_after(&c, 500000), 4);
    /* Evaluations of 10 s: one per slot. */
    assert_int_equal(s_target_after(&c, 10000000), 4);
    /* Trivial evaluations (1 us): bounded at 4 x 64. */
    assert_int_equal(s_target_after(&c, 1), 256);
    assert_int_equal(worker_credits_want(&c, 100), 156);
}

/* The median ignores a few outliers; the round trip is the minimum of recent
 * samples, so a grant that waited on an empty queue does not inflate it. */
static void test_robust_estimates(void **state)
{
    (void)state;
    worker_credits_t c;
    worker_credits_init(&c, 1);
    for (int i = 0; i < 28; i++)
        worker_credits_eval(&c, 2000);
    for (int i = 0; i < 3; i++)
        worker_credits_eval(&c, 60000000);
    assert_int_equal(worker_credits_median_eval_us(&c), 2000);
    worker_credits_granted(&c, 1, 0);
    worker_credits_jobs(&c, 1, 500);
    worker_credits_granted(&c, 1, 1000);
    worker_credits_jobs(&c, 1, 9001000); /* the broker had nothing for 9 s */
    assert_int_equal(worker_credits_rtt_us(&c), 500);
    /* 1 x (1 + 500/2000): the extra part rounds up, one job in reserve. */
    assert_int_equal(worker_credits_target(&c), 2);
}

/* After REHELLO the broker holds no credits of ours: grant the capacity not
 * held again. */
static void test_reset_regrants(void **state)
{
    (void)state;
    worker_credits_t c;
    worker_credits_init(&c, 2);
    worker_credits_granted(&c, 8, 0);
    worker_credits_jobs(&c, 3, 100);
    assert_int_equal(worker_credits_want(&c, 3), 0); /* 3 held + 5 outstanding */
    worker_credits_reset(&c);
    assert_int_equal(worker_credits_want(&c, 3), 5);
}

/* Jobs per child process: 1 until measured; 1000 us of work over the median
 * evaluation time, rounded down, within [1, 32]. Expected values worked out
 * by hand from that rule (credits.h). */
static void test_child_depth(void **state)
{
    (void)state;
    worker_credits_t c;
    worker_credits_init(&c, 2);
    assert_int_equal(worker_credits_child_depth(&c), 1); /* nothing measured */
    for (int i = 0; i < 31; i++)
        worker_credits_eval(&c, 10); /* 1000 / 10 = 100, capped */
    assert_int_equal(worker_credits_child_depth(&c), WORKER_CREDITS_CHILD_DEPTH_MAX);
    for (int i = 0; i < 31; i++)
        worker_credits_eval(&c, 300); /* 1000 / 300 = 3.33 */
    assert_int_equal(worker_credits_child_depth(&c), 3);
    for (int i = 0; i < 31; i++)
        worker_credits_eval(&c, 600); /* 1000 / 600 < 2 */
    assert_int_equal(worker_credits_child_depth(&c), 1);
    for (int i = 0; i < 31; i++)
        worker_credits_eval(&c, 5000000); /* a 5 s plugin: one job per child */
    assert_int_equal(worker_credits_child_depth(&c), 1);
    /* The median decides: 15 slow outliers among 31 do not make it shallow. */
    for (int i = 0; i < 16; i++)
        worker_credits_eval(&c, 50);
    assert_int_equal(worker_credits_child_depth(&c), 20);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),    cmocka_unit_test(test_depth_follows_times),
        cmocka_unit_test(test_robust_estimates), cmocka_unit_test(test_reset_regrants),
        cmocka_unit_test(test_child_depth),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
