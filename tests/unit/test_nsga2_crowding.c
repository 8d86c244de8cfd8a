/* test_nsga2_crowding.c: NSGA-II's crowding distance (client/nsga2/
 * crowding.c) against values worked by hand from its definition (Deb,
 * Pratap, Agarwal, Meyarivan, IEEE TEC 6(2), 2002, section III-B: the ends
 * of each objective get infinity; an interior point adds, per objective, the
 * gap between its two neighbours divided by the front's range). */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "client/nsga2/crowding.h"

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
    /* A front of four points: (0,4) (1,2) (2,1) (4,0). */
    const double f[] = {0, 4, 1, 2, 2, 1, 4, 0};
    const size_t members[] = {0, 1, 2, 3};
    double d[4];
    assert_int_equal(nsga2_crowding(f, 2, members, 4, d), 0);
    assert_true(isinf(d[0]) && isinf(d[3]));
    /* (1,2): f1 neighbours 0 and 2 over range 4; f2 neighbours 1 and 4 over 4 */
    s_near(d[1], 2.0 / 4.0 + 3.0 / 4.0, 1e-15);
    /* (2,1): f1 neighbours 1 and 4 over 4; f2 neighbours 0 and 2 over 4 */
    s_near(d[2], 3.0 / 4.0 + 2.0 / 4.0, 1e-15);
}

/* Members are indices into a larger set; the distance follows the member. */
static void test_members_subset_and_order(void **state)
{
    (void)state;
    /* Points 1, 3, 4, 6 form the front, listed out of order. */
    const double f[] = {9, 9, 3, 0, 9, 9, 0, 3, 1, 1, 9, 9, 2, 0.5};
    const size_t members[] = {4, 1, 6, 3};
    double d[4];
    assert_int_equal(nsga2_crowding(f, 2, members, 4, d), 0);
    /* sorted by f1: 3 (0,3), 4 (1,1), 6 (2,0.5), 1 (3,0); ranges 3 and 3 */
    assert_true(isinf(d[1]) && isinf(d[3]));
    s_near(d[0], (2.0 - 0.0) / 3.0 + (3.0 - 0.5) / 3.0, 1e-15); /* point 4 */
    s_near(d[2], (3.0 - 1.0) / 3.0 + (1.0 - 0.0) / 3.0, 1e-15); /* point 6 */
}

static void test_small_and_flat_fronts(void **state)
{
    (void)state;
    const double f[] = {1, 2, 2, 1, 5, 5};
    const size_t two[] = {0, 1};
    double d[3];
    assert_int_equal(nsga2_crowding(f, 2, two, 2, d), 0);
    assert_true(isinf(d[0]) && isinf(d[1]));
    /* Three points equal in objective 2: it adds nothing (no range), and
     * objective 1 alone decides. */
    const double g[] = {0, 7, 1, 7, 4, 7};
    const size_t three[] = {0, 1, 2};
    assert_int_equal(nsga2_crowding(g, 2, three, 3, d), 0);
    assert_true(isinf(d[0]) && isinf(d[2]));
    s_near(d[1], 4.0 / 4.0, 1e-15);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_members_subset_and_order),
        cmocka_unit_test(test_small_and_flat_fronts),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
