/* dem.h: the world of a 2-D discrete element simulation and its time
 * integrator.
 *
 * The world is n discs (position, velocity, spin, radius, mass, contact
 * stiffness) and up to four rigid boundaries: a floor that can be shaken
 * vertically, y_f(t) = A*s(t)*sin(w*(t - t0)) (s a smooth ramp from 0 to 1
 * over the ramp time, so the start excites few transients), two side walls
 * that move vertically with the floor (the floor and walls are one shaken
 * container), and a horizontal plate of finite mass that moves vertically
 * only (or is held fixed). Gravity points down (-y).
 *
 * Discs are 2-D: a disc of radius r is a cylinder of length 2r, so its mass
 * is density*pi*r^2*2r and its moment of inertia m*r^2/2. The stiffness of a
 * disc-disc contact is the harmonic mean 2*k_i*k_j/(k_i + k_j) (two equal
 * discs touch with their own k; a soft disc dominates a mixed pair); a
 * disc-boundary contact uses the disc's own k. Damping comes from one damping
 * ratio for every contact (contact.h).
 *
 * Time stepping is velocity Verlet (kick-drift-kick). Velocity-dependent
 * forces (dashpots) use the velocity predicted at the end of the step,
 * v(t+dt/2) + a(t)*dt/2, which keeps the scheme second order for damped
 * contacts; the tangential displacement uses the half-step velocity, which is
 * exactly the step's relative motion. Without dashpots and friction this is
 * plain velocity Verlet, a symplectic method (Hairer, Lubich & Wanner,
 * "Geometric Numerical Integration", 2006).
 *
 * Not here: the contact law (contact.c), the pair search (cells.c), building
 * a scenario (pad.c). */
#ifndef GRANULAR_DEM_H
#define GRANULAR_DEM_H

#include <stddef.h>
#include <stdint.h>

#include "cells.h"
#include "contact.h"

typedef struct {
    size_t n;
    /* Per disc. Caller fills x, y, vx, vy, w, r, m, k before prepare. */
    double *x, *y, *vx, *vy, *w;
    double *ax, *ay, *aw; /* accelerations from the last force evaluation */
    double *r, *m, *k;
    granular_contacts_t *contacts;

    double zeta;    /* damping ratio of every contact */
    double mu;      /* friction coefficient of every contact */
    double gravity; /* m/s^2, pointing down */
    /* Local ("non-viscous") damping for quasi-static settling, as in
     * Itasca's PFC after Cundall: each component of a body's net force F
     * loses local_damping*|F| against its velocity. 0 turns it off (it must
     * be off whenever dynamics are measured). */
    double local_damping;

    /* Boundaries: each is off unless its flag is set. */
    int has_floor, has_walls, has_plate;
    double wall_left, wall_right; /* x of the side walls */
    double floor_rest;            /* floor height when not shaken */
    double shake_amp, shake_omega, shake_t0, shake_ramp;
    double floor_y, floor_v, floor_a; /* at time t */
    double plate_y, plate_v, plate_a; /* plate's bottom face */
    double plate_mass;
    int plate_fixed;
    double plate_force; /* upward contact force on the plate, last evaluation */

    double t, dt;
    uint32_t stamp; /* force evaluations so far: contact history marks */

    /* Private. */
    double floor_y_prev, disp_dt;
    double *vpx, *vpy, *vpw, *fx, *fy, *tq;
    granular_cells_t *cells;
} granular_world_t;

/* Creates a world for n discs, everything zero. Returns NULL on out of
 * memory. Caller destroys it. */
granular_world_t *granular_world_new(size_t n);
void granular_world_destroy(granular_world_t **self_p);

/* Finishes setup once discs, boundaries and dt are set: builds the cell
 * list over [x0,x1] x [y0,y1] (discs may leave it; see cells.h) and
 * evaluates the initial forces. Returns 0, or -1 on out of memory. */
int granular_world_prepare(granular_world_t *self, double x0, double x1, double y0, double y1);

/* Re-evaluates forces and accelerations at the current state without
 * moving (after the caller changed a boundary, e.g. lowered the plate). */
void granular_world_refresh(granular_world_t *self);

/* Advances one time step dt. */
void granular_world_step(granular_world_t *self);

/* Starts shaking the floor from time now: amplitude amp (m), angular
 * frequency omega, ramped in over ramp seconds (0: at once). */
void granular_world_shake(granular_world_t *self, double amp, double omega, double ramp);

/* Copies the whole dynamic state (discs, contacts, boundaries, time) of src,
 * a world of the same size, into dst. */
void granular_world_copy_state(granular_world_t *dst, const granular_world_t *src);

/* Shortest contact duration any pair could have, for choosing dt. A pair's
 * k_ij/m*_ij = (m_i + m_j)/(m_i/a_j + m_j/a_i) with a = k/m is a weighted
 * harmonic mean of a_i and a_j, so 2*max(a) bounds every disc pair tightly;
 * a rigid boundary gives a_i, the plate k_i*(1/m_i + 1/M). */
double granular_world_contact_time(const granular_world_t *self);

/* 1 when every position and velocity is finite. */
int granular_world_finite(const granular_world_t *self);

#endif
