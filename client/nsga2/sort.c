/* sort.c: dominance, fast non-dominated sorting and the non-dominated filter
 * (see sort.h). The fast sort follows the paper's bookkeeping: for each point
 * p the count of points dominating it and the list S_p of points it
 * dominates; front k + 1 is what is left with a zero count once front k's
 * lists are walked. S_p is kept as one flat array indexed by offsets, built
 * in two passes, so there is one allocation however the points fall. */
#include "sort.h"

#include <stdlib.h>
#include <string.h>

int nsga2_dominates(const double *a, const double *b, size_t m)
{
    int better = 0;
    for (size_t j = 0; j < m; j++) {
        if (a[j] > b[j])
            return 0;
        if (a[j] < b[j])
            better = 1;
    }
    return better;
}

long nsga2_sort(const double *f, size_t n, size_t m, size_t *rank, size_t *order, size_t *start)
{
    if (n == 0) {
        start[0] = 0;
        return 0;
    }
    size_t *count = calloc(n, sizeof *count);    /* points dominating i */
    size_t *offset = calloc(n + 1, sizeof *offset); /* S_i is list[offset[i] .. offset[i+1]) */
    size_t *list = NULL;
    long fronts = -1;
    if (!count || !offset)
        goto done;
    /* Pass 1: sizes of every S_p and the counts. */
    for (size_t p = 0; p < n; p++)
        for (size_t q = p + 1; q < n; q++) {
            if (nsga2_dominates(f + p * m, f + q * m, m)) {
                offset[p + 1]++;
                count[q]++;
            } else if (nsga2_dominates(f + q * m, f + p * m, m)) {
                offset[q + 1]++;
                count[p]++;
            }
        }
    for (size_t p = 0; p < n; p++)
        offset[p + 1] += offset[p];
    list = malloc((offset[n] ? offset[n] : 1) * sizeof *list);
    size_t *fill = malloc(n * sizeof *fill);
    if (!list || !fill) {
        free(fill);
        goto done;
    }
    memcpy(fill, offset, n * sizeof *fill);
    /* Pass 2: the lists, in increasing index order of the dominated point. */
    for (size_t p = 0; p < n; p++)
        for (size_t q = 0; q < n; q++)
            if (q != p && nsga2_dominates(f + p * m, f + q * m, m))
                list[fill[p]++] = q;
    free(fill);
    /* Peel the fronts. order doubles as the queue: front k's members are
     * appended while front k - 1 is walked. */
    size_t used = 0;
    for (size_t p = 0; p < n; p++)
        if (count[p] == 0) {
            rank[p] = 0;
            order[used++] = p;
        }
    fronts = 0;
    size_t begin = 0;
    while (begin < used) {
        size_t end = used;
        start[fronts++] = begin;
        for (size_t i = begin; i < end; i++) {
            size_t p = order[i];
            for (size_t s = offset[p]; s < offset[p + 1]; s++)
                if (--count[list[s]] == 0) {
                    rank[list[s]] = (size_t)fronts;
                    order[used++] = list[s];
                }
        }
        /* Keep each front in increasing index, so the result depends on the
         * points only, never on the walk. */
        for (size_t i = end + 1; i < used; i++) {
            size_t v = order[i], k = i;
            while (k > end && order[k - 1] > v) {
                order[k] = order[k - 1];
                k--;
            }
            order[k] = v;
        }
        begin = end;
    }
    start[fronts] = used;
done:
    free(count);
    free(offset);
    free(list);
    return fronts;
}

typedef struct {
    const double *f;
    size_t m;
} s_lex_ctx_t;

static int s_lex_cmp(const void *a, const void *b, void *arg)
{
    const s_lex_ctx_t *c = arg;
    size_t i = *(const size_t *)a, k = *(const size_t *)b;
    for (size_t j = 0; j < c->m; j++) {
        double x = c->f[i * c->m + j], y = c->f[k * c->m + j];
        if (x < y)
            return -1;
        if (x > y)
            return 1;
    }
    return (i > k) - (i < k);
}

static int s_weakly_dominates(const double *a, const double *b, size_t m)
{
    for (size_t j = 0; j < m; j++)
        if (a[j] > b[j])
            return 0;
    return 1;
}

long nsga2_sort_nondominated(const double *f, size_t n, size_t m, size_t *keep)
{
    size_t *idx = malloc((n ? n : 1) * sizeof *idx);
    if (!idx)
        return -1;
    for (size_t i = 0; i < n; i++)
        idx[i] = i;
    s_lex_ctx_t ctx = {f, m};
    qsort_r(idx, n, sizeof *idx, s_lex_cmp, &ctx);
    /* In lexicographic order a point's dominators (and its earlier equal
     * copies) all come before it, so comparing with the kept ones suffices. */
    long kept = 0;
    for (size_t i = 0; i < n; i++) {
        const double *p = f + idx[i] * m;
        int dominated = 0;
        for (long k = 0; k < kept && !dominated; k++)
            dominated = s_weakly_dominates(f + keep[k] * m, p, m);
        if (!dominated)
            keep[kept++] = idx[i];
    }
    free(idx);
    return kept;
}
