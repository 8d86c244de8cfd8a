/* test_nsga2_knee.c: the knee of a front (client/nsga2/knee.c).
 *
 *   - on the ZDT1 front f2 = 1 - sqrt(f1), f1 in [0, 1] (Zitzler, Deb,
 *     Thiele, Evolutionary Computation 8(2), 2000), already normalised, the
 *     knee minimises f1 + 1 - sqrt(f1): the derivative 1 - 1/(2 sqrt(f1))
 *     vanishes at f1 = 1/4, so the knee is (1/4, 1/2) (worked by hand);
 *   - in two objectives the knee is the point farthest from the line joining
 *     the front's two ends after scaling each objective to its range (Das,
 *     Structural Optimization 18, 1999): checked by computing that distance
 *     with the point-to-line formula on random convex fronts. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>

#include <cmocka.h>

#include "client/nsga2/knee.h"
#include "client/nsga2/rng.h"

/* ---- usage example ------------------------------------------------------ */

static void test_usage_example(void **state)
{
    (void)state;
    /* Two ends and one point that gives up little in either objective. */
    const double front[] = {0.0, 1.0, 0.2, 0.3, 1.0, 0.0};
    assert_int_equal(nsga2_knee(front, 3, 2), 1);
    assert_int_equal(nsga2_knee(front, 0, 2), -1);
}

static void test_zdt1_knee_is_a_quarter(void **state)
{
    (void)state;
    const size_t n = 4001;
    double *f = malloc(2 * n * sizeof *f);
    assert_non_null(f);
    for (size_t i = 0; i < n; i++) {
        double x = (double)i / (double)(n - 1);
        f[2 * i] = x;
        f[2 * i + 1] = 1.0 - sqrt(x);
    }
    long k = nsga2_knee(f, n, 2);
    assert_int_equal(k, 1000); /* x = 1000/4000 */
    assert_true(fabs(f[2 * k] - 0.25) < 1e-12 && fabs(f[2 * k + 1] - 0.5) < 1e-12);
    /* Scaling an objective does not move the knee (it is normalised away). */
    for (size_t i = 0; i < n; i++)
        f[2 * i + 1] = 40.0 * f[2 * i + 1] + 3.0;
    assert_int_equal(nsga2_knee(f, n, 2), 1000);
    free(f);
}

static void test_farthest_from_the_line_between_ends(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 1999);
    for (int trial = 0; trial < 200; trial++) {
        size_t n = 3 + (size_t)nsga2_rng_below(&rng, 60);
        double p = 0.2 + 3.0 * nsga2_rng_uniform(&rng); /* f2 = 1 - f1^p: convex if p < 1 */
        double sx = 0.1 + 10 * nsga2_rng_uniform(&rng), sy = 0.1 + 10 * nsga2_rng_uniform(&rng);
        double *f = malloc(2 * n * sizeof *f);
        assert_non_null(f);
        for (size_t i = 0; i < n; i++) {
            double x = i == 0 ? 0.0 : i == n - 1 ? 1.0 : nsga2_rng_uniform(&rng);
            f[2 * i] = sx * x;
            f[2 * i + 1] = sy * (1.0 - pow(x, p));
        }
        /* Normalised ends are (0, 1) and (1, 0); distance of (u, v) to the
         * line through them, taken on the side the front bulges to. */
        long best = -1;
        double best_d = -INFINITY;
        for (size_t i = 0; i < n; i++) {
            double u = f[2 * i] / sx, v = f[2 * i + 1] / sy;
            double d = (1.0 - u - v) / sqrt(2.0);
            if (d > best_d + 1e-12) {
                best_d = d;
                best = (long)i;
            }
        }
        long k = nsga2_knee(f, n, 2);
        double uk = f[2 * k] / sx, vk = f[2 * k + 1] / sy;
        if (fabs((1.0 - uk - vk) / sqrt(2.0) - best_d) > 1e-9)
            fail_msg("trial %d: knee %ld at distance %.17g, farthest %ld at %.17g", trial, k,
                     (1.0 - uk - vk) / sqrt(2.0), best, best_d);
        free(f);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_zdt1_knee_is_a_quarter),
        cmocka_unit_test(test_farthest_from_the_line_between_ends),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
