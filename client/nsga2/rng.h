/* rng.h: the optimizer's own random numbers: xoshiro256** seeded through
 * splitmix64 (Blackman & Vigna, "Scrambled linear pseudorandom number
 * generators", 2018/2021), the same header-only generator the plugins draw
 * from (fitfarm_rng.h), so a search draws the same numbers from the same
 * --seed on every machine and build. Its own state: the optimizer's draws
 * never mix with any evaluation's. Adds the unbiased index the optimizer
 * needs. */
#ifndef CLIENT_NSGA2_RNG_H
#define CLIENT_NSGA2_RNG_H

#include <stdint.h>

#include "fitfarm_rng.h"

typedef fitfarm_rng_t nsga2_rng_t;

/* splitmix64: advances *state and returns the next output. */
uint64_t nsga2_rng_splitmix64(uint64_t *state);
/* Fills the four state words with four splitmix64 outputs from seed. */
void nsga2_rng_seed(nsga2_rng_t *self, uint64_t seed);
/* Next 64 bits of xoshiro256**. */
uint64_t nsga2_rng_next(nsga2_rng_t *self);
/* Uniform in [0, 1): the top 53 bits over 2^53 (common practice). */
double nsga2_rng_uniform(nsga2_rng_t *self);
/* Uniform integer in [0, n), n > 0, without modulo bias (rejection). */
uint64_t nsga2_rng_below(nsga2_rng_t *self, uint64_t n);

#endif
