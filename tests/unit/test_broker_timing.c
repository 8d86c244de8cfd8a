/* test_broker_timing.c: the running medians of broker/timing.h. Expected
 * values are numpy.median's (numpy.org, numpy.median: the average of the
 * two middle values for an even count); the two marked below were computed
 * with Debian's python3-numpy (0.5 and 0.375). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <math.h>

#include <cmocka.h>

#include "broker/timing.h"

static void test_median_odd_even(void **state)
{
    (void)state;
    broker_timing_t t = {0};
    assert_true(broker_timing_median(&t, 1) == -1); /* nothing yet */
    broker_timing_add(&t, 0.5);
    broker_timing_add(&t, 0.125);
    broker_timing_add(&t, 2.0);
    /* numpy.median([0.5, 0.125, 2.0]) == 0.5 */
    assert_true(broker_timing_median(&t, 1) == 0.5);
    assert_true(broker_timing_median(&t, 5) == -1); /* fewer than asked for */
    broker_timing_add(&t, 0.25);
    /* numpy.median([0.5, 0.125, 2.0, 0.25]) == 0.375 */
    assert_true(broker_timing_median(&t, 4) == 0.375);
}

/* One evaluation that hung does not move the median (why timing.h keeps a
 * median); bad figures from a worker are ignored. */
static void test_outlier_and_bad_values(void **state)
{
    (void)state;
    broker_timing_t t = {0};
    for (int i = 0; i < 10; i++)
        broker_timing_add(&t, 0.02);
    broker_timing_add(&t, 3600.0);
    broker_timing_add(&t, NAN);
    broker_timing_add(&t, -1.0);
    broker_timing_add(&t, INFINITY);
    broker_timing_add(&t, 1e9);
    assert_int_equal(t.n, 11);
    assert_true(fabs(broker_timing_median(&t, 1) - 0.02) < 1e-9); /* float storage */
}

/* The ring keeps the last BROKER_TIMING_SAMPLES: after 31 slow samples and
 * then 31 fast ones, only the fast ones count. */
static void test_window(void **state)
{
    (void)state;
    broker_timing_t t = {0};
    for (int i = 0; i < BROKER_TIMING_SAMPLES; i++)
        broker_timing_add(&t, 1.0);
    for (int i = 0; i < BROKER_TIMING_SAMPLES; i++)
        broker_timing_add(&t, 0.25);
    assert_int_equal(t.n, BROKER_TIMING_SAMPLES);
    assert_true(broker_timing_median(&t, 1) == 0.25);
    broker_timing_add(&t, 1.0); /* 30 of 0.25 and one 1.0: still 0.25 */
    assert_true(broker_timing_median(&t, 1) == 0.25);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_median_odd_even),
        cmocka_unit_test(test_outlier_and_bad_values),
        cmocka_unit_test(test_window),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
