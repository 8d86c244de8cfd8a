/* test_proto_common.c: the small shared helpers under proto/common/: the log
 * line format and level, the aborting allocators, the clocks, the lifeline
 * pipe. The outside references: ISO 8601 / RFC 3339 for the timestamp (checked against the C
 * library's own gmtime_r/strftime of time()), POSIX's SIGABRT for abort, and
 * POSIX read() returning 0 at end of file on a pipe with no writer. */
#include <setjmp.h>
#include <signal.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <fcntl.h>
#include <string.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "proto/common/alloc.h"
#include "proto/common/clock.h"
#include "proto/common/fdlimit.h"
#include "proto/common/lifeline.h"
#include "proto/common/log.h"

/* Runs fn in a child with stderr sent to a file; returns what it wrote (caller
 * frees) and the child's wait status in *status. */
static char *s_capture_stderr(void (*fn)(void), int *status)
{
    char path[] = "/tmp/fitfarm-log-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    fflush(stderr);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        dup2(fd, 2);
        fn();
        fflush(stderr);
        _exit(0);
    }
    assert_int_equal(waitpid(pid, status, 0), pid);
    char *buf = calloc(1, 8192);
    ssize_t n = pread(fd, buf, 8191, 0);
    assert_true(n >= 0);
    close(fd);
    unlink(path);
    return buf;
}

static void s_log_usage(void)
{
    common_log_set_tag("broker");
    LOG_INFO("worker %s joined with %d slots", "w1", 8);
}

/* How a daemon logs: one line, time, level, tag, function, text. */
static void test_usage_example(void **state)
{
    (void)state;
    int status;
    time_t before = time(NULL);
    char *out = s_capture_stderr(s_log_usage, &status);
    time_t after = time(NULL);
    assert_true(WIFEXITED(status));
    /* 2026-12-02T10:11:12.345Z INFO  broker s_log_usage: worker w1 joined with 8 slots */
    const char *rest = strchr(out, ' ');
    assert_non_null(rest);
    assert_string_equal(rest, " INFO  broker s_log_usage: worker w1 joined with 8 slots\n");
    /* the timestamp is RFC 3339 UTC with milliseconds, and it is now */
    assert_int_equal(rest - out, 24);
    assert_true(out[10] == 'T' && out[19] == '.' && out[23] == 'Z');
    char want_a[32], want_b[32];
    struct tm tm;
    strftime(want_a, sizeof want_a, "%Y-%m-%dT%H:%M:%S", gmtime_r(&before, &tm));
    strftime(want_b, sizeof want_b, "%Y-%m-%dT%H:%M:%S", gmtime_r(&after, &tm));
    assert_true(strncmp(out, want_a, 19) == 0 || strncmp(out, want_b, 19) == 0);
    free(out);
}

static void s_log_levels(void)
{
    /* FITFARM_LOG=warn read at the first call */
    setenv("FITFARM_LOG", "warn", 1);
    LOG_DEBUG("dropped debug");
    LOG_INFO("dropped info");
    LOG_WARN("kept warn\n"); /* the caller's newline is not doubled */
    LOG_ERROR("kept error");
    common_log_set_level(COMMON_LOG_DEBUG);
    LOG_DEBUG("kept debug");
}

static void test_levels(void **state)
{
    (void)state;
    int status;
    char *out = s_capture_stderr(s_log_levels, &status);
    assert_null(strstr(out, "dropped"));
    assert_non_null(strstr(out, "WARN  s_log_levels: kept warn\n"));
    assert_non_null(strstr(out, "ERROR s_log_levels: kept error\n"));
    assert_non_null(strstr(out, "DEBUG s_log_levels: kept debug\n"));
    int lines = 0;
    for (const char *p = out; *p; p++)
        lines += *p == '\n';
    assert_int_equal(lines, 3);
    free(out);
}

static void s_overflow(void)
{
    (void)common_xcalloc(SIZE_MAX / 2, 4);
}

static void s_realloc_overflow(void)
{
    (void)common_xrealloc(NULL, 3, SIZE_MAX / 2);
}

/* n * size past SIZE_MAX aborts with a message instead of wrapping around to
 * a small allocation. */
static void test_alloc_overflow_aborts(void **state)
{
    (void)state;
    void (*fns[])(void) = {s_overflow, s_realloc_overflow};
    for (int i = 0; i < 2; i++) {
        int status;
        char *out = s_capture_stderr(fns[i], &status);
        assert_true(WIFSIGNALED(status));
        assert_int_equal(WTERMSIG(status), SIGABRT);
        assert_non_null(strstr(out, "out of memory or overflow"));
        free(out);
    }
}

