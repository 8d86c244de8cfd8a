/* crowding.c: the crowding distance of one front (see crowding.h). */
#include "crowding.h"

#include <math.h>
#include <stdlib.h>

typedef struct {
    const double *f;
    const size_t *members;
    size_t m, j;
} s_ctx_t;

/* Positions in members, by objective j, ties by point index. */
static int s_cmp(const void *a, const void *b, void *arg)
{
    const s_ctx_t *c = arg;
    size_t pa = c->members[*(const size_t *)a], pb = c->members[*(const size_t *)b];
    double x = c->f[pa * c->m + c->j], y = c->f[pb * c->m + c->j];
    if (x < y)
        return -1;
    if (x > y)
        return 1;
    return (pa > pb) - (pa < pb);
}

int nsga2_crowding(const double *f, size_t m, const size_t *members, size_t k, double *dist)
{
    for (size_t i = 0; i < k; i++)
        dist[i] = 0.0;
    if (k <= 2) {
        for (size_t i = 0; i < k; i++)
            dist[i] = INFINITY;
        return 0;
    }
    size_t *pos = malloc(k * sizeof *pos);
    if (!pos)
        return -1;
    s_ctx_t ctx = {f, members, m, 0};
    for (size_t j = 0; j < m; j++) {
        for (size_t i = 0; i < k; i++)
            pos[i] = i;
        ctx.j = j;
        qsort_r(pos, k, sizeof *pos, s_cmp, &ctx);
        double lo = f[members[pos[0]] * m + j], hi = f[members[pos[k - 1]] * m + j];
        dist[pos[0]] = dist[pos[k - 1]] = INFINITY;
        double range = hi - lo;
        if (!(range > 0.0) || !isfinite(range))
            continue;
        for (size_t i = 1; i + 1 < k; i++) {
            double gap = f[members[pos[i + 1]] * m + j] - f[members[pos[i - 1]] * m + j];
            dist[pos[i]] += gap / range;
        }
    }
    free(pos);
    return 0;
}
