/* pad.c: builds the pad scenario (pad.h) in a disc world and runs its three
 * phases, measuring settlement and transmissibility. Owns the scenario's
 * geometry, its random draws and its measurements; not the physics. */
#include "pad.h"

#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#include "dem.h"
#include "fitfarm_plugin.h"
#include "goertzel.h"

static void s_errf(char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void s_errf(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || errlen == 0)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

/* Runs steps time steps, tracing now and then. */
static void s_run(granular_world_t *w, uint64_t steps, granular_trace_t *trace, const char *phase,
                  double frequency, uint64_t sample_every, uint64_t grains_every,
                  const double *stiff)
{
    for (uint64_t s = 0; s < steps; s++) {
        granular_world_step(w);
        if (trace && (s + 1) % sample_every == 0)
            granular_trace_sample(trace, phase, frequency, w);
        if (trace && (s + 1) % grains_every == 0)
            granular_trace_grains(trace, phase, frequency, w, stiff);
    }
}

static uint64_t s_every(double interval, double dt)
{
    double k = floor(interval / dt);
    return k < 1.0 ? 1 : (uint64_t)k;
}

int granular_pad_run(const granular_params_t *p, const double *genes, size_t gene_count,
                     uint64_t seed, granular_trace_t *trace, granular_pad_result_t *out, char *err,
                     size_t errlen)
{
    int rc = FITFARM_PLUGIN_EFAIL;
    size_t n = (size_t)p->rows * (size_t)p->columns;
    granular_world_t *w = NULL, *snap = NULL;
    double *stiff = NULL;
    memset(out, 0, sizeof *out);
    if (gene_count != n) {
        s_errf(err, errlen, "granular: genome has %zu genes, expected %zu (rows*columns = %d*%d)",
               gene_count, n, p->rows, p->columns);
        return FITFARM_PLUGIN_EINVAL;
    }
    w = granular_world_new(n);
    snap = granular_world_new(n);
    stiff = calloc(n, sizeof *stiff);
    if (!w || !snap || !stiff) {
        s_errf(err, errlen, "granular: out of memory for %zu grains", n);
        goto cleanup;
    }

    /* Sites, scatter and materials. Every site draws three numbers whatever
     * the params, so a seed means the same draws under any scatter. */
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, seed);
    double r0 = p->radius, s = p->scatter_radius, j = p->jitter;
    double d = 2.0 * r0 * (1.0 + s + j);
    double width = d * ((double)p->columns + 0.5);
    double row_h = 0.5 * sqrt(3.0) * d;
    double share_sum = 0.0;
    for (int row = 0; row < p->rows; row++) {
        for (int col = 0; col < p->columns; col++) {
            size_t i = (size_t)row * (size_t)p->columns + (size_t)col;
            double u1 = fitfarm_rng_uniform(&rng);
            double u2 = fitfarm_rng_uniform(&rng);
            double u3 = fitfarm_rng_uniform(&rng);
            double r = r0 * (1.0 + s * (2.0 * u1 - 1.0));
            double rho = j * r0 * sqrt(u2), phi = 2.0 * M_PI * u3;
            w->x[i] = 0.5 * d + (double)col * d + ((row & 1) ? 0.5 * d : 0.0) + rho * cos(phi);
            w->y[i] = 0.5 * d + (double)row * row_h + rho * sin(phi);
            double g = genes[i];
            if (!isfinite(g)) {
                s_errf(err, errlen, "granular: gene %zu is not finite", i);
                rc = FITFARM_PLUGIN_EINVAL;
                goto cleanup;
            }
            g = g < 0.0 ? 0.0 : g > 1.0 ? 1.0 : g;
            double q = p->materials == GRANULAR_BINARY ? (g >= 0.5 ? 1.0 : 0.0) : g;
            stiff[i] = q;
            share_sum += q;
            double density = p->density_soft + q * (p->density_stiff - p->density_soft);
            w->k[i] = p->k_soft + q * (p->k_stiff - p->k_soft);
            w->r[i] = r;
            /* A disc is a cylinder of length 2r (dem.h). */
            w->m[i] = density * M_PI * r * r * 2.0 * r;
        }
    }
    w->zeta = p->damping_ratio;
    w->local_damping = GRANULAR_SETTLE_DAMPING;
    w->mu = p->friction;
    w->gravity = p->gravity;
    w->has_floor = 1;
    w->has_walls = 1;
    w->wall_left = 0.0;
    w->wall_right = width;
    w->plate_mass = p->plate_mass;

    double t_c = granular_world_contact_time(w);
    double dt = t_c * GRANULAR_DT_FRACTION;
    if (p->dt > 0.0) {
        if (p->dt > t_c * GRANULAR_DT_MAX_FRACTION) {
            s_errf(err, errlen, "granular: dt = %g s exceeds t_c/10 = %g s of the stiffest contact",
                   p->dt, t_c * GRANULAR_DT_MAX_FRACTION);
            rc = FITFARM_PLUGIN_EINVAL;
            goto cleanup;
        }
        dt = p->dt;
    }
    /* Worst-case step count, so absurd params fail now, not after hours. */
    double steps_needed = 2.0 * p->settle_time / dt;
    for (size_t f = 0; f < p->frequency_count; f++) {
        double hz = p->frequencies[f];
        double dt_f = fmin(dt, 1.0 / (hz * GRANULAR_MIN_STEPS_PER_PERIOD));
        steps_needed += (p->transient_time + fmax(p->measure_time, 1.0 / hz)) / dt_f;
    }
    if (steps_needed > GRANULAR_MAX_STEPS) {
        s_errf(err, errlen, "granular: %.3g time steps of %g s would be needed, at most %.3g",
               steps_needed, dt, GRANULAR_MAX_STEPS);
        rc = FITFARM_PLUGIN_EINVAL;
        goto cleanup;
    }
    w->dt = dt;
    out->dt = dt;
    out->steps = 0;
    double top = 0.5 * d + (double)(p->rows - 1) * row_h + d;
    if (granular_world_prepare(w, 0.0, width, -p->amplitude, top) < 0) {
        s_errf(err, errlen, "granular: out of memory for the cell list");
        goto cleanup;
    }

    if (trace)
        granular_trace_header(trace, seed, p->rows, p->columns, width, dt);

    /* 1. settle */
    uint64_t sample_every = s_every(1e-4, dt), grains_every = s_every(1e-2, dt);
    uint64_t settle_steps = (uint64_t)ceil(p->settle_time / dt);
    if (trace)
        granular_trace_grains(trace, "settle", 0.0, w, stiff);
    s_run(w, settle_steps, trace, "settle", 0.0, sample_every, grains_every, stiff);
    out->steps += settle_steps;
    double h0 = -INFINITY;
    for (size_t i = 0; i < n; i++)
        h0 = fmax(h0, w->y[i] + w->r[i]);

    /* 2. load */
    w->has_plate = 1;
    w->plate_y = h0;
    w->plate_v = 0.0;
    granular_world_refresh(w);
    s_run(w, settle_steps, trace, "load", 0.0, sample_every, grains_every, stiff);
    out->steps += settle_steps;
    if (!granular_world_finite(w)) {
        s_errf(err, errlen, "granular: the simulation became unstable while settling (dt %g s)",
               dt);
        goto cleanup;
    }
    out->settlement_mm = (h0 - w->plate_y) * 1000.0;
    /* From here on dynamics are measured: only the contacts dissipate. */
    w->local_damping = 0.0;
    granular_world_copy_state(snap, w);

    /* 3. shake, one frequency at a time from the settled state */
    double tmax = 0.0;
    for (size_t f = 0; f < p->frequency_count; f++) {
        double hz = p->frequencies[f];
        granular_world_copy_state(w, snap);
        /* A whole number of steps per period: Goertzel's bin is then exact. */
        double per_period = fmax(ceil(1.0 / (hz * dt)), GRANULAR_MIN_STEPS_PER_PERIOD);
        w->dt = 1.0 / (hz * per_period);
        uint64_t P = (uint64_t)per_period;
        double cyc = floor(p->measure_time * hz);
        uint64_t cycles = cyc < 1.0 ? 1 : (uint64_t)cyc;
        uint64_t window = cycles * P;
        uint64_t transient = (uint64_t)ceil(p->transient_time / w->dt);
        granular_world_shake(w, p->amplitude, 2.0 * M_PI * hz, 0.5 * p->transient_time);
        uint64_t shake_sample = P / 40 ? P / 40 : 1;
        s_run(w, transient, trace, "shake", hz, shake_sample, s_every(1e-2, w->dt), stiff);
        granular_goertzel_t gp, gf;
        granular_goertzel_init(&gp, (double)cycles, window);
        granular_goertzel_init(&gf, (double)cycles, window);
        uint64_t grains_shake = s_every(1e-2, w->dt);
        for (uint64_t k = 0; k < window; k++) {
            granular_world_step(w);
            granular_goertzel_push(&gp, w->plate_a);
            granular_goertzel_push(&gf, w->floor_a);
            if (trace && (k + 1) % shake_sample == 0)
                granular_trace_sample(trace, "shake", hz, w);
            if (trace && ((k + 1) % grains_shake == 0 || k + 1 == window))
                granular_trace_grains(trace, "shake", hz, w, stiff);
        }
        out->steps += transient + window;
        if (!granular_world_finite(w)) {
            s_errf(err, errlen, "granular: the simulation became unstable at %g Hz (dt %g s)", hz,
                   w->dt);
            goto cleanup;
        }
        double af = granular_goertzel_amplitude(&gf);
        double T = af > 0.0 ? granular_goertzel_amplitude(&gp) / af : 0.0;
        out->transmissibility[f] = T;
        tmax = fmax(tmax, T);
    }
    /* -240 dB stands in for a plate that does not move at all. */
    out->fitness[0] = 20.0 * log10(fmax(tmax, 1e-12));
    out->fitness[1] = out->settlement_mm;
    out->stiff_share = share_sum / (double)n;
    out->fitness[2] = out->stiff_share;
    if (!isfinite(out->fitness[0]) || !isfinite(out->fitness[1])) {
        s_errf(err, errlen, "granular: a fitness value is not finite");
        goto cleanup;
    }
    if (trace)
        granular_trace_result(trace, out->fitness, p->objectives, out->transmissibility,
                              p->frequency_count, out->settlement_mm, out->stiff_share);
    rc = FITFARM_PLUGIN_OK;
cleanup:
    granular_world_destroy(&w);
    granular_world_destroy(&snap);
    free(stiff);
    return rc;
}
