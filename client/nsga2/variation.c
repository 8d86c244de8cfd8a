/* variation.c: tournament, SBX and polynomial mutation (see variation.h).
 * The formulas are the bounded ones of the NSGA-II reference code: the
 * spread factor's distribution is cut at each bound so a child never needs
 * clipping except for rounding. */
#include "variation.h"

#include <math.h>

#define S_EPS 1e-14

size_t nsga2_tournament(nsga2_rng_t *rng, size_t n, const size_t *rank, const double *crowd)
{
    size_t a = (size_t)nsga2_rng_below(rng, n);
    size_t b = (size_t)nsga2_rng_below(rng, n - 1);
    if (b >= a)
        b++; /* distinct from a, uniform over the others */
    if (rank[a] != rank[b])
        return rank[a] < rank[b] ? a : b;
    if (crowd[a] != crowd[b])
        return crowd[a] > crowd[b] ? a : b;
    return a;
}

static double s_clamp(double v, double lo, double hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

/* The spread factor for one side: beta measures the room between the nearer
 * parent and the bound on that side. */
static double s_betaq(double u, double beta, double eta)
{
    double alpha = 2.0 - pow(beta, -(eta + 1.0));
    if (u <= 1.0 / alpha)
        return pow(u * alpha, 1.0 / (eta + 1.0));
    return pow(1.0 / (2.0 - u * alpha), 1.0 / (eta + 1.0));
}

void nsga2_sbx(nsga2_rng_t *rng, const double *p1, const double *p2, const double *lo,
               const double *hi, size_t n, double pc, double eta, double *c1, double *c2)
{
    if (nsga2_rng_uniform(rng) > pc) {
        for (size_t i = 0; i < n; i++) {
            c1[i] = p1[i];
            c2[i] = p2[i];
        }
        return;
    }
    for (size_t i = 0; i < n; i++) {
        if (nsga2_rng_uniform(rng) > 0.5 || fabs(p1[i] - p2[i]) <= S_EPS) {
            c1[i] = p1[i];
            c2[i] = p2[i];
            continue;
        }
        double y1 = fmin(p1[i], p2[i]), y2 = fmax(p1[i], p2[i]);
        double yl = lo[i], yu = hi[i];
        double u = nsga2_rng_uniform(rng);
        double bq = s_betaq(u, 1.0 + 2.0 * (y1 - yl) / (y2 - y1), eta);
        double a = s_clamp(0.5 * ((y1 + y2) - bq * (y2 - y1)), yl, yu);
        bq = s_betaq(u, 1.0 + 2.0 * (yu - y2) / (y2 - y1), eta);
        double b = s_clamp(0.5 * ((y1 + y2) + bq * (y2 - y1)), yl, yu);
        /* Which child gets which value is a fair coin, as in the reference. */
        if (nsga2_rng_uniform(rng) <= 0.5) {
            c1[i] = b;
            c2[i] = a;
        } else {
            c1[i] = a;
            c2[i] = b;
        }
    }
}

void nsga2_mutate(nsga2_rng_t *rng, double *x, const double *lo, const double *hi, size_t n,
                  double pm, double eta)
{
    const double pw = 1.0 / (eta + 1.0);
    for (size_t i = 0; i < n; i++) {
        if (nsga2_rng_uniform(rng) > pm)
            continue;
        double y = x[i], yl = lo[i], yu = hi[i], range = yu - yl;
        double d1 = (y - yl) / range, d2 = (yu - y) / range;
        double u = nsga2_rng_uniform(rng), dq;
        if (u <= 0.5) {
            double v = 2.0 * u + (1.0 - 2.0 * u) * pow(1.0 - d1, eta + 1.0);
            dq = pow(v, pw) - 1.0;
        } else {
            double v = 2.0 * (1.0 - u) + 2.0 * (u - 0.5) * pow(1.0 - d2, eta + 1.0);
            dq = 1.0 - pow(v, pw);
        }
        x[i] = s_clamp(y + dq * range, yl, yu);
    }
}
