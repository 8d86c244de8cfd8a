/* contact.c: the linear Cundall-Strack contact law and the small per-disc
 * table of contact histories. See contact.h for the law; this file owns its
 * arithmetic and the table's bookkeeping, nothing about geometry. */
#include "contact.h"

#include <math.h>

granular_history_t *granular_contacts_find(granular_contacts_t *self, int32_t partner,
                                           uint32_t stamp)
{
    for (uint32_t i = 0; i < self->n; i++) {
        if (self->h[i].partner == partner) {
            self->h[i].stamp = stamp;
            return &self->h[i];
        }
    }
    if (self->n == GRANULAR_MAX_CONTACTS)
        return NULL;
    granular_history_t *h = &self->h[self->n++];
    h->partner = partner;
    h->stamp = stamp;
    h->xi = 0.0;
    return h;
}

void granular_contacts_prune(granular_contacts_t *self, uint32_t stamp)
{
    uint32_t kept = 0;
    for (uint32_t i = 0; i < self->n; i++)
        if (self->h[i].stamp == stamp)
            self->h[kept++] = self->h[i];
    self->n = kept;
}

void granular_law_make(granular_law_t *law, double k, double m_star, double zeta, double mu)
{
    law->k_n = k;
    law->c_n = 2.0 * zeta * sqrt(k * m_star);
    law->k_t = GRANULAR_KT_RATIO * k;
    law->c_t = 2.0 * zeta * sqrt(law->k_t * m_star);
    law->mu = mu;
}

double granular_contact_time(double k, double m_star, double zeta)
{
    double w0sq = k / m_star;
    return M_PI / sqrt(w0sq * (1.0 - zeta * zeta));
}

double granular_zeta_from_restitution(double e)
{
    double l = log(e);
    return -l / sqrt(M_PI * M_PI + l * l);
}

void granular_contact_force(const granular_law_t *law, double delta, double vn, double vt,
                            double dxi, double *xi, double *fn, double *ft)
{
    /* vn > 0 means b moves away from a: the overlap shrinks. */
    double f_n = law->k_n * delta - law->c_n * vn;
    *xi += dxi;
    double f_t = -law->k_t * (*xi) - law->c_t * vt;
    double cap = law->mu * (f_n > 0.0 ? f_n : 0.0);
    if (fabs(f_t) > cap) {
        f_t = f_t > 0.0 ? cap : -cap;
        /* Sliding: the spring stretches no further than the cap allows. */
        *xi = law->k_t > 0.0 ? -(f_t + law->c_t * vt) / law->k_t : 0.0;
    }
    *fn = f_n;
    *ft = f_t;
}
