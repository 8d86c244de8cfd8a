/* test_granular_physics.c: the granular plugin's discrete element core
 * (worker/plugins/granular: dem, contact, cells, goertzel) against published
 * mechanics. Each check names its source beside it:
 *  - a two-disc head-on collision: contact duration and restitution of the
 *    linear spring-dashpot (Poeschel & Schwager, Computational Granular
 *    Dynamics, 2005), within 1 % at dt = t_c/50;
 *  - a disc resting on the shaken floor (one mass, one spring-dashpot):
 *    base-excitation transmissibility (Rao, Mechanical Vibrations), within
 *    2 % for r in [0.2, 5];
 *  - the undamped contact oscillator under velocity Verlet: energy error
 *    bounded, no drift over 10^6 steps (Hairer, Lubich & Wanner, Geometric
 *    Numerical Integration);
 *  - a monatomic chain of discs (Kittel, Introduction to Solid State
 *    Physics, ch. 4): driven above w_max = 2 sqrt(C/M) the amplitude decays
 *    by exp(-kappa) per site, below it the wave reaches the far end;
 *  - many discs: the cell list finds exactly the pairs a brute-force search
 *    finds. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#include <cmocka.h>

#include "fitfarm_rng.h"
#include "worker/plugins/granular/cells.h"
#include "worker/plugins/granular/contact.h"
#include "worker/plugins/granular/dem.h"
#include "worker/plugins/granular/goertzel.h"

/* Two discs fly at each other with no gravity; the world is built by hand
 * the same way pad.c builds one. Returns the measured contact duration and
 * restitution. */
static void s_collide(double zeta, double dt_fraction, double *t_contact, double *e,
                      double *t_c_ref, double *e_ref)
{
    const double r = 0.01, m = 0.01, k = 1e4, v0 = 0.5;
    granular_world_t *w = granular_world_new(2);
    assert_non_null(w);
    w->r[0] = w->r[1] = r;
    w->m[0] = w->m[1] = m;
    w->k[0] = w->k[1] = k;
    w->x[0] = 0.0;
    w->x[1] = 2.0 * r + 5e-4;
    w->vx[0] = v0;
    w->vx[1] = -v0;
    w->zeta = zeta;
    double m_star = m * m / (m + m);
    /* Poeschel & Schwager 2005: w0 = sqrt(k/m*), gamma = c/(2m*),
     * t_c = pi/sqrt(w0^2 - gamma^2), e = exp(-gamma*t_c). */
    double w0 = sqrt(k / m_star);
    double c = 2.0 * zeta * sqrt(k * m_star);
    double gamma = c / (2.0 * m_star);
    *t_c_ref = M_PI / sqrt(w0 * w0 - gamma * gamma);
    *e_ref = exp(-gamma * *t_c_ref);
    w->dt = *t_c_ref * dt_fraction;
    assert_int_equal(granular_world_prepare(w, -0.05, 0.05, -0.05, 0.05), 0);
    /* Overlap crossings, linearly interpolated between steps. */
    double prev = 2.0 * r - (w->x[1] - w->x[0]), t_in = -1.0, t_out = -1.0;
    for (int s = 0; s < 100000 && t_out < 0.0; s++) {
        granular_world_step(w);
        double delta = 2.0 * r - (w->x[1] - w->x[0]);
        if (prev <= 0.0 && delta > 0.0)
            t_in = w->t - w->dt * delta / (delta - prev);
        if (t_in >= 0.0 && prev > 0.0 && delta <= 0.0)
            t_out = w->t - w->dt * delta / (delta - prev);
        prev = delta;
    }
    assert_true(t_in >= 0.0 && t_out > t_in);
    granular_world_step(w); /* apart now: velocities are free-flight */
    *t_contact = t_out - t_in;
    *e = (w->vx[1] - w->vx[0]) / (2.0 * v0);
    granular_world_destroy(&w);
}

/* Usage example: two discs collide; the simulated collision lasts the
 * textbook contact time and rebounds with the textbook restitution. */
