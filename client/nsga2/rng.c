/* rng.c: xoshiro256** and splitmix64 as published (see rng.h), plus the two
 * conversions the optimizer needs (a double in [0, 1), an unbiased index). */
#include "rng.h"

uint64_t nsga2_rng_splitmix64(uint64_t *state)
{
    uint64_t z = (*state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

void nsga2_rng_seed(nsga2_rng_t *self, uint64_t seed)
{
    uint64_t sm = seed;
    for (int i = 0; i < 4; i++)
        self->s[i] = nsga2_rng_splitmix64(&sm);
}

static inline uint64_t s_rotl(uint64_t x, int k)
{
    return (x << k) | (x >> (64 - k));
}

uint64_t nsga2_rng_next(nsga2_rng_t *self)
{
    uint64_t *s = self->s;
    const uint64_t result = s_rotl(s[1] * 5, 7) * 9;
    const uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = s_rotl(s[3], 45);
    return result;
}

double nsga2_rng_uniform(nsga2_rng_t *self)
{
    return (double)(nsga2_rng_next(self) >> 11) * 0x1.0p-53;
}

uint64_t nsga2_rng_below(nsga2_rng_t *self, uint64_t n)
{
    /* Reject the top partial copy of [0, n) so every index is equally likely. */
    const uint64_t limit = UINT64_MAX - UINT64_MAX % n;
    uint64_t x;
    do
        x = nsga2_rng_next(self);
    while (x >= limit);
    return x % n;
}
