/* dem.c: the disc world and its velocity Verlet integrator: kicks and
 * drifts, boundary motion, and the force loop that applies the contact law
 * (contact.c) to every overlapping pair found by the cell list (cells.c) and
 * to every disc touching a boundary. Owns no scenario (pad.c). */
#include "dem.h"

#include <assert.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* The double arrays of a world, for allocation and copying. */
#define S_ARRAYS(X)                                                                                \
    X(x)                                                                                           \
    X(y) X(vx) X(vy) X(w) X(ax) X(ay) X(aw) X(r) X(m) X(k) X(vpx) X(vpy) X(vpw) X(fx) X(fy) X(tq)

granular_world_t *granular_world_new(size_t n)
{
    granular_world_t *self = calloc(1, sizeof *self);
    if (!self)
        return NULL;
    self->n = n;
    size_t cnt = n ? n : 1;
    int ok = 1;
#define S_ALLOC(f)                                                                                 \
    self->f = calloc(cnt, sizeof(double));                                                         \
    ok = ok && self->f;
    S_ARRAYS(S_ALLOC)
#undef S_ALLOC
    self->contacts = calloc(cnt, sizeof *self->contacts);
    if (!ok || !self->contacts)
        granular_world_destroy(&self);
    return self;
}

void granular_world_destroy(granular_world_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    granular_world_t *self = *self_p;
#define S_FREE(f) free(self->f);
    S_ARRAYS(S_FREE)
#undef S_FREE
    free(self->contacts);
    granular_cells_destroy(&self->cells);
    free(self);
    *self_p = NULL;
}

void granular_world_copy_state(granular_world_t *dst, const granular_world_t *src)
{
    assert(dst->n == src->n);
    size_t bytes = src->n * sizeof(double);
#define S_COPY(f) memcpy(dst->f, src->f, bytes);
    S_ARRAYS(S_COPY)
#undef S_COPY
    memcpy(dst->contacts, src->contacts, src->n * sizeof *src->contacts);
    granular_cells_t *cells = dst->cells;
#define S_COUNT(f) +1
    double *arrays[0 S_ARRAYS(S_COUNT)];
#undef S_COUNT
    size_t a = 0;
#define S_SAVE(f) arrays[a++] = dst->f;
    S_ARRAYS(S_SAVE)
#undef S_SAVE
    granular_contacts_t *contacts = dst->contacts;
    *dst = *src; /* scalars; then put dst's own buffers back */
    a = 0;
#define S_RESTORE(f) dst->f = arrays[a++];
    S_ARRAYS(S_RESTORE)
#undef S_RESTORE
    dst->contacts = contacts;
    dst->cells = cells;
}

/* Floor height, velocity and acceleration at time t. */
static void s_floor_at(const granular_world_t *self, double t, double *y, double *v, double *a)
{
    double tau = t - self->shake_t0;
    if (self->shake_amp == 0.0 || tau <= 0.0) {
        *y = self->floor_rest;
        *v = 0.0;
        *a = 0.0;
        return;
    }
    double A = self->shake_amp, om = self->shake_omega, T = self->shake_ramp;
    /* Smoothstep ramp s(u) = 3u^2 - 2u^3 and its derivatives. */
    double s = 1.0, ds = 0.0, dds = 0.0;
    if (T > 0.0 && tau < T) {
        double u = tau / T;
        s = u * u * (3.0 - 2.0 * u);
        ds = 6.0 * u * (1.0 - u) / T;
        dds = (6.0 - 12.0 * u) / (T * T);
    }
    double sn = sin(om * tau), cs = cos(om * tau);
    *y = self->floor_rest + A * s * sn;
    *v = A * (ds * sn + s * om * cs);
    *a = A * (dds * sn + 2.0 * ds * om * cs - s * om * om * sn);
}

void granular_world_shake(granular_world_t *self, double amp, double omega, double ramp)
{
    self->shake_amp = amp;
    self->shake_omega = omega;
    self->shake_t0 = self->t;
    self->shake_ramp = ramp;
}

double granular_world_contact_time(const granular_world_t *self)
{
    double w2 = 0.0;
    for (size_t i = 0; i < self->n; i++) {
        double a = self->k[i] / self->m[i];
        w2 = fmax(w2, 2.0 * a);
        if (self->plate_mass > 0.0)
            w2 = fmax(w2, self->k[i] * (1.0 / self->m[i] + 1.0 / self->plate_mass));
    }
    if (!(w2 > 0.0))
        return INFINITY;
    return M_PI / sqrt(w2 * (1.0 - self->zeta * self->zeta));
}

int granular_world_finite(const granular_world_t *self)
{
    for (size_t i = 0; i < self->n; i++)
        if (!isfinite(self->x[i]) || !isfinite(self->y[i]) || !isfinite(self->vx[i]) ||
            !isfinite(self->vy[i]) || !isfinite(self->w[i]))
            return 0;
    return isfinite(self->plate_y) && isfinite(self->plate_v);
}