static void test_collision_matches_spring_dashpot_theory(void **state)
{
    (void)state;
    const double zetas[] = {0.0, 0.1, 0.3, 0.6};
    for (size_t i = 0; i < sizeof zetas / sizeof zetas[0]; i++) {
        double tc, e, tc_ref, e_ref;
        s_collide(zetas[i], 1.0 / 50.0, &tc, &e, &tc_ref, &e_ref);
        print_message("zeta %.1f: t_c %.6g (theory %.6g), e %.6g (theory %.6g)\n", zetas[i], tc,
                      tc_ref, e, e_ref);
        /* Within 1 % at dt = t_c/50 (Poeschel & Schwager 2005). */
        if (fabs(tc / tc_ref - 1.0) > 0.01 || fabs(e / e_ref - 1.0) > 0.01)
            fail_msg("zeta %g: t_c %g vs %g, e %g vs %g", zetas[i], tc, tc_ref, e, e_ref);
    }
}

/* The same collision, resolved 10x finer, converges further: the 1 %
 * above is discretisation error, not a modelling difference. */
static void test_collision_converges_with_dt(void **state)
{
    (void)state;
    double tc, e, tc_ref, e_ref;
    s_collide(0.3, 1.0 / 500.0, &tc, &e, &tc_ref, &e_ref);
    assert_true(fabs(tc / tc_ref - 1.0) < 1e-3);
    assert_true(fabs(e / e_ref - 1.0) < 1e-3);
}

/* A disc of mass m resting on the floor is a single-degree-of-freedom
 * mass-spring-damper on a moving base: k = the disc's stiffness,
 * c = 2*zeta*sqrt(k*m). Returns |disc acceleration| / |floor acceleration|
 * at frequency ratio ratio, by Goertzel over whole periods. */
static double s_base_transmissibility(double ratio, double zeta)
{
    const double m = 1.0, wn = 2.0 * M_PI * 10.0, k = m * wn * wn, g = 9.81, r = 0.02;
    const double static_overlap = m * g / k;
    granular_world_t *w = granular_world_new(1);
    assert_non_null(w);
    w->r[0] = r;
    w->m[0] = m;
    w->k[0] = k;
    w->y[0] = r - static_overlap; /* at rest on the floor */
    w->zeta = zeta;
    w->gravity = g;
    w->has_floor = 1;
    double omega = ratio * wn, period = 2.0 * M_PI / omega;
    const int per_period = 400;
    w->dt = period / per_period;
    assert_int_equal(granular_world_prepare(w, -r, r, -r, 4 * r), 0);
    /* Relative motion peaks at A*r^2/(2 zeta) near resonance; A keeps the
     * contact closed (linear) with a margin of 4. */
    double amp = static_overlap / 20.0;
    double ramp = fmax(1.0, 5.0 * period);
    /* Transients decay as exp(-zeta*wn*t): wait 20 time constants. */
    double wait = ramp + 20.0 / (zeta * wn);
    granular_world_shake(w, amp, omega, ramp);
    long steps = (long)ceil(wait / w->dt);
    for (long s = 0; s < steps; s++)
        granular_world_step(w);
    const int cycles = 10;
    granular_goertzel_t gd, gf;
    granular_goertzel_init(&gd, cycles, (size_t)cycles * per_period);
    granular_goertzel_init(&gf, cycles, (size_t)cycles * per_period);
    for (int s = 0; s < cycles * per_period; s++) {
        granular_world_step(w);
        assert_true(w->y[0] < r); /* still touching: the linear regime */
        granular_goertzel_push(&gd, w->ay[0]);
        granular_goertzel_push(&gf, w->floor_a);
    }
    double T = granular_goertzel_amplitude(&gd) / granular_goertzel_amplitude(&gf);
    granular_world_destroy(&w);
    return T;
}

static void test_base_excitation_transmissibility(void **state)
{
    (void)state;
    const double zeta = 0.1;
    const double ratios[] = {0.2, 0.5, 0.8, 1.0, 1.2, M_SQRT2, 2.0, 3.0, 5.0};
    for (size_t i = 0; i < sizeof ratios / sizeof ratios[0]; i++) {
        double r = ratios[i];
        /* Rao, Mechanical Vibrations (base excitation):
         * T(r) = sqrt((1 + (2 zeta r)^2) / ((1 - r^2)^2 + (2 zeta r)^2)). */
        double tz = 2.0 * zeta * r;
        double ref = sqrt((1.0 + tz * tz) / ((1.0 - r * r) * (1.0 - r * r) + tz * tz));
        double T = s_base_transmissibility(r, zeta);
        print_message("r %.3f: T %.6g (Rao %.6g)\n", r, T, ref);
        if (fabs(T / ref - 1.0) > 0.02)
            fail_msg("r = %g: simulated T %g, Rao's formula %g", r, T, ref);
    }
    /* Isolation only above sqrt(2) (Rao): T(1.2) > 1 > T(2). */
    assert_true(s_base_transmissibility(1.2, zeta) > 1.0);
    assert_true(s_base_transmissibility(2.0, zeta) < 1.0);
}

