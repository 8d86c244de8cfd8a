/* test_broker_timers.c: the broker's ordered timer heap (broker/timers.c):
 * firing order against a sorted reference (qsort), cancel, re-arm, and the
 * poll time-out. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>

#include <cmocka.h>

#include "broker/timers.h"

static int s_fired[1000];
static int s_n_fired;

static void s_record_cb(broker_timer_t *t, void *arg, int64_t now_ms)
{
    (void)t;
    (void)now_ms;
    s_fired[s_n_fired++] = *(int *)arg;
}

/* Usage example: a periodic tick that re-arms itself. */
static void s_tick_cb(broker_timer_t *t, void *arg, int64_t now_ms)
{
    broker_timers_t *timers = arg;
    s_n_fired++;
    broker_timers_arm(timers, t, now_ms + 100);
}

static void test_usage_example(void **state)
{
    (void)state;
    broker_timers_t timers;
    broker_timer_t tick;
    broker_timers_init(&timers);
    broker_timer_init(&tick, s_tick_cb, &timers);
    assert_int_equal(broker_timers_timeout(&timers, 0), -1); /* nothing armed: poll forever */
    broker_timers_arm(&timers, &tick, 100);
    assert_int_equal(broker_timers_timeout(&timers, 30), 70);
    s_n_fired = 0;
    assert_int_equal(broker_timers_run(&timers, 99), 0);
    assert_int_equal(broker_timers_run(&timers, 100), 1);
    assert_int_equal(s_n_fired, 1);
    assert_int_equal(broker_timers_timeout(&timers, 100), 100); /* re-armed at 200 */
    assert_int_equal(broker_timers_timeout(&timers, 500), 0);   /* overdue: poll returns at once */
    broker_timers_fini(&timers);
}

static int s_cmp_due(const void *a, const void *b)
{
    const int64_t *x = a, *y = b;
    if (x[0] != y[0])
        return x[0] < y[0] ? -1 : 1;
    return (x[1] > y[1]) - (x[1] < y[1]);
}

static void test_order_against_sort(void **state)
{
    (void)state;
    enum { N = 500 };
    static broker_timer_t t[N];
    static int ids[N];
    static int64_t ref[N][2]; /* due, id: reference order by qsort */
    broker_timers_t timers;
    broker_timers_init(&timers);
    uint64_t x = 12345;
    for (int i = 0; i < N; i++) {
        x = x * 6364136223846793005ull + 1442695040888963407ull; /* Knuth's MMIX LCG */
        ids[i] = i;
        broker_timer_init(&t[i], s_record_cb, &ids[i]);
        broker_timers_arm(&timers, &t[i], (int64_t)((x >> 33) % 10000));
    }
    /* cancel every 5th, re-arm every 7th later */
    int n_ref = 0;
    for (int i = 0; i < N; i++) {
        if (i % 5 == 0) {
            broker_timers_cancel(&timers, &t[i]);
            assert_false(broker_timer_armed(&t[i]));
            continue;
        }
        if (i % 7 == 0)
            broker_timers_arm(&timers, &t[i], t[i].due_ms + 20000);
        ref[n_ref][0] = t[i].due_ms;
        ref[n_ref][1] = (int64_t)t[i].order;
        n_ref++;
    }
    assert_true(broker_timers_check(&timers));
    qsort(ref, (size_t)n_ref, sizeof ref[0], s_cmp_due);
    s_n_fired = 0;
    assert_int_equal(broker_timers_run(&timers, 100000), n_ref);
    assert_int_equal(s_n_fired, n_ref);
    for (int k = 0; k < n_ref; k++) {
        int id = s_fired[k];
        assert_int_equal(t[id].due_ms, ref[k][0]);
        assert_int_equal((int64_t)t[id].order, ref[k][1]);
        assert_false(broker_timer_armed(&t[id]));
    }
    assert_int_equal(broker_timers_timeout(&timers, 0), -1);
    broker_timers_fini(&timers);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_order_against_sort),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