/* Disc i (body a) against a boundary (body b) along n = (nx, ny) from the
 * disc to the boundary, t = (-ny, nx). The boundary moves with velocity
 * (0, bv_half) over the step and (0, bv_end) at its end. Returns the force
 * on the boundary along n. */
static double s_boundary(granular_world_t *self, size_t i, int32_t partner, double nx, double ny,
                         double delta, double m_other, double bv_half, double bv_end)
{
    double tx = -ny, ty = nx;
    double r = self->r[i], m = self->m[i];
    double m_star = m_other > 0.0 ? m * m_other / (m + m_other) : m;
    granular_law_t law;
    granular_law_make(&law, self->k[i], m_star, self->zeta, self->mu);
    /* Relative velocity of the boundary's contact point with respect to the
     * disc's, v_b - (v_a + w_a*r*t). */
    double vhx = -self->vx[i], vhy = bv_half - self->vy[i];
    double vt_half = vhx * tx + vhy * ty - self->w[i] * r;
    double vex = -self->vpx[i], vey = bv_end - self->vpy[i];
    double vn = vex * nx + vey * ny;
    double vt = vex * tx + vey * ty - self->vpw[i] * r;
    granular_history_t *h = granular_contacts_find(&self->contacts[i], partner, self->stamp);
    double scratch = 0.0;
    double fn, ft;
    granular_contact_force(&law, delta, vn, vt, vt_half * self->disp_dt, h ? &h->xi : &scratch, &fn,
                           &ft);
    self->fx[i] -= fn * nx + ft * tx;
    self->fy[i] -= fn * ny + ft * ty;
    self->tq[i] -= r * ft;
    return fn;
}

static void s_pair(void *ctx, uint32_t i, uint32_t j)
{
    granular_world_t *self = ctx;
    double dx = self->x[j] - self->x[i], dy = self->y[j] - self->y[i];
    double reach = self->r[i] + self->r[j];
    double d2 = dx * dx + dy * dy;
    if (d2 >= reach * reach || d2 == 0.0)
        return;
    double d = sqrt(d2);
    double nx = dx / d, ny = dy / d, tx = -ny, ty = nx;
    double ri = self->r[i], rj = self->r[j];
    double mi = self->m[i], mj = self->m[j];
    double ki = self->k[i], kj = self->k[j];
    granular_law_t law;
    granular_law_make(&law, 2.0 * ki * kj / (ki + kj), mi * mj / (mi + mj), self->zeta, self->mu);
    /* v_b - w_b*r_b*t - (v_a + w_a*r_a*t), the relative velocity of the
     * contact points. */
    double vhx = self->vx[j] - self->vx[i], vhy = self->vy[j] - self->vy[i];
    double vt_half = vhx * tx + vhy * ty - self->w[j] * rj - self->w[i] * ri;
    double vex = self->vpx[j] - self->vpx[i], vey = self->vpy[j] - self->vpy[i];
    double vn = vex * nx + vey * ny;
    double vt = vex * tx + vey * ty - self->vpw[j] * rj - self->vpw[i] * ri;
    granular_history_t *h = granular_contacts_find(&self->contacts[i], (int32_t)j, self->stamp);
    double scratch = 0.0;
    double fn, ft;
    granular_contact_force(&law, reach - d, vn, vt, vt_half * self->disp_dt, h ? &h->xi : &scratch,
                           &fn, &ft);
    double fx = fn * nx + ft * tx, fy = fn * ny + ft * ty;
    self->fx[j] += fx;
    self->fy[j] += fy;
    self->fx[i] -= fx;
    self->fy[i] -= fy;
    self->tq[i] -= ri * ft;
    self->tq[j] -= rj * ft;
}

static double s_sign(double v)
{
    return v > 0.0 ? 1.0 : v < 0.0 ? -1.0 : 0.0;
}