/* Energy of a disc bouncing, undamped and always in contact, on the floor.
 * With gravity the spring's energy about equilibrium is all there is:
 * E = m v^2/2 + k (y - y_eq)^2/2. */
static void test_verlet_energy_bounded_no_drift(void **state)
{
    (void)state;
    const double m = 0.01, k = 1e3, g = 9.81, r = 0.01;
    double wn = sqrt(k / m), y_eq = r - m * g / k;
    granular_world_t *w = granular_world_new(1);
    assert_non_null(w);
    w->r[0] = r;
    w->m[0] = m;
    w->k[0] = k;
    w->gravity = g;
    w->has_floor = 1;
    w->y[0] = y_eq + 0.5 * m * g / k; /* amplitude half the static overlap */
    w->dt = 2.0 * M_PI / wn / 50.0;
    assert_int_equal(granular_world_prepare(w, -r, r, -r, 4 * r), 0);
    double e0 = 0.5 * k * (w->y[0] - y_eq) * (w->y[0] - y_eq);
    const long steps = 1000000, window = 10000;
    double max_first = 0.0, max_last = 0.0, mean_first = 0.0, mean_last = 0.0, max_all = 0.0;
    for (long s = 0; s < steps; s++) {
        granular_world_step(w);
        double dy = w->y[0] - y_eq;
        double e = 0.5 * m * w->vy[0] * w->vy[0] + 0.5 * k * dy * dy;
        double err = fabs(e - e0) / e0;
        max_all = fmax(max_all, err);
        if (s < window) {
            max_first = fmax(max_first, err);
            mean_first += (e - e0) / e0 / window;
        } else if (s >= steps - window) {
            max_last = fmax(max_last, err);
            mean_last += (e - e0) / e0 / window;
        }
    }
    double hdt = wn * w->dt;
    print_message("energy error: max %.3g, first window %.3g, last %.3g, mean drift %.3g\n",
                  max_all, max_first, max_last, mean_last - mean_first);
    /* Hairer, Lubich & Wanner: a symplectic method of order 2 keeps the
     * energy error O((w dt)^2) for all time, with no secular drift. */
    assert_true(max_all < hdt * hdt);
    assert_true(max_last < 1.05 * max_first);
    assert_true(fabs(mean_last - mean_first) < 1e-5);
    granular_world_destroy(&w);
}

/* A vertical chain of n discs between the shaken floor and a fixed plate,
 * precompressed so every contact stays closed: a monatomic chain with
 * C = k, M = m. Returns the displacement amplitude of each disc at the
 * drive frequency. */
static void s_chain(double omega_ratio, double *amp, int n)
{
    const double r = 0.01, m = 0.01, C = 1e3, pre = 1e-4;
    granular_world_t *w = granular_world_new((size_t)n);
    assert_non_null(w);
    double *rest = calloc((size_t)n, sizeof *rest);
    assert_non_null(rest);
    for (int i = 0; i < n; i++) {
        w->r[i] = r;
        w->m[i] = m;
        w->k[i] = C;
        w->y[i] = rest[i] = r - pre + i * (2.0 * r - pre);
    }
    w->has_floor = 1;
    w->has_plate = 1;
    w->plate_fixed = 1;
    w->plate_y = w->y[n - 1] + r - pre;
    w->zeta = 0.01;
    double wmax = 2.0 * sqrt(C / m), omega = omega_ratio * wmax;
    double period = 2.0 * M_PI / omega;
    int per_period = (int)ceil(period / (granular_world_contact_time(w) / 50.0));
    w->dt = period / per_period;
    assert_int_equal(granular_world_prepare(w, -r, r, -r, w->plate_y + r), 0);
    double ramp = 50.0 * period;
    granular_world_shake(w, 1e-7, omega, ramp);
    long steps = (long)ceil(3.0 * ramp / w->dt);
    for (long s = 0; s < steps; s++)
        granular_world_step(w);
    const int cycles = 40;
    granular_goertzel_t *g = calloc((size_t)n, sizeof *g);
    assert_non_null(g);
    for (int i = 0; i < n; i++)
        granular_goertzel_init(&g[i], cycles, (size_t)cycles * per_period);
    for (int s = 0; s < cycles * per_period; s++) {
        granular_world_step(w);
        for (int i = 0; i < n; i++)
            granular_goertzel_push(&g[i], w->y[i] - rest[i]);
    }
    for (int i = 0; i < n; i++)
        amp[i] = granular_goertzel_amplitude(&g[i]);
    free(g);
    free(rest);
    granular_world_destroy(&w);
}

