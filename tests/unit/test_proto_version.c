/* test_proto_version.c: plugin version order, version constraints and
 * plugin references (proto/version.h).
 *
 * The order is Debian's version comparison for the upstream part (Debian
 * Policy Manual, 5.6.12 "Version"; dpkg's verrevcmp): the Policy's own
 * example ordering ~~ < ~~a < ~ < (empty) < a, and numeric runs compared as
 * numbers (common practice for dotted versions: 1.9 < 1.10). Every pair
 * below is also checked against `dpkg --compare-versions` when dpkg is
 * installed (a Debian machine), an implementation outside the project (no
 * pair has a hyphen or colon, which dpkg reads as revision and epoch); the
 * test says when it could not run it. The constraint rule (V == C, or V
 * starts with C and '.') is ours and is checked case by case. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cmocka.h>

#include "proto/limits.h"
#include "proto/version.h"

static int s_sign(int x)
{
    return (x > 0) - (x < 0);
}

/* Usage: pick the highest version a constraint matches. */
static void test_usage_example(void **state)
{
    (void)state;
    const char *known[] = {"1.2", "1.10", "1.9", "2.0", "10"};
    const char *best = NULL;
    for (size_t i = 0; i < sizeof known / sizeof *known; i++)
        if (proto_version_matches(known[i], "1") &&
            (!best || proto_version_cmp(known[i], best) > 0))
            best = known[i];
    assert_string_equal(best, "1.10");
}

/* a < b for each pair (the expected sign is -1). */
static const char *const s_ordered[][2] = {
    {"1.0", "2.0"},      {"1.9", "1.10"},      {"1.2", "1.10"},       {"1.2", "1.2.0"},
    {"1.2.3", "1.2.10"}, {"0.9", "1"},         {"1.0~rc1", "1.0"},    {"1.0~~", "1.0~"},
    {"1.0~~", "1.0~~a"}, {"1.0~~a", "1.0~"},   {"1.0~", "1.0"},       {"1.0", "1.0a"},
    {"1.0a", "1.0b"},    {"1.0a", "1.0+"},     {"1.0", "1.0.1"},      {"2", "10"},
    {"1.99999999999999999999", "1.100000000000000000000"}, /* past 64 bits */
    {"3.2beta", "3.2.0"}, {"1a", "1.0"},
};

/* Pairs that order as equal although the strings differ. */
static const char *const s_equal[][2] = {
    {"1.02", "1.2"}, {"1.0", "1.00"}, {"007", "7"}, {"1.2.3", "1.2.3"},
};

static void test_order(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof s_ordered / sizeof *s_ordered; i++) {
        if (proto_version_cmp(s_ordered[i][0], s_ordered[i][1]) >= 0 ||
            proto_version_cmp(s_ordered[i][1], s_ordered[i][0]) <= 0)
            fail_msg("expected %s < %s", s_ordered[i][0], s_ordered[i][1]);
    }
    for (size_t i = 0; i < sizeof s_equal / sizeof *s_equal; i++)
        if (proto_version_cmp(s_equal[i][0], s_equal[i][1]) != 0)
            fail_msg("expected %s == %s in order", s_equal[i][0], s_equal[i][1]);
}

/* The Policy's example: ~~ < ~~a < ~ < (empty) < a, after a common "1.0". */
static void test_policy_tilde_example(void **state)
{
    (void)state;
    const char *seq[] = {"1.0~~", "1.0~~a", "1.0~", "1.0", "1.0a"};
    for (size_t i = 0; i + 1 < sizeof seq / sizeof *seq; i++)
        assert_true(proto_version_cmp(seq[i], seq[i + 1]) < 0);
}

/* dpkg --compare-versions A OP B: 1 true, 0 false, -1 could not run. */
static int s_dpkg(const char *a, const char *op, const char *b)
{
    pid_t pid = fork();
    if (pid < 0)
        return -1;
    if (pid == 0) {
        /* dpkg warns on stderr about versions it finds odd; not our check. */
        if (!freopen("/dev/null", "w", stderr))
            _exit(126);
        execl("/usr/bin/dpkg", "dpkg", "--compare-versions", a, op, b, (char *)NULL);
        _exit(127);
    }
    int st = 0;
    if (waitpid(pid, &st, 0) != pid || !WIFEXITED(st) || WEXITSTATUS(st) > 1)
        return -1;
    return WEXITSTATUS(st) == 0;
}

