/* test_proto_params.c: canonical plugin parameters and round-trip printing of
 * doubles (proto/params.h). The outside references: RFC 8259 (what JSON
 * is), IEEE 754-2008 5.12.2 (17 significant digits identify a binary64 value,
 * so strtod of the text gives back the same bits), and Python's json module
 * with sort_keys/separators for the canonical form of a sample. */
#include <float.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "fitfarm_rng.h"
#include "proto/limits.h"
#include "proto/params.h"

static char *s_canon(const char *text)
{
    char *out = NULL;
    char err[256];
    if (proto_params_canonical(text, &out, err, sizeof err) != 0)
        fail_msg("canonical(%s) failed: %s", text, err);
    return out;
}

/* Must be refused; returns the message for the caller to check. */
static void s_refused(const char *text, const char *want)
{
    char *out = (char *)(uintptr_t)1;
    char err[256];
    assert_int_equal(proto_params_canonical(text, &out, err, sizeof err), -1);
    assert_null(out);
    if (!strstr(err, want))
        fail_msg("error \"%s\" does not mention \"%s\"", err, want);
}

/* ---- usage example ------------------------------------------------------ */

/* How the client turns a user's params into the text that goes into keys. */
static void test_usage_example(void **state)
{
    (void)state;
    char *canonical = NULL;
    char err[200];
    int rc = proto_params_canonical("{ \"n\": 30, \"dt\": 0.5 }", &canonical, err, sizeof err);
    assert_int_equal(rc, 0);
    assert_string_equal(canonical, "{\"dt\":0.5,\"n\":30}");
    free(canonical);

    char num[32];
    proto_format_double(0.1, num); /* 17 digits: parses back to the same double */
    assert_string_equal(num, "0.10000000000000001");
}

static void test_equal_forms(void **state)
{
    (void)state;
    char *a = s_canon("{\"n\":30}");
    char *b = s_canon("{ \"n\" : 30 }");
    char *c = s_canon("\n{\n\t\"n\":\n30\n}\n");
    assert_string_equal(a, b);
    assert_string_equal(a, c);
    free(a), free(b), free(c);

    a = s_canon("{\"b\":1,\"a\":2}");
    b = s_canon("{\"a\":2,\"b\":1}");
    assert_string_equal(a, b);
    assert_string_equal(a, "{\"a\":2,\"b\":1}");
    free(a), free(b);

    /* nested objects are sorted too; arrays keep their order */
    a = s_canon("{\"z\":{\"y\":[3,1,2],\"x\":null},\"a\":[true,false]}");
    assert_string_equal(a, "{\"a\":[true,false],\"z\":{\"x\":null,\"y\":[3,1,2]}}");
    free(a);

    /* non-ASCII written raw or escaped gives one form */
    a = s_canon("{\"name\":\"caf\xc3\xa9\"}");
    b = s_canon("{\"name\":\"caf\\u00e9\"}");
    assert_string_equal(a, b);
    /* jansson writes \uXXXX with upper-case hex (RFC 8259 allows either) */
    assert_string_equal(a, "{\"name\":\"caf\\u00E9\"}");
    free(a), free(b);

    /* NULL and "" mean no parameters */
    a = s_canon(NULL);
    b = s_canon("");
    assert_string_equal(a, "{}");
    assert_string_equal(b, "{}");
    free(a), free(b);

    /* a real keeps its type and all 17 digits; 1.0 is not 1 */
    a = s_canon("{\"x\":1.0,\"y\":1,\"z\":0.1}");
    assert_string_equal(a, "{\"x\":1.0,\"y\":1,\"z\":0.10000000000000001}");
    free(a);
}

/* The canonical form of a sample equals Python's
 * json.dumps(json.loads(s), sort_keys=True, separators=(',', ':'),
 * ensure_ascii=True) for data without reals (Python prints reals with
 * repr's shortest digits, we with 17). */
