/* hypervolume.c: exact hypervolume in two and three objectives, a Monte
 * Carlo estimate beyond (see hypervolume.h for the methods and their
 * sources). */
#include "hypervolume.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "rng.h"

#define S_MC_SEED 0x6876u /* fixed: one set, one estimate */

typedef struct {
    double x, y, z;
} s_pt_t;

static int s_cmp_x(const void *a, const void *b)
{
    const s_pt_t *p = a, *q = b;
    if (p->x != q->x)
        return p->x < q->x ? -1 : 1;
    return (p->y > q->y) - (p->y < q->y);
}

static int s_cmp_z(const void *a, const void *b)
{
    const s_pt_t *p = a, *q = b;
    if (p->z != q->z)
        return p->z < q->z ? -1 : 1;
    if (p->x != q->x)
        return p->x < q->x ? -1 : 1;
    return (p->y > q->y) - (p->y < q->y);
}

/* The staircase sweep for a two-objective set sorted by x, then y: after
 * dropping the points an earlier one dominates, the kept points have
 * increasing x and decreasing y, and the area is the sum of rectangles
 * between successive x with the current y. */
static double s_area_staircase(const s_pt_t *pts, size_t n, double rx, double ry)
{
    double area = 0.0, last_y = ry;
    double prev_x = 0.0, prev_y = 0.0;
    int have = 0;
    for (size_t i = 0; i < n; i++) {
        if (pts[i].y >= last_y)
            continue; /* dominated by a kept point (or outside the reference) */
        if (have)
            area += (pts[i].x - prev_x) * (ry - prev_y);
        prev_x = pts[i].x;
        prev_y = pts[i].y;
        last_y = pts[i].y;
        have = 1;
    }
    if (have)
        area += (rx - prev_x) * (ry - prev_y);
    return area;
}

static double s_hv2(s_pt_t *pts, size_t n, double rx, double ry)
{
    qsort(pts, n, sizeof *pts, s_cmp_x);
    return s_area_staircase(pts, n, rx, ry);
}

/* Three objectives: sweep z upwards; between successive z values the
 * dominated slab's cross-section is the two-objective hypervolume of the
 * points at or below. The cross-section's front is kept sorted by x with
 * dominated points removed, so each slab costs one walk of it. */
static int s_hv3(s_pt_t *pts, size_t n, const double *ref, double *out)
{
    qsort(pts, n, sizeof *pts, s_cmp_z);
    s_pt_t *front = malloc((n ? n : 1) * sizeof *front);
    if (!front)
        return -1;
    size_t h = 0;
    double vol = 0.0;
    for (size_t i = 0; i < n; i++) {
        s_pt_t p = pts[i];
        /* Insert p unless a front point weakly dominates it in (x, y). */
        size_t at = 0;
        while (at < h && (front[at].x < p.x || (front[at].x == p.x && front[at].y <= p.y)))
            at++;
        int dominated = at > 0 && front[at - 1].y <= p.y;
        if (!dominated) {
            /* Remove the points after it that p now dominates in (x, y). */
            size_t end = at;
            while (end < h && front[end].y >= p.y)
                end++;
            memmove(front + at + 1, front + end, (h - end) * sizeof *front);
            h = h - (end - at) + 1;
            front[at] = p;
        }
        double next_z = i + 1 < n ? pts[i + 1].z : ref[2];
        if (next_z > p.z)
            vol += s_area_staircase(front, h, ref[0], ref[1]) * (next_z - p.z);
    }
    free(front);
    *out = vol;
    return 0;
}

static int s_monte_carlo(const double *f, const size_t *in, size_t n, size_t m, const double *ref,
                         uint64_t samples, nsga2_hv_t *out)
{
    double *lo = malloc(m * sizeof *lo), *x = malloc(m * sizeof *x);
    if (!lo || !x) {
        free(lo);
        free(x);
        return -1;
    }
    for (size_t j = 0; j < m; j++) {
        lo[j] = ref[j];
        for (size_t i = 0; i < n; i++)
            lo[j] = fmin(lo[j], f[in[i] * m + j]);
    }
    double box = 1.0;
    for (size_t j = 0; j < m; j++)
        box *= ref[j] - lo[j];
    nsga2_rng_t rng;
    nsga2_rng_seed(&rng, S_MC_SEED);
    uint64_t hits = 0;
    for (uint64_t s = 0; s < samples; s++) {
        for (size_t j = 0; j < m; j++)
            x[j] = lo[j] + (ref[j] - lo[j]) * nsga2_rng_uniform(&rng);
        for (size_t i = 0; i < n; i++) {
            const double *p = f + in[i] * m;
            size_t j = 0;
            while (j < m && p[j] <= x[j])
                j++;
            if (j == m) {
                hits++;
                break;
            }
        }
    }
    double p = (double)hits / (double)samples;
    out->value = box * p;
    out->std_error = box * sqrt(p * (1.0 - p) / (double)samples);
    out->method = NSGA2_HV_MONTE_CARLO;
    out->samples = samples;
    free(lo);
    free(x);
    return 0;
}

int nsga2_hypervolume(const double *f, size_t n, size_t m, const double *ref, uint64_t samples,
                      nsga2_hv_t *out)
{
    memset(out, 0, sizeof *out);
    out->method = NSGA2_HV_EXACT;
    for (size_t j = 0; j < m; j++)
        if (isnan(ref[j]))
            return -1;
    size_t *in = malloc((n ? n : 1) * sizeof *in);
    if (!in)
        return -1;
    size_t k = 0;
    int rc = 0;
    for (size_t i = 0; i < n; i++) {
        size_t j = 0;
        for (; j < m; j++) {
            double v = f[i * m + j];
            if (isnan(v)) {
                rc = -1;
                goto done;
            }
            if (!(v < ref[j]))
                break;
        }
        if (j == m)
            in[k++] = i;
    }
    if (k == 0)
        goto done;
    if (m == 1) {
        double best = ref[0];
        for (size_t i = 0; i < k; i++)
            best = fmin(best, f[in[i]]);
        out->value = ref[0] - best;
    } else if (m <= 3) {
        s_pt_t *pts = malloc(k * sizeof *pts);
        if (!pts) {
            rc = -1;
            goto done;
        }
        for (size_t i = 0; i < k; i++) {
            pts[i].x = f[in[i] * m];
            pts[i].y = f[in[i] * m + 1];
            pts[i].z = m == 3 ? f[in[i] * m + 2] : 0.0;
        }
        if (m == 2)
            out->value = s_hv2(pts, k, ref[0], ref[1]);
        else
            rc = s_hv3(pts, k, ref, &out->value);
        free(pts);
    } else {
        rc = s_monte_carlo(f, in, k, m, ref, samples ? samples : NSGA2_HV_SAMPLES, out);
    }
done:
    free(in);
    return rc;
}

void nsga2_hypervolume_default_ref(const double *f, size_t n, size_t m, double *ref)
{
    for (size_t j = 0; j < m; j++) {
        double lo = f[j], hi = f[j];
        for (size_t i = 1; i < n; i++) {
            lo = fmin(lo, f[i * m + j]);
            hi = fmax(hi, f[i * m + j]);
        }
        double range = hi - lo;
        ref[j] = range > 0.0 ? hi + 0.1 * range : hi + 0.1 * fmax(fabs(hi), 1.0);
    }
}
