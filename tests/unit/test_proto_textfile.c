/* test_proto_textfile.c: the shared small-text-file reader and line splitter
 * under proto/common/. Outside references: the kernel's own stat(2) size and
 * mode of each file the test writes, and the bytes the test wrote; the lines
 * expected from the splitter are spelled out by hand beside each input. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cmocka.h>
#include <sodium.h>

#include "proto/common/textfile.h"

/* Writes n bytes to a new temporary file with mode; returns its path (static). */
static const char *s_file(const char *text, size_t n, mode_t mode)
{
    static char path[64];
    snprintf(path, sizeof path, "/tmp/fitfarm-textfile-XXXXXX");
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    assert_int_equal(write(fd, text, n), (ssize_t)n);
    assert_int_equal(fchmod(fd, mode), 0);
    close(fd);
    return path;
}

typedef struct {
    char seen[512];
} s_lines_t;

static int s_collect(const char *line, size_t len, long number, void *arg, char *err, size_t errlen)
{
    s_lines_t *c = arg;
    size_t at = strlen(c->seen);
    snprintf(c->seen + at, sizeof c->seen - at, "%ld:%.*s|", number, (int)len, line);
    if (len == 4 && memcmp(line, "stop", 4) == 0) {
        snprintf(err, errlen, "line %ld: stop here", number);
        return -1;
    }
    return 0;
}

/* How a parser uses it: read the file whole, then take its content lines. */
static void test_usage_example(void **state)
{
    (void)state;
    const char text[] = "# a comment\n\n  name = value \r\nsecond\n";
    const char *path = s_file(text, sizeof text - 1, 0644);
    char *buf = NULL, err[256] = "";
    size_t len = 0;
    struct stat st;
    assert_int_equal(common_textfile_read(path, "demo file", 1024, COMMON_TEXTFILE_REGULAR, &buf,
                                          &len, &st, err, sizeof err),
                     0);
    struct stat ref;
    assert_int_equal(stat(path, &ref), 0);
    assert_int_equal(len, (size_t)ref.st_size); /* stat(2): the kernel's size */
    assert_int_equal(st.st_size, ref.st_size);
    assert_memory_equal(buf, text, len);
    assert_int_equal(buf[len], '\0');
    s_lines_t c = {""};
    assert_int_equal(common_textfile_lines(buf, len, 0, s_collect, &c, err, sizeof err), 0);
    /* By hand: line 1 comment, 2 blank, 3 trimmed of blanks and '\r', 4 as is. */
    assert_string_equal(c.seen, "3:name = value|4:second|");
    free(buf);
    unlink(path);
}

static void test_read_outcomes(void **state)
{
    (void)state;
    char *buf = NULL, err[256] = "";
    size_t len = 0;
    struct stat st;
    /* Missing: an error naming the file, or MISSING when allowed. */
    assert_int_equal(common_textfile_read("/nonexistent/fitfarm-x", "key file", 10, 0, &buf, &len,
                                          NULL, err, sizeof err),
                     -1);
    assert_string_equal(err, "cannot open key file /nonexistent/fitfarm-x: No such file or "
                             "directory");
    assert_int_equal(common_textfile_read("/nonexistent/fitfarm-x", NULL, 10,
                                          COMMON_TEXTFILE_MISSING_OK, &buf, &len, NULL, err,
                                          sizeof err),
                     COMMON_TEXTFILE_MISSING);
    assert_null(buf);
    /* Not regular: refused only when asked; /dev/null reads as empty otherwise. */
    assert_int_equal(common_textfile_read("/dev/null", NULL, 10, COMMON_TEXTFILE_REGULAR, &buf,
                                          &len, NULL, err, sizeof err),
                     -1);
    assert_string_equal(err, "/dev/null is not a regular file");
    assert_int_equal(
        common_textfile_read("/dev/null", NULL, 10, 0, &buf, &len, NULL, err, sizeof err), 0);
    assert_int_equal(len, 0);
    free(buf);
    /* Exactly the cap is fine; one byte more is TOO_LONG with cap + 1 bytes. */
    const char *path = s_file("0123456789A", 11, 0600);
    assert_int_equal(common_textfile_read(path, NULL, 11, 0, &buf, &len, NULL, err, sizeof err), 0);
    assert_int_equal(len, 11);
    free(buf);
    assert_int_equal(common_textfile_read(path, NULL, 10, 0, &buf, &len, NULL, err, sizeof err),
                     COMMON_TEXTFILE_TOO_LONG);
    assert_int_equal(len, 11);
    assert_memory_equal(buf, "0123456789A", 11);
    free(buf);
    /* A secret others may read is not read; a private one is, in secure memory. */
    assert_int_equal(chmod(path, 0640), 0);
    assert_int_equal(common_textfile_read(path, NULL, 64, COMMON_TEXTFILE_SECRET, &buf, &len, &st,
                                          err, sizeof err),
                     COMMON_TEXTFILE_EXPOSED);
    assert_null(buf);
    assert_int_equal(st.st_mode & 0777, 0640); /* the mode chmod(2) set */
    assert_int_equal(chmod(path, 0600), 0);
    assert_int_equal(common_textfile_read(path, NULL, 64, COMMON_TEXTFILE_SECRET, &buf, &len, &st,
                                          err, sizeof err),
                     0);
    assert_string_equal(buf, "0123456789A");
    sodium_free(buf);
    unlink(path);
}

static void test_lines_rules(void **state)
{
    (void)state;
    char err[256] = "";
    s_lines_t c = {""};
    /* By hand: "\t# c" is a comment after trimming; " \r" is blank; no final
     * newline still ends line 5; the callback's error stops the split. */
    const char text[] = "a\n\t# c\n \r\n b \t\nstop\nnever";
    assert_int_equal(
        common_textfile_lines(text, sizeof text - 1, 0, s_collect, &c, err, sizeof err), -1);
    assert_string_equal(c.seen, "1:a|4:b|5:stop|");
    assert_string_equal(err, "line 5: stop here");
    /* Control characters: refused per line before trimming, comments too, a
     * final '\r' allowed, and only under the flag. */
    const char ctl[] = "ok\r\n# bell \a\n";
    memset(&c, 0, sizeof c);
    assert_int_equal(common_textfile_lines(ctl, sizeof ctl - 1, COMMON_TEXTFILE_NO_CONTROLS,
                                           s_collect, &c, err, sizeof err),
                     -1);
    assert_string_equal(err, "line 2: a control character");
    memset(&c, 0, sizeof c);
    assert_int_equal(common_textfile_lines(ctl, sizeof ctl - 1, 0, s_collect, &c, err, sizeof err),
                     0);
    assert_string_equal(c.seen, "1:ok|");
    /* The file's name goes before a parser's sentence. */
    snprintf(err, sizeof err, "line 3: bad");
    common_textfile_prefix(err, sizeof err, "config file", "/x/c");
    assert_string_equal(err, "config file /x/c: line 3: bad");
    snprintf(err, sizeof err, "line 3: bad");
    common_textfile_prefix(err, sizeof err, NULL, "/x/a");
    assert_string_equal(err, "/x/a: line 3: bad");
}

int main(void)
{
    if (sodium_init() < 0)
        return 1;
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_read_outcomes),
        cmocka_unit_test(test_lines_rules),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
