/* test_worker_harvest.c: the idle-harvesting rules (worker/harvest.h):
 * --hours and --max-load parsing with their error sentences, windows that
 * wrap past midnight, the load hysteresis, and calibration's fixed loop. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "worker/calibrate.h"
#include "worker/harvest.h"

/* How the worker uses it: parse the flags, then ask once a second. */
static void test_usage_example(void **state)
{
    (void)state;
    int window[2];
    char err[256];
    assert_int_equal(
        worker_harvest_parse_hours("19:00-07:30", &window[0], &window[1], err, sizeof err), 0);
    assert_int_equal(window[0], 19 * 3600);
    assert_int_equal(window[1], 7 * 3600 + 30 * 60);
    worker_harvest_t h;
    assert_int_equal(worker_harvest_init(&h, 0, window, err, sizeof err), 0);
    assert_true(worker_harvest_enabled(&h));
    /* 12:00 local time today is outside 19:00-07:30. */
    time_t now = time(NULL);
    struct tm tm;
    localtime_r(&now, &tm);
    tm.tm_hour = 12, tm.tm_min = 0, tm.tm_sec = 0;
    char reason[128] = "";
    assert_int_equal(worker_harvest_check(&h, 0, mktime(&tm), reason, sizeof reason), 0);
    assert_string_equal(reason, "outside --hours 19:00-07:30 (local time)");
    tm.tm_hour = 23;
    assert_int_equal(worker_harvest_check(&h, 0, mktime(&tm), reason, sizeof reason), 1);
}

static void test_parse_hours(void **state)
{
    (void)state;
    int a = -1, b = -1;
    char err[256];
    assert_int_equal(worker_harvest_parse_hours("00:00-23:59:59", &a, &b, err, sizeof err), 0);
    assert_int_equal(a, 0);
    assert_int_equal(b, 86399);
    static const char *const bad[] = {
        "",       "7:00-9:00",      "24:00-01:00", "10:60-11:00",      "10:00", "10:00-11:00x",
        "10:00-", "10:00:61-11:00", "aa:bb-cc:dd", "10:00-11:00:00:00"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        err[0] = '\0';
        if (worker_harvest_parse_hours(bad[i], &a, &b, err, sizeof err) != -1)
            fail_msg("--hours \"%s\" was accepted", bad[i]);
        assert_non_null(strstr(err, "--hours needs START-END"));
    }
    assert_int_equal(worker_harvest_parse_hours("08:00-08:00", &a, &b, err, sizeof err), -1);
    assert_non_null(strstr(err, "starts and ends at the same time"));
}

static void test_window_wraps(void **state)
{
    (void)state;
    /* 22:00-06:00 wraps: in at 23:00 and 01:00, out at 12:00 and 06:00 (end excluded). */
    int s = 22 * 3600, e = 6 * 3600;
    assert_true(worker_harvest_in_window(s, e, 23 * 3600));
    assert_true(worker_harvest_in_window(s, e, 1 * 3600));
    assert_true(worker_harvest_in_window(s, e, 22 * 3600));
    assert_false(worker_harvest_in_window(s, e, 12 * 3600));
    assert_false(worker_harvest_in_window(s, e, 6 * 3600));
    /* 09:00-17:00 does not. */
    assert_true(worker_harvest_in_window(9 * 3600, 17 * 3600, 9 * 3600));
    assert_false(worker_harvest_in_window(9 * 3600, 17 * 3600, 17 * 3600));
    assert_false(worker_harvest_in_window(9 * 3600, 17 * 3600, 3 * 3600));
}

static void test_parse_load(void **state)
{
    (void)state;
    double v = 0;
    char err[256];
    assert_int_equal(worker_harvest_parse_load("1.5", &v, err, sizeof err), 0);
    assert_true(v == 1.5);
    static const char *const bad[] = {"0", "-1", "nan", "inf", "1e9", "", "2x", "0x"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        err[0] = '\0';
        if (worker_harvest_parse_load(bad[i], &v, err, sizeof err) != -1)
            fail_msg("--max-load \"%s\" was accepted", bad[i]);
        assert_non_null(strstr(err, "--max-load needs a load above 0"));
    }
}

static void s_write(const char *path, const char *text)
{
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
}

/* Pause above the ceiling, stay paused down to 3/4 of it, resume below;
 * our own running evaluations are not the owner's load. */
static void test_load_hysteresis(void **state)
{
    (void)state;
    char path[] = "/tmp/fitfarm-loadavg-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    setenv(WORKER_HARVEST_TEST_ENV, path, 1);
    worker_harvest_t h;
    char err[256], reason[160];
    s_write(path, "0.50 0.40 0.30 1/100 42\n");
    assert_int_equal(worker_harvest_init(&h, 2.0, NULL, err, sizeof err), 0);
    time_t now = time(NULL);
    assert_int_equal(worker_harvest_check(&h, 0, now, reason, sizeof reason), 1);
    s_write(path, "4.00 0.40 0.30 1/100 42\n");
    /* 4 with 2 of ours running: 2 from others, not above 2 */
    assert_int_equal(worker_harvest_check(&h, 2, now, reason, sizeof reason), 1);
    assert_int_equal(worker_harvest_check(&h, 1, now, reason, sizeof reason), 0);
    assert_non_null(strstr(reason, "load 3.00 from other processes, above --max-load 2"));
    s_write(path, "1.60 0.40 0.30 1/100 42\n"); /* below 2, above 1.5 */
    assert_int_equal(worker_harvest_check(&h, 0, now, reason, sizeof reason), 0);
    s_write(path, "1.50 0.40 0.30 1/100 42\n");
    assert_int_equal(worker_harvest_check(&h, 0, now, reason, sizeof reason), 1);
    /* An unreadable file keeps the last decision. */
    s_write(path, "garbage\n");
    assert_int_equal(worker_harvest_check(&h, 0, now, reason, sizeof reason), 1);
    /* A rule that cannot be honoured stops the start. */
    unlink(path);
    assert_int_equal(worker_harvest_init(&h, 2.0, NULL, err, sizeof err), -1);
    assert_non_null(strstr(err, "cannot read the load average"));
    unsetenv(WORKER_HARVEST_TEST_ENV);
}

/* The fixed loop is deterministic, and the calibration is fast and positive. */
static void test_calibration(void **state)
{
    (void)state;
    assert_true(worker_calibrate_kernel(1000) == worker_calibrate_kernel(1000));
    assert_true(worker_calibrate_kernel(1000) != worker_calibrate_kernel(1001));
    worker_calibration_t c;
    worker_calibrate(&c);
    assert_true(c.score > 0);
    assert_true(c.elapsed_us < 1000000);
    printf("calibration: score %.1f in %.1f ms\n", c.score, (double)c.elapsed_us / 1000.0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),   cmocka_unit_test(test_parse_hours),
        cmocka_unit_test(test_window_wraps),    cmocka_unit_test(test_parse_load),
        cmocka_unit_test(test_load_hysteresis), cmocka_unit_test(test_calibration),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
