/* goertzel.c: Goertzel's recursion and its final phase correction. Owns
 * only the arithmetic; see goertzel.h for what it is not.
 *
 * The recursion s[m] = x[m] + 2cos(w) s[m-1] - s[m-2] followed by
 * y = s[N-1] - exp(-iw) s[N-2] gives y = exp(iw(N-1)) * sum x[m] exp(-iwm)
 * (the z-transform of the recursion has poles at exp(+-iw); the second step
 * cancels one), so X = exp(-iw(N-1)) * y. For an integer bin that factor is
 * exp(iw), but keeping it general lets a caller probe a fractional bin. */
#include "goertzel.h"

#include <math.h>

void granular_goertzel_init(granular_goertzel_t *self, double k, size_t n)
{
    self->w = 2.0 * M_PI * k / (double)n;
    self->coeff = 2.0 * cos(self->w);
    self->s1 = 0.0;
    self->s2 = 0.0;
    self->count = 0;
}

void granular_goertzel_result(const granular_goertzel_t *self, double *re, double *im)
{
    double c = cos(self->w), s = sin(self->w);
    /* y = s1 - (c - i s) s2 */
    double yr = self->s1 - c * self->s2;
    double yi = s * self->s2;
    /* Reduce the phase before cos/sin: w(N-1) can be thousands of radians. */
    double phase = fmod(self->w * (double)(self->count ? self->count - 1 : 0), 2.0 * M_PI);
    double pc = cos(phase), ps = sin(phase);
    /* X = (pc - i ps) * y */
    *re = pc * yr + ps * yi;
    *im = pc * yi - ps * yr;
}

double granular_goertzel_amplitude(const granular_goertzel_t *self)
{
    if (self->count == 0)
        return 0.0;
    double re, im;
    granular_goertzel_result(self, &re, &im);
    return 2.0 * hypot(re, im) / (double)self->count;
}

void granular_goertzel(const double *x, size_t n, double k, double *re, double *im)
{
    granular_goertzel_t g;
    granular_goertzel_init(&g, k, n);
    for (size_t i = 0; i < n; i++)
        granular_goertzel_push(&g, x[i]);
    granular_goertzel_result(&g, re, im);
}
