/* rng.c: the optimizer's generator (rng.h) over fitfarm_rng.h, plus an
 * unbiased index in [0, n). */
#include "rng.h"

uint64_t nsga2_rng_splitmix64(uint64_t *state)
{
    return fitfarm_splitmix64_next(state);
}

void nsga2_rng_seed(nsga2_rng_t *self, uint64_t seed)
{
    fitfarm_rng_seed(self, seed);
}

uint64_t nsga2_rng_next(nsga2_rng_t *self)
{
    return fitfarm_rng_next(self);
}

double nsga2_rng_uniform(nsga2_rng_t *self)
{
    return fitfarm_rng_uniform(self);
}

uint64_t nsga2_rng_below(nsga2_rng_t *self, uint64_t n)
{
    /* Reject the top partial copy of [0, n) so every index is equally likely. */
    const uint64_t limit = UINT64_MAX - UINT64_MAX % n;
    uint64_t x;
    do
        x = fitfarm_rng_next(self);
    while (x >= limit);
    return x % n;
}