/* Evaluates every force at the current positions and sets the accelerations. */
static void s_forces(granular_world_t *self, double disp_dt)
{
    size_t n = self->n;
    double hdt = 0.5 * self->dt;
    self->stamp++;
    self->disp_dt = disp_dt;
    for (size_t i = 0; i < n; i++) {
        self->vpx[i] = self->vx[i] + hdt * self->ax[i];
        self->vpy[i] = self->vy[i] + hdt * self->ay[i];
        self->vpw[i] = self->w[i] + hdt * self->aw[i];
        self->fx[i] = 0.0;
        self->fy[i] = 0.0;
        self->tq[i] = 0.0;
    }
    granular_cells_build(self->cells, self->x, self->y);
    granular_cells_pairs(self->cells, s_pair, self);

    double floor_vh = self->dt > 0.0 ? (self->floor_y - self->floor_y_prev) / self->dt : 0.0;
    double plate_vp = self->plate_fixed ? 0.0 : self->plate_v + hdt * self->plate_a;
    double plate_vh = self->plate_fixed ? 0.0 : self->plate_v;
    double plate_m = self->plate_fixed ? 0.0 : self->plate_mass;
    double plate_f = 0.0;
    for (size_t i = 0; i < n; i++) {
        double x = self->x[i], y = self->y[i], r = self->r[i];
        if (self->has_floor && y - self->floor_y < r)
            s_boundary(self, i, GRANULAR_FLOOR, 0.0, -1.0, r - (y - self->floor_y), 0.0, floor_vh,
                       self->floor_v);
        if (self->has_walls) {
            if (x - self->wall_left < r)
                s_boundary(self, i, GRANULAR_WALL_LEFT, -1.0, 0.0, r - (x - self->wall_left), 0.0,
                           floor_vh, self->floor_v);
            if (self->wall_right - x < r)
                s_boundary(self, i, GRANULAR_WALL_RIGHT, 1.0, 0.0, r - (self->wall_right - x), 0.0,
                           floor_vh, self->floor_v);
        }
        if (self->has_plate && self->plate_y - y < r)
            plate_f += s_boundary(self, i, GRANULAR_PLATE, 0.0, 1.0, r - (self->plate_y - y),
                                  plate_m, plate_vh, plate_vp);
    }
    double alpha = self->local_damping;
    for (size_t i = 0; i < n; i++) {
        double m = self->m[i], r = self->r[i];
        if (alpha > 0.0) {
            self->fy[i] -= m * self->gravity;
            self->fx[i] -= alpha * fabs(self->fx[i]) * s_sign(self->vpx[i]);
            self->fy[i] -= alpha * fabs(self->fy[i]) * s_sign(self->vpy[i]);
            self->tq[i] -= alpha * fabs(self->tq[i]) * s_sign(self->vpw[i]);
            self->fy[i] += m * self->gravity;
        }
        self->ax[i] = self->fx[i] / m;
        self->ay[i] = self->fy[i] / m - self->gravity;
        self->aw[i] = self->tq[i] * 2.0 / (m * r * r);
        granular_contacts_prune(&self->contacts[i], self->stamp);
    }
    self->plate_force = plate_f;
    self->plate_a = 0.0;
    if (self->has_plate && !self->plate_fixed) {
        double f = plate_f - self->plate_mass * self->gravity;
        f -= alpha * fabs(f) * s_sign(plate_vp);
        self->plate_a = f / self->plate_mass;
    }
}

int granular_world_prepare(granular_world_t *self, double x0, double x1, double y0, double y1)
{
    double rmax = 0.0;
    for (size_t i = 0; i < self->n; i++)
        if (self->r[i] > rmax)
            rmax = self->r[i];
    granular_cells_destroy(&self->cells);
    self->cells = granular_cells_new(self->n, x0, x1, y0, y1, rmax > 0.0 ? 2.0 * rmax : 1.0);
    if (!self->cells)
        return -1;
    s_floor_at(self, self->t, &self->floor_y, &self->floor_v, &self->floor_a);
    self->floor_y_prev = self->floor_y;
    granular_world_refresh(self);
    return 0;
}

void granular_world_refresh(granular_world_t *self)
{
    /* Velocities are whole-step values here: predict nothing, move nothing. */
    for (size_t i = 0; i < self->n; i++)
        self->ax[i] = self->ay[i] = self->aw[i] = 0.0;
    self->plate_a = 0.0;
    s_forces(self, 0.0);
}

void granular_world_step(granular_world_t *self)
{
    size_t n = self->n;
    double dt = self->dt, hdt = 0.5 * dt;
    for (size_t i = 0; i < n; i++) {
        self->vx[i] += hdt * self->ax[i];
        self->vy[i] += hdt * self->ay[i];
        self->w[i] += hdt * self->aw[i];
        self->x[i] += dt * self->vx[i];
        self->y[i] += dt * self->vy[i];
    }
    if (self->has_plate && !self->plate_fixed) {
        self->plate_v += hdt * self->plate_a;
        self->plate_y += dt * self->plate_v;
    }
    self->t += dt;
    self->floor_y_prev = self->floor_y;
    s_floor_at(self, self->t, &self->floor_y, &self->floor_v, &self->floor_a);
    s_forces(self, dt);
    for (size_t i = 0; i < n; i++) {
        self->vx[i] += hdt * self->ax[i];
        self->vy[i] += hdt * self->ay[i];
        self->w[i] += hdt * self->aw[i];
    }
    if (self->has_plate && !self->plate_fixed)
        self->plate_v += hdt * self->plate_a;
}
