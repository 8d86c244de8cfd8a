/* test_nsga2_variation.c: the optimizer's generator and operators
 * (client/nsga2/rng.c, variation.c).
 *
 *   - xoshiro256** from state {1,2,3,4} and splitmix64 from 0 against the
 *     values in CHECKS.md (Blackman & Vigna's published algorithms);
 *   - SBX and polynomial mutation keep every gene within its bounds, leave
 *     genomes alone at probability 0, and with the unbounded limit (parents
 *     far from the bounds) SBX's children are symmetric about the parents'
 *     mean (Deb & Agrawal 1995: c1 + c2 = p1 + p2 when both sides draw the
 *     same spread factor, as they do away from the bounds);
 *   - the spread of SBX children shrinks as eta grows (the distribution
 *     index is a concentration parameter, same paper);
 *   - the tournament picks the lower rank, then the larger crowding. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>

#include <cmocka.h>

#include "client/nsga2/rng.h"
#include "client/nsga2/variation.h"

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
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 42); /* --seed 42 */
    const double lo[] = {0, 0, 0}, hi[] = {1, 1, 1};
    const double p1[] = {0.2, 0.5, 0.9}, p2[] = {0.4, 0.1, 0.8};
    double c1[3], c2[3];
    nsga2_sbx(&rng, p1, p2, lo, hi, 3, 0.9, 20.0, c1, c2);
    nsga2_mutate(&rng, c1, lo, hi, 3, 1.0 / 3.0, 20.0);
    for (int i = 0; i < 3; i++)
        assert_true(c1[i] >= lo[i] && c1[i] <= hi[i] && c2[i] >= lo[i] && c2[i] <= hi[i]);
}

static void test_generator_published_values(void **state)
{
    (void)state;
    nsga2_rng_t rng = {{1, 2, 3, 4}};
    assert_int_equal(nsga2_rng_next(&rng), 11520u);
    assert_int_equal(nsga2_rng_next(&rng), 0u);
    assert_int_equal(nsga2_rng_next(&rng), 1509978240u);
    assert_int_equal(nsga2_rng_next(&rng), 1215971899390074240ull);
    uint64_t sm = 0;
    assert_int_equal(nsga2_rng_splitmix64(&sm), 0xE220A8397B1DCDAFull);
    /* the seeding is splitmix64's first four outputs */
    nsga2_rng_seed(&rng, 0);
    assert_int_equal(rng.s[0], 0xE220A8397B1DCDAFull);
}

static void test_uniform_and_below_ranges(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 7);
    int hist[5] = {0};
    double sum = 0.0;
    for (int i = 0; i < 100000; i++) {
        double u = nsga2_rng_uniform(&rng);
        assert_true(u >= 0.0 && u < 1.0);
        sum += u;
        uint64_t k = nsga2_rng_below(&rng, 5);
        assert_true(k < 5);
        hist[k]++;
    }
    /* mean 1/2 with standard error sqrt(1/12/1e5) ~ 0.0009: 5 of them */
    assert_true(fabs(sum / 100000 - 0.5) < 0.0046);
    /* each count 20000 with sd sqrt(1e5 * 0.2 * 0.8) ~ 126: 5 of them */
    for (int k = 0; k < 5; k++)
        assert_true(abs(hist[k] - 20000) < 632);
}

static void test_operators_stay_in_bounds(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 11);
    const double lo[] = {-5, 0, 10, -1e-3}, hi[] = {5, 1e-9, 11, 1e-3};
    double p1[4], p2[4], c1[4], c2[4];
    for (int t = 0; t < 20000; t++) {
        for (int i = 0; i < 4; i++) {
            /* parents at and near the bounds too */
            double u = nsga2_rng_uniform(&rng);
            p1[i] = t % 7 == 0 ? lo[i] : lo[i] + (hi[i] - lo[i]) * u;
            p2[i] = t % 11 == 0 ? hi[i] : lo[i] + (hi[i] - lo[i]) * nsga2_rng_uniform(&rng);
        }
        double eta = t % 3 == 0 ? 0.5 : 20.0;
        nsga2_sbx(&rng, p1, p2, lo, hi, 4, 1.0, eta, c1, c2);
        nsga2_mutate(&rng, c1, lo, hi, 4, 1.0, eta);
        nsga2_mutate(&rng, c2, lo, hi, 4, 1.0, eta);
        for (int i = 0; i < 4; i++) {
            assert_true(c1[i] >= lo[i] && c1[i] <= hi[i]);
            assert_true(c2[i] >= lo[i] && c2[i] <= hi[i]);
            assert_false(isnan(c1[i]) || isnan(c2[i]));
        }
    }
}

static void test_probability_zero_changes_nothing(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 3);
    const double lo[] = {0, 0}, hi[] = {1, 1}, p1[] = {0.3, 0.7}, p2[] = {0.6, 0.1};
    double c1[2], c2[2];
    nsga2_sbx(&rng, p1, p2, lo, hi, 2, 0.0, 20.0, c1, c2);
    assert_memory_equal(c1, p1, sizeof c1);
    assert_memory_equal(c2, p2, sizeof c2);
    nsga2_mutate(&rng, c1, lo, hi, 2, 0.0, 20.0);
    assert_memory_equal(c1, p1, sizeof c1);
}

static void test_sbx_symmetric_and_eta_concentrates(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 5);
    /* Bounds far away: the bounded spread factor is the unbounded one. */
    const double lo[] = {-1e9}, hi[] = {1e9}, p1[] = {0.0}, p2[] = {1.0};
    double spread[2] = {0, 0};
    const double etas[2] = {2.0, 20.0};
    for (int e = 0; e < 2; e++) {
        int crossed = 0;
        for (int t = 0; t < 20000; t++) {
            double c1[1], c2[1];
            nsga2_sbx(&rng, p1, p2, lo, hi, 1, 1.0, etas[e], c1, c2);
            s_near(c1[0] + c2[0], 1.0, 1e-6);
            if (c1[0] != p1[0] && c1[0] != p2[0]) {
                crossed++;
                spread[e] += fabs(c1[0] - c2[0]);
            }
        }
        spread[e] /= crossed;
        /* each gene crosses with probability 1/2 */
        assert_true(abs(crossed - 10000) < 500);
    }
    assert_true(spread[1] < spread[0]);
    /* eta 20 keeps children close to their parents: mean |beta| near 1 */
    assert_true(fabs(spread[1] - 1.0) < 0.1);
}

static void test_tournament_crowded_comparison(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 9);
    const size_t rank[] = {0, 1, 0, 2};
    const double crowd[] = {0.5, INFINITY, 2.0, INFINITY};
    int wins[4] = {0};
    for (int t = 0; t < 12000; t++)
        wins[nsga2_tournament(&rng, 4, rank, crowd)]++;
    /* 3 never wins (worst rank); 2 beats 0 on crowding; 0 beats 1 and 3 only */
    assert_int_equal(wins[3], 0);
    /* 2 wins every pair it is in: 3 of 6 pairs */
    assert_true(abs(wins[2] - 6000) < 400);
    /* 0 wins {0,1}, {0,3}: 2 of 6; 1 wins {1,3}: 1 of 6 */
    assert_true(abs(wins[0] - 4000) < 400);
    assert_true(abs(wins[1] - 2000) < 400);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_generator_published_values),
        cmocka_unit_test(test_uniform_and_below_ranges),
        cmocka_unit_test(test_operators_stay_in_bounds),
        cmocka_unit_test(test_probability_zero_changes_nothing),
        cmocka_unit_test(test_sbx_symmetric_and_eta_concentrates),
        cmocka_unit_test(test_tournament_crowded_comparison),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
