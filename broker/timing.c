/* timing.c: running medians of evaluation wall times (timing.h). */
#include "timing.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void broker_timing_add(broker_timing_t *t, double seconds)
{
    if (!isfinite(seconds) || seconds < 0 || seconds > 1e7)
        return;
    t->seconds[t->pos] = (float)seconds;
    t->pos = (uint8_t)((t->pos + 1) % BROKER_TIMING_SAMPLES);
    if (t->n < BROKER_TIMING_SAMPLES)
        t->n++;
    t->cached = 0;
}

static int s_cmp(const void *a, const void *b)
{
    float x = *(const float *)a, y = *(const float *)b;
    return (x > y) - (x < y);
}

double broker_timing_median(broker_timing_t *t, unsigned min_samples)
{
    if (t->n == 0 || t->n < min_samples)
        return -1;
    if (t->cached)
        return t->median;
    float v[BROKER_TIMING_SAMPLES];
    memcpy(v, t->seconds, t->n * sizeof v[0]);
    qsort(v, t->n, sizeof v[0], s_cmp);
    /* the mean of the middle two for an even count, as numpy.median does */
    double m = t->n % 2 ? v[t->n / 2] : 0.5 * ((double)v[t->n / 2 - 1] + (double)v[t->n / 2]);
    t->median = m;
    t->cached = 1;
    return m;
}
