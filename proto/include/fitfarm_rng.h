/* fitfarm_rng.h: the deterministic random number generator of the plugin SDK.
 *
 * Plugins draw randomness only from the 64-bit evaluation seed they are given,
 * through this generator, so that one seed always gives the same bits on every
 * node. xoshiro256** (Blackman & Vigna, "Scrambled linear pseudorandom number
 * generators", 2018/2021) seeded through splitmix64, as the authors recommend.
 * Header-only so that a plugin shared object needs nothing of ours at run time.
 * This header is public and stable: it is part of the plugin ABI. */
#ifndef FITFARM_RNG_H
#define FITFARM_RNG_H

#include <stdint.h>

typedef struct {
    uint64_t s[4];
} fitfarm_rng_t;

/* splitmix64: advances *state and returns the next output. */
static inline uint64_t fitfarm_splitmix64_next(uint64_t *state)
{
    uint64_t z = (*state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/* Seeds the generator's four words from four splitmix64 outputs of seed. */
static inline void fitfarm_rng_seed(fitfarm_rng_t *rng, uint64_t seed)
{
    uint64_t sm = seed;
    for (int i = 0; i < 4; i++)
        rng->s[i] = fitfarm_splitmix64_next(&sm);
}

static inline uint64_t fitfarm_rng__rotl(uint64_t x, int k)
{
    return (x << k) | (x >> (64 - k));
}

/* xoshiro256**: returns the next 64 random bits. */
static inline uint64_t fitfarm_rng_next(fitfarm_rng_t *rng)
{
    uint64_t *s = rng->s;
    const uint64_t result = fitfarm_rng__rotl(s[1] * 5, 7) * 9;
    const uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = fitfarm_rng__rotl(s[3], 45);
    return result;
}

/* Uniform double in [0, 1) from the top 53 bits (the authors' recommended
 * conversion). */
static inline double fitfarm_rng_uniform(fitfarm_rng_t *rng)
{
    return (double)(fitfarm_rng_next(rng) >> 11) * 0x1.0p-53;
}

#endif