static void test_alloc_works(void **state)
{
    (void)state;
    int *v = common_xcalloc(10, sizeof *v);
    for (int i = 0; i < 10; i++)
        assert_int_equal(v[i], 0);
    v = common_xrealloc(v, 1000, sizeof *v);
    v[999] = 7;
    free(v);
    char *s = common_xstrdup("genome");
    assert_string_equal(s, "genome");
    free(s);
    uint8_t *m = common_xmemdup("\x01\x00\x02", 3);
    assert_memory_equal(m, "\x01\x00\x02", 3);
    free(m);
    free(common_xmalloc(0)); /* a valid, freeable pointer */
    free(common_xmemdup(NULL, 0));
}

static void test_clocks(void **state)
{
    (void)state;
    int64_t ms0 = common_clock_ms(), us0 = common_clock_us();
    struct timespec nap = {0, 20 * 1000 * 1000};
    nanosleep(&nap, NULL);
    int64_t ms1 = common_clock_ms(), us1 = common_clock_us();
    assert_true(ms1 - ms0 >= 20 && ms1 - ms0 < 5000);
    assert_true(us1 - us0 >= 20000);
    /* wall clock agrees with time() to a second */
    int64_t wall = common_wall_ms();
    time_t now = time(NULL);
    assert_true(wall / 1000 >= (int64_t)now - 1 && wall / 1000 <= (int64_t)now + 1);
}

/* The lifeline: live while its write end is open anywhere, gone (end of
 * file, as POSIX pipes report) once the last write end closes; bad values of
 * --lifeline-fd refused. */
static void test_lifeline(void **state)
{
    (void)state;
    char err[128];
    assert_int_equal(common_lifeline_open("2", err, sizeof err), -1); /* stdio */
    assert_int_equal(common_lifeline_open("3x", err, sizeof err), -1);
    assert_int_equal(common_lifeline_open("1024", err, sizeof err), -1);
    int fds[2];
    assert_int_equal(pipe(fds), 0);
    int r = fcntl(fds[0], F_DUPFD, 10);
    close(fds[0]);
    char text[16];
    snprintf(text, sizeof text, "%d", r);
    assert_int_equal(common_lifeline_open(text, err, sizeof err), r);
    assert_int_equal(common_lifeline_gone(r), 0); /* never blocks */
    assert_int_equal(write(fds[1], "x", 1), 1);   /* stray bytes are not a death */
    assert_int_equal(common_lifeline_gone(r), 0);
    close(fds[1]);
    assert_int_equal(common_lifeline_gone(r), 1);
    close(r);
    snprintf(text, sizeof text, "%d", r); /* now closed */
    assert_int_equal(common_lifeline_open(text, err, sizeof err), -1);
}

/* In a child: opens descriptors at 20, 21, 22 and 1000, calls
 * common_fdlimit_close_from(3, keep), and exits with a bit per descriptor
 * of {0, 1, 2, 3, 20, 21, 22, 1000} still open (3 is /dev/null, opened
 * first). */
static int s_open_after_close_from(int keep)
{
    pid_t pid = fork();
    if (pid == 0) {
        int fd = open("/dev/null", O_RDONLY);
        if (fd != 3 && (fd < 0 || dup2(fd, 3) != 3))
            _exit(255);
        const int at[] = {20, 21, 22, 1000};
        for (int i = 0; i < 4; i++)
            if (fd < 0 || fcntl(fd, F_DUPFD, at[i]) != at[i])
                _exit(255);
        common_fdlimit_close_from(3, keep, common_fdlimit_close_max());
        const int check[] = {0, 1, 2, 3, 20, 21, 22, 1000};
        int bits = 0;
        for (int i = 0; i < 8; i++)
            if (fcntl(check[i], F_GETFD) != -1)
                bits |= 1 << i;
        _exit(bits);
    }
    int st = 0;
    assert_true(pid > 0 && waitpid(pid, &st, 0) == pid && WIFEXITED(st));
    return WEXITSTATUS(st);
}

/* Closing inherited descriptors before a child runs other code: stdio and
 * the one kept stay, every other from 3 up goes, including one far above the
 * others (close_range(2) takes a range, not a list of open ones). */
static void test_close_from(void **state)
{
    (void)state;
    const int stdio = 1 | 2 | 4;
    assert_int_equal(s_open_after_close_from(-1), stdio);
    assert_int_equal(s_open_after_close_from(21), stdio | 32);
    assert_int_equal(s_open_after_close_from(1000), stdio | 128);
    assert_int_equal(s_open_after_close_from(3), stdio | 8); /* keep == from */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_levels),
        cmocka_unit_test(test_alloc_overflow_aborts),
        cmocka_unit_test(test_alloc_works),
        cmocka_unit_test(test_clocks),
        cmocka_unit_test(test_lifeline),
        cmocka_unit_test(test_close_from),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