static void test_monatomic_chain_cutoff(void **state)
{
    (void)state;
    enum { N = 40 };
    double above[N], below[N];
    s_chain(1.5, above, N);
    s_chain(0.5, below, N);
    /* Kittel ch. 4: M w^2 = 2C(1 - cos qa). Above w_max no real q exists;
     * u_n ~ (-1)^n exp(-kappa n) with cosh(kappa) = M w^2/(2C) - 1. */
    double x = (1.5 * 2.0) * (1.5 * 2.0) / 2.0 - 1.0;
    double decay = exp(-acosh(x));
    for (int i = 0; i < 4; i++) {
        double ratio = above[i + 1] / above[i];
        print_message("site %d: ratio %.6g (Kittel %.6g)\n", i, ratio, decay);
        if (fabs(ratio / decay - 1.0) > 0.03)
            fail_msg("site %d: amplitude ratio %g, Kittel's exp(-kappa) %g", i, ratio, decay);
    }
    double far_above = 0.0, far_below = 0.0;
    for (int i = 3 * N / 4; i < N; i++) {
        far_above = fmax(far_above, above[i]);
        far_below = fmax(far_below, below[i]);
    }
    print_message("far quarter / first disc: below w_max %.3g, above %.3g\n", far_below / below[0],
                  far_above / above[0]);
    /* Below w_max the wave propagates: the far quarter moves about as much
     * as the first disc; above it, practically not at all. */
    assert_true(far_below > 0.3 * below[0]);
    assert_true(far_above < 1e-6 * above[0]);
}

static void s_count(void *ctx, uint32_t i, uint32_t j)
{
    (void)i;
    (void)j;
    (*(size_t *)ctx)++;
}

typedef struct {
    const double *x, *y;
    double reach;
    size_t close;
} s_close_t;

static void s_close(void *ctx, uint32_t i, uint32_t j)
{
    s_close_t *c = ctx;
    assert_true(i < j);
    double dx = c->x[i] - c->x[j], dy = c->y[i] - c->y[j];
    if (dx * dx + dy * dy < c->reach * c->reach)
        c->close++;
}

/* The cell list is only an accelerator: on random discs (some outside its
 * rectangle) it must find every pair closer than the cell size, as the
 * brute-force double loop does. */
static void test_cells_find_every_close_pair(void **state)
{
    (void)state;
    enum { N = 2000 };
    static double x[N], y[N];
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, 7);
    for (int i = 0; i < N; i++) {
        x[i] = 1.2 * fitfarm_rng_uniform(&rng) - 0.1;
        y[i] = 1.2 * fitfarm_rng_uniform(&rng) - 0.1;
    }
    const double reach = 0.02;
    granular_cells_t *cells = granular_cells_new(N, 0.0, 1.0, 0.0, 1.0, reach);
    assert_non_null(cells);
    granular_cells_build(cells, x, y);
    s_close_t c = {x, y, reach, 0};
    granular_cells_pairs(cells, s_close, &c);
    size_t brute = 0;
    for (int i = 0; i < N; i++)
        for (int j = i + 1; j < N; j++)
            if ((x[i] - x[j]) * (x[i] - x[j]) + (y[i] - y[j]) * (y[i] - y[j]) < reach * reach)
                brute++;
    assert_true(brute > 100);
    assert_int_equal(c.close, brute);
    /* ... while visiting far fewer candidates than all N(N-1)/2 pairs. */
    size_t visited = 0;
    granular_cells_pairs(cells, s_count, &visited);
    assert_true(visited < (size_t)N * (N - 1) / 2 / 20);
    granular_cells_destroy(&cells);
    assert_null(cells);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_collision_matches_spring_dashpot_theory),
        cmocka_unit_test(test_collision_converges_with_dt),
        cmocka_unit_test(test_base_excitation_transmissibility),
        cmocka_unit_test(test_verlet_energy_bounded_no_drift),
        cmocka_unit_test(test_monatomic_chain_cutoff),
        cmocka_unit_test(test_cells_find_every_close_pair),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