static void test_order_matches_dpkg(void **state)
{
    (void)state;
    if (access("/usr/bin/dpkg", X_OK) != 0) {
        print_message("dpkg is not installed: the cross-check against it was not run\n");
        skip();
    }
    size_t checked = 0;
    for (size_t i = 0; i < sizeof s_ordered / sizeof *s_ordered; i++) {
        const char *a = s_ordered[i][0], *b = s_ordered[i][1];
        int lt = s_dpkg(a, "lt", b);
        assert_int_not_equal(lt, -1);
        if (lt != (proto_version_cmp(a, b) < 0))
            fail_msg("dpkg says %s lt %s is %d, we say %d", a, b, lt,
                     s_sign(proto_version_cmp(a, b)));
        checked++;
    }
    for (size_t i = 0; i < sizeof s_equal / sizeof *s_equal; i++) {
        int eq = s_dpkg(s_equal[i][0], "eq", s_equal[i][1]);
        assert_int_equal(eq, 1);
        checked++;
    }
    assert_int_equal(checked, sizeof s_ordered / sizeof *s_ordered +
                                  sizeof s_equal / sizeof *s_equal);
}

static void test_matches(void **state)
{
    (void)state;
    assert_true(proto_version_matches("1", "1"));
    assert_true(proto_version_matches("1.2", "1"));
    assert_true(proto_version_matches("1.2.3", "1"));
    assert_true(proto_version_matches("1.2.3", "1.2"));
    assert_true(proto_version_matches("1.2.3", "1.2.3"));
    assert_false(proto_version_matches("10", "1"));
    assert_false(proto_version_matches("1a", "1"));
    assert_false(proto_version_matches("1-2", "1"));
    assert_false(proto_version_matches("1.2", "1.2.3"));
    assert_false(proto_version_matches("1.20", "1.2"));
    assert_false(proto_version_matches("2.0", "1"));
    assert_false(proto_version_matches("1.2", "")); /* empty matches nothing */
    /* Bytewise, not by order: 1.02 is not 1.2 here. */
    assert_false(proto_version_matches("1.02", "1.2"));
}

static void test_ref_split(void **state)
{
    (void)state;
    char name[PROTO_MAX_NAME_BYTES + 1], err[256];
    const char *c = (const char *)1;
    assert_int_equal(proto_plugin_ref_split("granular", name, sizeof name, &c, err, sizeof err),
                     0);
    assert_string_equal(name, "granular");
    assert_null(c);
    assert_int_equal(proto_plugin_ref_split("granular@1.2", name, sizeof name, &c, err,
                                            sizeof err), 0);
    assert_string_equal(name, "granular");
    assert_string_equal(c, "1.2");
    /* Refusals name what was wrong. */
    assert_int_equal(proto_plugin_ref_split("granular@", name, sizeof name, &c, err, sizeof err),
                     -1);
    assert_non_null(strstr(err, "empty"));
    assert_int_equal(proto_plugin_ref_split("@1", name, sizeof name, &c, err, sizeof err), -1);
    assert_non_null(strstr(err, "no name"));
    assert_int_equal(proto_plugin_ref_split("gran ular", name, sizeof name, &c, err, sizeof err),
                     -1);
    assert_non_null(strstr(err, "[a-z0-9_-]"));
    assert_int_equal(proto_plugin_ref_split("granular@1 2", name, sizeof name, &c, err,
                                            sizeof err), -1);
    assert_non_null(strstr(err, "blank or non-printable"));
    assert_int_equal(proto_plugin_ref_split("granular@1\x01", name, sizeof name, &c, err,
                                            sizeof err), -1);
    assert_int_equal(proto_plugin_ref_split("", name, sizeof name, &c, err, sizeof err), -1);
    /* Bounds: a name of 127 characters is the longest. */
    char longname[PROTO_MAX_NAME_BYTES + 8];
    memset(longname, 'a', PROTO_MAX_NAME_BYTES - 1);
    longname[PROTO_MAX_NAME_BYTES - 1] = '\0';
    assert_int_equal(proto_plugin_ref_split(longname, name, sizeof name, &c, err, sizeof err), 0);
    longname[PROTO_MAX_NAME_BYTES - 1] = 'a';
    longname[PROTO_MAX_NAME_BYTES] = '\0';
    assert_int_equal(proto_plugin_ref_split(longname, name, sizeof name, &c, err, sizeof err), -1);
    assert_non_null(strstr(err, "longer than"));
    /* '@' is a version character too: only the first one splits. */
    assert_int_equal(proto_plugin_ref_split("p@1@x", name, sizeof name, &c, err, sizeof err), 0);
    assert_string_equal(c, "1@x");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_order),
        cmocka_unit_test(test_policy_tilde_example),
        cmocka_unit_test(test_order_matches_dpkg),
        cmocka_unit_test(test_matches),
        cmocka_unit_test(test_ref_split),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