static void test_matches_python_json(void **state)
{
    (void)state;
    const char *py = getenv("PYTHON");
    if (!py || !py[0])
        py = "/usr/bin/python3";
    const char *sample = "{ \"b\": [1, 2, {\"d\": \"\\u00e9\", \"c\": null}], \"a\": true, \"e\": -7 }";
    char cmd[1024];
    snprintf(cmd, sizeof cmd,
             "'%s' -c 'import json,sys; print(json.dumps(json.loads(sys.argv[1]), sort_keys=True, "
             "separators=(\",\", \":\"), ensure_ascii=True))' '%s'",
             py, sample);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    char line[512];
    assert_non_null(fgets(line, sizeof line, p));
    assert_int_equal(pclose(p), 0);
    line[strcspn(line, "\n")] = '\0';
    /* Python writes \uXXXX escapes in lower case, jansson in upper case;
     * RFC 8259 section 7 allows both. Compare in jansson's case. */
    for (char *q = strstr(line, "\\u"); q; q = strstr(q + 2, "\\u"))
        for (int i = 2; i < 6 && q[i]; i++)
            if (q[i] >= 'a' && q[i] <= 'f')
                q[i] = (char)(q[i] - 'a' + 'A');
    char *mine = s_canon(sample);
    assert_string_equal(mine, line);
    free(mine);
}

static void test_refusals(void **state)
{
    (void)state;
    s_refused("[1,2]", "must be a JSON object");
    s_refused("30", "invalid JSON"); /* jansson refuses a bare number at top level */
    s_refused("\"text\"", "invalid JSON");
    s_refused("{\"n\":", "invalid JSON");
    s_refused("{n:30}", "invalid JSON");
    s_refused("{\"n\":30} x", "invalid JSON");
    s_refused("{\"n\":1,\"n\":2}", "duplicate");
    s_refused("{\"s\":\"a\\u0000b\"}", "invalid JSON"); /* NUL would be cut off in C strings */
    s_refused("{\"x\":NaN}", "invalid JSON");

    /* canonical text past PROTO_MAX_PARAMS_BYTES */
    size_t n = PROTO_MAX_PARAMS_BYTES + 10;
    char *big = malloc(n + 16);
    memcpy(big, "{\"s\":\"", 6);
    memset(big + 6, 'x', n);
    memcpy(big + 6 + n, "\"}", 3);
    s_refused(big, "limit 65536");
    /* exactly at the limit is accepted: {"s":"xxx...x"} is 8 + k bytes */
    size_t k = PROTO_MAX_PARAMS_BYTES - 8;
    memset(big + 6, 'x', k);
    memcpy(big + 6 + k, "\"}", 3);
    char *ok = s_canon(big);
    assert_int_equal(strlen(ok), PROTO_MAX_PARAMS_BYTES);
    free(ok);
    free(big);

    /* input text far past the limit is refused before parsing */
    size_t huge = 4 * PROTO_MAX_PARAMS_BYTES + 100;
    char *spaces = malloc(huge + 3);
    spaces[0] = '{';
    memset(spaces + 1, ' ', huge);
    spaces[huge + 1] = '}';
    spaces[huge + 2] = '\0';
    s_refused(spaces, "longer than");
    free(spaces);

    /* err may be tiny or NULL without harm */
    char *out = NULL;
    char tiny[4];
    assert_int_equal(proto_params_canonical("[", &out, tiny, sizeof tiny), -1);
    assert_int_equal(strlen(tiny), 3);
    assert_int_equal(proto_params_canonical("[", &out, NULL, 0), -1);
}

/* 17 significant digits round-trip every binary64 (IEEE 754-2008 5.12.2):
 * strtod of the text gives the same bits, for 200000 random bit patterns
 * (every exponent, subnormals included) and the edge values. */
