/* test_nsga2_hypervolume.c: the hypervolume (client/nsga2/hypervolume.c)
 * against closed forms and against an independent brute force.
 *
 *   - a single point: the box volume, prod(r_j - p_j) (the definition);
 *   - three unit-offset points in 3-D, worked by inclusion-exclusion by hand;
 *   - n evenly spaced points of the ZDT1 front f2 = 1 - sqrt(f1) (Zitzler,
 *     Deb, Thiele, Evolutionary Computation 8(2), 2000) against (1,1): the
 *     value stays below the analytic 2/3 and above 2/3 - 1/(n-1) (each
 *     staircase step misses at most its width times its drop), grows as the
 *     sets are refined, and tends to 2/3;
 *   - random sets in 2 to 5 objectives against tests/unit/ref_hypervolume.py
 *     (numpy, cell decomposition): exact to 1e-12 in 2-D and 3-D; the Monte
 *     Carlo estimate (4-D, 5-D) within 4 of its stated standard errors.
 *   - the default reference rule on a worked example. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "client/nsga2/hypervolume.h"

/* cmocka of this Debian release compares floats only: doubles here, with
 * both values in the message. */
#define s_near(a, b, tol)                                                             \
    do {                                                                              \
        double s_a_ = (a), s_b_ = (b);                                                \
        if (!(fabs(s_a_ - s_b_) <= (tol)))                                            \
            fail_msg("%s = %.17g, expected %.17g (within %g)", #a, s_a_, s_b_, (double)(tol)); \
    } while (0)

/* ---- usage example ------------------------------------------------------ */

static void test_usage_example(void **state)
{
    (void)state;
    /* A two-objective front (minimised) and a reference point. */
    const double front[] = {0.0, 1.0, 0.5, 0.5, 1.0, 0.0};
    const double ref[] = {2.0, 2.0};
    nsga2_hv_t hv;
    assert_int_equal(nsga2_hypervolume(front, 3, 2, ref, 0, &hv), 0);
    assert_int_equal(hv.method, NSGA2_HV_EXACT);
    /* strips: [0,0.5)x[1,2) + [0.5,1)x[0.5,2) + [1,2)x[0,2) = 0.5 + 0.75 + 2 */
    s_near(hv.value, 3.25, 1e-15);
    assert_true(hv.std_error == 0.0);
}

static void test_single_point_is_a_box(void **state)
{
    (void)state;
    const double p[] = {0.25, 0.5, 0.125, 0.75, 0.0};
    const double ref[] = {1.0, 1.5, 1.0, 1.0, 2.0};
    for (size_t m = 1; m <= 5; m++) {
        double box = 1.0;
        for (size_t j = 0; j < m; j++)
            box *= ref[j] - p[j];
        nsga2_hv_t hv;
        assert_int_equal(nsga2_hypervolume(p, 1, m, ref, 200000, &hv), 0);
        if (m <= 3) {
            s_near(hv.value, box, 1e-15);
        } else {
            /* the box between the ideal (the point) and ref is all dominated */
            assert_int_equal(hv.method, NSGA2_HV_MONTE_CARLO);
            s_near(hv.value, box, 1e-12);
        }
    }
}

/* (1,0,0), (0,1,0), (0,0,1) against (2,2,2): each box is 1 x 2 x 2 = 4,
 * each pair shares 1 x 1 x 2 = 2, all three share 1: 12 - 6 + 1 = 7. */
static void test_three_points_inclusion_exclusion(void **state)
{
    (void)state;
    const double f[] = {1, 0, 0, 0, 1, 0, 0, 0, 1};
    const double ref[] = {2, 2, 2};
    nsga2_hv_t hv;
    assert_int_equal(nsga2_hypervolume(f, 3, 3, ref, 0, &hv), 0);
    s_near(hv.value, 7.0, 1e-15);
    /* dominated and outside points change nothing */
    const double g[] = {1, 0, 0, 0, 1, 0, 0, 0, 1, 1, 1, 1, 3, 0, 0, 0, 2, 0};
    assert_int_equal(nsga2_hypervolume(g, 6, 3, ref, 0, &hv), 0);
    s_near(hv.value, 7.0, 1e-15);
}

static void test_zdt1_front_bounds(void **state)
{
    (void)state;
    double prev = 0.0;
    /* n - 1 doubles, so each set holds the one before: the value must grow */
    for (size_t n = 3; n <= 4097; n = 2 * n - 1) {
        double *f = malloc(2 * n * sizeof *f);
        assert_non_null(f);
        for (size_t i = 0; i < n; i++) {
            double x = (double)i / (double)(n - 1);
            f[2 * i] = x;
            f[2 * i + 1] = 1.0 - sqrt(x);
        }
        const double ref[] = {1.0, 1.0};
        nsga2_hv_t hv;
        assert_int_equal(nsga2_hypervolume(f, n, 2, ref, 0, &hv), 0);
        assert_true(hv.value < 2.0 / 3.0);
        assert_true(hv.value >= 2.0 / 3.0 - 1.0 / (double)(n - 1));
        assert_true(hv.value > prev);
        prev = hv.value;
        /* the same front lifted to 3-D (third objective 0, ref 1): same volume */
        double *g = malloc(3 * n * sizeof *g);
        assert_non_null(g);
        for (size_t i = 0; i < n; i++) {
            g[3 * i] = f[2 * i];
            g[3 * i + 1] = f[2 * i + 1];
            g[3 * i + 2] = 0.0;
        }
        const double ref3[] = {1.0, 1.0, 1.0};
        nsga2_hv_t hv3;
        assert_int_equal(nsga2_hypervolume(g, n, 3, ref3, 0, &hv3), 0);
        s_near(hv3.value, hv.value, 1e-14);
        free(f);
        free(g);
    }
    assert_true(prev > 2.0 / 3.0 - 1e-3);
}

static char *s_read_all(FILE *f)
{
    size_t cap = 1 << 16, len = 0;
    char *buf = malloc(cap);
    assert_non_null(buf);
    size_t got;
    while ((got = fread(buf + len, 1, cap - len - 1, f)) > 0) {
        len += got;
        if (len + 1 == cap) {
            cap *= 2;
            buf = realloc(buf, cap);
            assert_non_null(buf);
        }
    }
    buf[len] = '\0';
    return buf;
}

static void test_random_sets_match_numpy(void **state)
{
    (void)state;
    const char *python = getenv("PYTHON") ? getenv("PYTHON") : "/usr/bin/python3";
    const char *src = getenv("FITFARM_SOURCE_DIR") ? getenv("FITFARM_SOURCE_DIR") : ".";
    int sets = 0, mc = 0;
    for (int seed = 1; seed <= 2; seed++) {
        char cmd[4096];
        snprintf(cmd, sizeof cmd, "'%s' '%s/tests/unit/ref_hypervolume.py' %d", python, src, seed);
        FILE *p = popen(cmd, "r");
        assert_non_null(p);
        char *text = s_read_all(p);
        assert_int_equal(pclose(p), 0);
        char *save = NULL;
        double *f = NULL, ref[8];
        size_t m = 0, n = 0, got = 0;
        for (char *line = strtok_r(text, "\n", &save); line; line = strtok_r(NULL, "\n", &save)) {
            char *cur;
            if (strncmp(line, "set ", 4) == 0) {
                m = strtoul(line + 4, &cur, 10);
                n = strtoul(cur, NULL, 10);
                assert_true(m >= 2 && m <= 8 && n >= 1);
                free(f);
                f = malloc(n * m * sizeof *f);
                assert_non_null(f);
                got = 0;
            } else if (strncmp(line, "p ", 2) == 0) {
                assert_true(got < n);
                cur = line + 2;
                for (size_t j = 0; j < m; j++)
                    f[got * m + j] = strtod(cur, &cur);
                got++;
            } else if (strncmp(line, "ref ", 4) == 0) {
                cur = line + 4;
                for (size_t j = 0; j < m; j++)
                    ref[j] = strtod(cur, &cur);
            } else if (strncmp(line, "hv ", 3) == 0) {
                assert_int_equal(got, n);
                double want = strtod(line + 3, NULL);
                nsga2_hv_t hv;
                assert_int_equal(nsga2_hypervolume(f, n, m, ref, 400000, &hv), 0);
                if (m <= 3) {
                    if (fabs(hv.value - want) > 1e-12 * fmax(1.0, want))
                        fail_msg("seed %d, %zu-D set of %zu: ours %.17g, numpy %.17g", seed, m, n,
                                 hv.value, want);
                } else {
                    assert_int_equal(hv.method, NSGA2_HV_MONTE_CARLO);
                    assert_int_equal(hv.samples, 400000);
                    /* the stated error must be real: nonzero unless the box is all in or out */
                    if (fabs(hv.value - want) > 4.0 * hv.std_error + 1e-12)
                        fail_msg("seed %d, %zu-D set of %zu: estimate %.6g +- %.2g, numpy %.17g",
                                 seed, m, n, hv.value, hv.std_error, want);
                    mc++;
                }
                sets++;
            } else {
                assert_string_equal(line, "end");
            }
        }
        free(f);
        free(text);
    }
    assert_true(sets >= 100);
    assert_true(mc >= 15);
}

/* Worst value plus 10 % of the range; a flat objective gets 0.1 max(|v|, 1). */
static void test_default_reference_rule(void **state)
{
    (void)state;
    const double f[] = {0.0, 5.0, -3.0, 2.0, 5.0, -3.0, 1.0, 5.0, -3.0};
    double ref[3];
    nsga2_hypervolume_default_ref(f, 3, 3, ref);
    s_near(ref[0], 2.0 + 0.2, 1e-15);
    s_near(ref[1], 5.0 + 0.5, 1e-15);
    s_near(ref[2], -3.0 + 0.3, 1e-15);
}

static void test_nan_is_refused(void **state)
{
    (void)state;
    const double f[] = {0.0, NAN};
    const double ref[] = {1.0, 1.0};
    nsga2_hv_t hv;
    assert_int_equal(nsga2_hypervolume(f, 1, 2, ref, 0, &hv), -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_single_point_is_a_box),
        cmocka_unit_test(test_three_points_inclusion_exclusion),
        cmocka_unit_test(test_zdt1_front_bounds),
        cmocka_unit_test(test_random_sets_match_numpy),
        cmocka_unit_test(test_default_reference_rule),
        cmocka_unit_test(test_nan_is_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
