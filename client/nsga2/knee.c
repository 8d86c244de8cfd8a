/* knee.c: the knee of a front (see knee.h). */
#include "knee.h"

#include <math.h>
#include <stdlib.h>

long nsga2_knee(const double *front, size_t h, size_t m)
{
    if (h == 0)
        return -1;
    double *sum = calloc(h, sizeof *sum);
    if (!sum)
        return -1;
    for (size_t j = 0; j < m; j++) {
        double lo = front[j], hi = front[j];
        for (size_t k = 1; k < h; k++) {
            lo = fmin(lo, front[k * m + j]);
            hi = fmax(hi, front[k * m + j]);
        }
        /* an objective the whole front agrees on does not tell points apart */
        if (hi > lo)
            for (size_t i = 0; i < h; i++)
                sum[i] += (front[i * m + j] - lo) / (hi - lo);
    }
    long best = 0;
    for (size_t i = 1; i < h; i++)
        if (sum[i] < sum[best])
            best = (long)i;
    free(sum);
    return best;
}
