/* goertzel.h: one DFT bin of a sampled signal by Goertzel's algorithm
 * (G. Goertzel, "An algorithm for the evaluation of finite trigonometric
 * series", Amer. Math. Monthly 65(1), 1958), streaming so that a simulation
 * need not keep its time series. The bin index may be fractional (the
 * generalised form: the result is the discrete-time Fourier transform at
 * 2*pi*k/n). Not here: windowing, choosing n (the caller samples a whole
 * number of periods so that k is an integer and no energy leaks). */
#ifndef GRANULAR_GOERTZEL_H
#define GRANULAR_GOERTZEL_H

#include <stddef.h>

typedef struct {
    double w;      /* 2*pi*k/n, radians per sample */
    double coeff;  /* 2*cos(w) */
    double s1, s2; /* the last two states of the recursion */
    size_t count;  /* samples pushed so far */
} granular_goertzel_t;

/* Prepares for bin k of an n-sample window. */
void granular_goertzel_init(granular_goertzel_t *self, double k, size_t n);

/* Feeds the next sample. */
static inline void granular_goertzel_push(granular_goertzel_t *self, double x)
{
    double s = x + self->coeff * self->s1 - self->s2;
    self->s2 = self->s1;
    self->s1 = s;
    self->count++;
}

/* X = sum_m x[m] exp(-i*w*m) over the samples pushed, the same value as
 * numpy.fft.rfft(x)[k] for an integer k. */
void granular_goertzel_result(const granular_goertzel_t *self, double *re, double *im);

/* Amplitude of the sinusoid at bin k: 2|X|/count (k integer, 0 < k < n/2). */
double granular_goertzel_amplitude(const granular_goertzel_t *self);

/* Whole-array convenience: X for bin k of x[0..n-1]. */
void granular_goertzel(const double *x, size_t n, double k, double *re, double *im);

#endif
