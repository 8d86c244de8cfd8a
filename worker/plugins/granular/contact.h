/* contact.h: the contact law between two bodies (disc-disc or disc-boundary)
 * and the per-contact history it needs.
 *
 * The law is Cundall & Strack's ("A discrete numerical model for granular
 * assemblies", Geotechnique 29(1), 1979) in its linear form:
 *   normal:     F_n = k_n*delta + c_n*(d delta/dt), a linear spring-dashpot
 *               (Poeschel & Schwager, "Computational Granular Dynamics", 2005);
 *               not clipped, so that the collision obeys the textbook
 *               t_c = pi/sqrt(w0^2 - g^2) and e = exp(-g*t_c) exactly
 *               (w0 = sqrt(k/m*), g = c/(2m*));
 *   tangential: a spring on the accumulated tangential displacement xi of the
 *               contact points plus a dashpot, capped at mu*max(F_n, 0)
 *               (Coulomb); while sliding, xi is reset so the spring and
 *               dashpot together carry exactly the capped force.
 * In 2-D the tangent is n rotated by +90 degrees, so xi is a scalar and stays
 * in the tangent plane as the contact rolls round.
 * Not here: finding contacts (cells.c), integrating motion (dem.c). */
#ifndef GRANULAR_CONTACT_H
#define GRANULAR_CONTACT_H

#include <stddef.h>
#include <stdint.h>

/* Tangential spring stiffness as a share of the normal one (2/7, the usual
 * choice for elastic spheres: Silbert et al., Phys. Rev. E 64, 051302, 2001). */
#define GRANULAR_KT_RATIO (2.0 / 7.0)

/* Most contacts one disc owns at a time. A disc of equal-ish neighbours
 * touches at most 6 of them plus two boundaries; a contact beyond this limit
 * still pushes, it only forgets its tangential history between steps. */
#define GRANULAR_MAX_CONTACTS 12

/* Partner ids of boundaries (grains are 0..n-1). */
#define GRANULAR_FLOOR (-1)
#define GRANULAR_WALL_LEFT (-2)
#define GRANULAR_WALL_RIGHT (-3)
#define GRANULAR_PLATE (-4)

typedef struct {
    int32_t partner; /* the other body: a grain index > owner, or a boundary id */
    uint32_t stamp;  /* step at which the contact was last seen */
    double xi;       /* accumulated tangential displacement, m */
} granular_history_t;

/* The contacts one disc owns: those with boundaries and with grains of a
 * larger index. */
typedef struct {
    granular_history_t h[GRANULAR_MAX_CONTACTS];
    uint32_t n;
} granular_contacts_t;

/* Returns the history of the contact with partner, creating it (xi = 0)
 * when the contact is new, and marks it seen at stamp. Returns NULL when the
 * table is full: the caller uses a scratch xi of 0. Borrowed pointer, valid
 * until the next find or prune on this table. */
granular_history_t *granular_contacts_find(granular_contacts_t *self, int32_t partner,
                                           uint32_t stamp);

/* Forgets contacts not seen at stamp (they opened: history restarts at 0). */
void granular_contacts_prune(granular_contacts_t *self, uint32_t stamp);

/* Material of one contact. */
typedef struct {
    double k_n, c_n; /* normal spring (N/m) and dashpot (N s/m) */
    double k_t, c_t; /* tangential spring and dashpot */
    double mu;       /* Coulomb friction coefficient */
} granular_law_t;

/* Fills law for stiffness k, effective mass m_star, damping ratio zeta and
 * friction mu: c_n = 2*zeta*sqrt(k*m*), tangential from GRANULAR_KT_RATIO. */
void granular_law_make(granular_law_t *law, double k, double m_star, double zeta, double mu);

/* Contact duration of the linear spring-dashpot, pi/sqrt(k/m* - g^2) with
 * g = zeta*sqrt(k/m*) (Poeschel & Schwager 2005). */
double granular_contact_time(double k, double m_star, double zeta);

/* Damping ratio that gives restitution e in (0, 1]:
 * zeta = -ln e / sqrt(pi^2 + ln^2 e), inverting e = exp(-g*t_c). */
double granular_zeta_from_restitution(double e);

/* Forces of one contact on body b (the partner), along n (from a to b) and
 * along t (n rotated +90 degrees); body a feels the opposite.
 *   delta: overlap (> 0);  vn, vt: relative velocity of b's contact point
 *   with respect to a's, along n and t, at the end of the step (for the
 *   dashpots);  dxi: tangential displacement of this step (from the
 *   half-step velocity, so exactly the relative motion of the positions).
 * Updates *xi. */
void granular_contact_force(const granular_law_t *law, double delta, double vn, double vt,
                            double dxi, double *xi, double *fn, double *ft);

#endif
