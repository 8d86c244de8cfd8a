/* test_nsga2_sort.c: fast non-dominated sorting and the non-dominated filter
 * (client/nsga2/sort.c) against the definitions of Deb, Pratap, Agarwal,
 * Meyarivan, IEEE TEC 6(2), 2002, section III-A, checked by brute force
 * pairwise comparison on random sets: a point of front k is dominated by no
 * point of front k or later, and (k > 0) by some point of front k - 1. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>

#include <cmocka.h>

#include "client/nsga2/rng.h"
#include "client/nsga2/sort.h"

/* ---- usage example ------------------------------------------------------ */

static void test_usage_example(void **state)
{
    (void)state;
    /* Four points, two objectives, both minimised. */
    const double f[] = {
        1.0, 4.0, /* 0: front 0 */
        2.0, 2.0, /* 1: front 0 */
        3.0, 3.0, /* 2: dominated by 1: front 1 */
        4.0, 4.0, /* 3: dominated by 1 and 2: front 2 */
    };
    size_t rank[4], order[4], start[5];
    long fronts = nsga2_sort(f, 4, 2, rank, order, start);
    assert_int_equal(fronts, 3);
    assert_int_equal(rank[0], 0);
    assert_int_equal(rank[1], 0);
    assert_int_equal(rank[2], 1);
    assert_int_equal(rank[3], 2);
    /* front 0 is order[start[0] .. start[1]) = {0, 1} */
    assert_int_equal(start[0], 0);
    assert_int_equal(start[1], 2);
    assert_int_equal(order[0], 0);
    assert_int_equal(order[1], 1);
    assert_int_equal(order[2], 2);
    assert_int_equal(start[3], 4);

    size_t keep[4];
    assert_int_equal(nsga2_sort_nondominated(f, 4, 2, keep), 2);
    assert_int_equal(keep[0], 0);
    assert_int_equal(keep[1], 1);
}

static void test_dominance_definition(void **state)
{
    (void)state;
    const double a[] = {1, 2}, b[] = {1, 3}, c[] = {2, 1};
    assert_true(nsga2_dominates(a, b, 2));  /* <= everywhere, < once */
    assert_false(nsga2_dominates(b, a, 2));
    assert_false(nsga2_dominates(a, a, 2)); /* equal vectors: neither dominates */
    assert_false(nsga2_dominates(a, c, 2)); /* a trade-off */
    assert_false(nsga2_dominates(c, a, 2));
}

/* Random sets on a coarse grid (ties and duplicates happen), in 2 to 5
 * objectives, against the pairwise definition. */
static void test_random_sets_match_pairwise(void **state)
{
    (void)state;
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, 2002);
    for (int trial = 0; trial < 400; trial++) {
        size_t m = 2 + (size_t)nsga2_rng_below(&rng, 4);
        size_t n = 1 + (size_t)nsga2_rng_below(&rng, 120);
        double *f = malloc(n * m * sizeof *f);
        size_t *rank = malloc(n * sizeof *rank), *order = malloc(n * sizeof *order);
        size_t *start = malloc((n + 1) * sizeof *start), *keep = malloc(n * sizeof *keep);
        assert_non_null(f);
        assert_non_null(rank);
        assert_non_null(order);
        assert_non_null(start);
        assert_non_null(keep);
        for (size_t i = 0; i < n * m; i++)
            f[i] = (double)nsga2_rng_below(&rng, 8);
        long fronts = nsga2_sort(f, n, m, rank, order, start);
        assert_true(fronts >= 1);
        /* order is a permutation, grouped by rank as start says */
        char *seen = calloc(n, 1);
        assert_non_null(seen);
        assert_int_equal(start[0], 0);
        assert_int_equal(start[fronts], n);
        for (long k = 0; k < fronts; k++) {
            assert_true(start[k] < start[k + 1]); /* no empty front */
            for (size_t i = start[k]; i < start[k + 1]; i++) {
                assert_false(seen[order[i]]);
                seen[order[i]] = 1;
                assert_int_equal(rank[order[i]], (size_t)k);
            }
        }
        free(seen);
        for (size_t p = 0; p < n; p++) {
            int by_prev = 0;
            for (size_t q = 0; q < n; q++) {
                if (!nsga2_dominates(f + q * m, f + p * m, m))
                    continue;
                if (rank[q] >= rank[p])
                    fail_msg("trial %d: point %zu (front %zu) dominated by %zu (front %zu)",
                             trial, p, rank[p], q, rank[q]);
                if (rank[q] + 1 == rank[p])
                    by_prev = 1;
            }
            if (rank[p] > 0 && !by_prev)
                fail_msg("trial %d: point %zu in front %zu, dominated by nothing in front %zu",
                         trial, p, rank[p], rank[p] - 1);
        }
        /* The filter: exactly the distinct vectors of front 0. */
        long kept = nsga2_sort_nondominated(f, n, m, keep);
        size_t distinct0 = 0;
        for (size_t p = 0; p < n; p++) {
            if (rank[p] != 0)
                continue;
            int first = 1;
            for (size_t q = 0; q < p && first; q++) {
                int equal = rank[q] == 0;
                for (size_t j = 0; j < m && equal; j++)
                    equal = f[q * m + j] == f[p * m + j];
                if (equal)
                    first = 0;
            }
            distinct0 += (size_t)first;
        }
        assert_int_equal(kept, (long)distinct0);
        for (long k = 0; k < kept; k++)
            assert_int_equal(rank[keep[k]], 0);
        free(f);
        free(rank);
        free(order);
        free(start);
        free(keep);
    }
}

static void test_empty_set(void **state)
{
    (void)state;
    size_t start[1];
    assert_int_equal(nsga2_sort(NULL, 0, 2, NULL, NULL, start), 0);
    assert_int_equal(start[0], 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_dominance_definition),
        cmocka_unit_test(test_random_sets_match_pairwise),
        cmocka_unit_test(test_empty_set),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