static void test_format_double_round_trip(void **state)
{
    (void)state;
    char buf[32];
    const double edges[] = {0.0, -0.0, 1.0, -1.0, 0.1, 1.0 / 3.0, DBL_MAX, -DBL_MAX, DBL_MIN,
                            4.9406564584124654e-324, -2.2250738585072009e-308, 1e300, 123456789012345678.0};
    for (size_t i = 0; i < sizeof edges / sizeof edges[0]; i++) {
        int n = proto_format_double(edges[i], buf);
        assert_true(n > 0 && n < 32);
        assert_int_equal((size_t)n, strlen(buf));
        double back = strtod(buf, NULL);
        assert_memory_equal(&back, &edges[i], sizeof back);
    }
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, 77);
    int tested = 0;
    while (tested < 200000) {
        uint64_t bits = fitfarm_rng_next(&rng);
        double v;
        memcpy(&v, &bits, sizeof v);
        if (!isfinite(v))
            continue;
        int n = proto_format_double(v, buf);
        assert_true(n > 0 && n < 32);
        double back = strtod(buf, NULL);
        uint64_t back_bits;
        memcpy(&back_bits, &back, sizeof back_bits);
        if (back_bits != bits)
            fail_msg("%016llx printed as %s reads back as %016llx", (unsigned long long)bits, buf,
                     (unsigned long long)back_bits);
        tested++;
    }
    assert_string_equal((proto_format_double(-0.0, buf), buf), "-0");
    assert_string_equal((proto_format_double(5e-324, buf), buf), "4.9406564584124654e-324");
}

/* JSON has no NaN or infinity (RFC 8259, section 6): they print as null. */
static void test_format_double_non_finite(void **state)
{
    (void)state;
    char buf[32];
    assert_int_equal(proto_format_double(NAN, buf), 4);
    assert_string_equal(buf, "null");
    assert_int_equal(proto_format_double(-INFINITY, buf), 4);
    assert_string_equal(buf, "null");
    assert_int_equal(proto_format_double(INFINITY, buf), 4);
    assert_string_equal(buf, "null");
}

/* Seed params are zero only when present with a JSON number equal to 0.
 * References: RFC 8259 section 6 (0, 0.0 and -0.0 are numbers; "0" is a
 * string, null and false are not numbers), IEEE 754-2008 section 5.11 (-0
 * compares equal to +0; 1e-300 is a normal number, not zero). Each expected
 * answer is also computed by Python's json module (an independent parser). */
static void test_all_zero(void **state)
{
    (void)state;
    static const struct {
        const char *params;
        int want;
    } cases[] = {
        {"{\"jitter\":0,\"scatter_radius\":0}", 1},
        {"{\"jitter\":0.0,\"scatter_radius\":-0.0,\"rows\":2}", 1},
        {"{\"jitter\":-0,\"scatter_radius\":0e5}", 1},
        {"{\"jitter\":0}", 0},                                /* scatter_radius absent */
        {"{\"jitter\":0,\"scatter_radius\":1e-300}", 0},
        {"{\"jitter\":0,\"scatter_radius\":\"0\"}", 0},
        {"{\"jitter\":0,\"scatter_radius\":null}", 0},
        {"{\"jitter\":0,\"scatter_radius\":false}", 0},
        {"{\"jitter\":0,\"scatter_radius\":[0]}", 0},
        {"{\"jitter\":0,\"scatter_radius\":{\"a\":0}}", 0},
        {"{\"jitter\":0,\"scatter_radius\":0.05}", 0},
        {"{}", 0},
    };
    char *names[] = {"scatter_radius", "jitter"};
    const char *py = getenv("PYTHON");
    if (!py || !py[0])
        py = "/usr/bin/python3";
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char *canon = s_canon(cases[i].params);
        int got = proto_params_all_zero(canon, names, 2);
        if (got != cases[i].want)
            fail_msg("%s: got %d, want %d", canon, got, cases[i].want);
        char cmd[1024];
        snprintf(cmd, sizeof cmd,
                 "'%s' -c 'import json,sys; d=json.loads(sys.argv[1]); "
                 "print(int(all(k in d and type(d[k]) in (int, float) and d[k] == 0 "
                 "for k in (\"scatter_radius\", \"jitter\"))))' '%s'",
                 py, cases[i].params);
        FILE *p = popen(cmd, "r");
        assert_non_null(p);
        char line[16] = "";
        assert_non_null(fgets(line, sizeof line, p));
        assert_int_equal(pclose(p), 0);
        if (atoi(line) != cases[i].want)
            fail_msg("%s: Python says %s", cases[i].params, line);
        free(canon);
    }
    /* no names, or not an object: never zero */
    assert_int_equal(proto_params_all_zero("{\"jitter\":0}", names, 0), 0);
    assert_int_equal(proto_params_all_zero("[0]", names, 1), 0);
    assert_int_equal(proto_params_all_zero("not json", names, 1), 0);
    assert_int_equal(proto_params_all_zero(NULL, names, 1), 0);
    char *one[] = {"jitter"};
    assert_int_equal(proto_params_all_zero("{\"jitter\":0}", one, 1), 1);
}

/* With the plugin's defaults, equal meanings have one text: a left-out
 * parameter takes its default, 30.0 for an integer default is 30 and 2 for a
 * real default is 2.0 (exact: within 2^53, IEEE 754 binary64's integer
 * range); other values and names the defaults do not list stay as given.
 * The expected texts are written by hand from RFC 8259 numbers. */
static void test_with_defaults(void **state)
{
    (void)state;
    const char *dflt = "{\"dt\":0.5,\"n\":30,\"shape\":\"hex\"}";
    struct {
        const char *given, *want;
    } cases[] = {
        {"{}", "{\"dt\":0.5,\"n\":30,\"shape\":\"hex\"}"},
        {"{\"n\":30}", "{\"dt\":0.5,\"n\":30,\"shape\":\"hex\"}"},
        {"{\"n\":30.0}", "{\"dt\":0.5,\"n\":30,\"shape\":\"hex\"}"},
        {"{\"dt\":2}", "{\"dt\":2.0,\"n\":30,\"shape\":\"hex\"}"},
        {"{\"n\":30.5}", "{\"dt\":0.5,\"n\":30.5,\"shape\":\"hex\"}"},      /* not exact */
        {"{\"n\":1e300}", "{\"dt\":0.5,\"n\":1e300,\"shape\":\"hex\"}"},    /* past 2^53 */
        {"{\"n\":\"30\"}", "{\"dt\":0.5,\"n\":\"30\",\"shape\":\"hex\"}"},  /* a string */
        {"{\"extra\":[1]}", "{\"dt\":0.5,\"extra\":[1],\"n\":30,\"shape\":\"hex\"}"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char *canon = s_canon(cases[i].given);
        char *out = NULL;
        char err[200];
        if (proto_params_with_defaults(canon, dflt, &out, err, sizeof err) != 0)
            fail_msg("case %zu (%s): %s", i, cases[i].given, err);
        char *want = s_canon(cases[i].want); /* same printer for 1e300 */
        if (strcmp(out, want) != 0)
            fail_msg("case %zu: %s with defaults gave %s, want %s", i, cases[i].given, out, want);
        free(out);
        free(want);
        free(canon);
    }
    char *out = NULL;
    char err[200];
    assert_int_equal(proto_params_with_defaults("{}", "[1]", &out, err, sizeof err), -1);
    assert_null(out);
    assert_non_null(strstr(err, "defaults"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_equal_forms),
        cmocka_unit_test(test_matches_python_json),
        cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_format_double_round_trip),
        cmocka_unit_test(test_format_double_non_finite),
        cmocka_unit_test(test_all_zero),
        cmocka_unit_test(test_with_defaults),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
