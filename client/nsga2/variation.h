/* variation.h: NSGA-II's variation operators on real genomes inside box
 * bounds: binary tournament by the crowded-comparison operator, simulated
 * binary crossover (SBX; Deb & Agrawal, "Simulated binary crossover for
 * continuous search space", Complex Systems 9, 1995) and polynomial mutation
 * (Deb & Goyal, 1996), both in the bounded form of the NSGA-II authors'
 * reference code (version 1.1.6). Randomness only from the nsga2_rng_t
 * passed in, so one seed gives one search. */
#ifndef CLIENT_NSGA2_VARIATION_H
#define CLIENT_NSGA2_VARIATION_H

#include <stddef.h>

#include "rng.h"

/* Crowded comparison (IEEE TEC 6(2), 2002, section III-B): of two random
 * distinct individuals out of n (n >= 2), the lower rank wins, then the
 * larger crowding distance, then the first drawn. Returns the winner. */
size_t nsga2_tournament(nsga2_rng_t *rng, size_t n, const size_t *rank, const double *crowd);

/* SBX of parents p1, p2 (n genes, lo[i] < hi[i]) into children c1, c2, with
 * probability pc for the pair and distribution index eta; each gene is
 * crossed with probability 1/2 and only when the parents differ in it by more
 * than 1e-14. Children stay within the bounds. */
void nsga2_sbx(nsga2_rng_t *rng, const double *p1, const double *p2, const double *lo,
               const double *hi, size_t n, double pc, double eta, double *c1, double *c2);

/* Polynomial mutation of x in place: each gene with probability pm and
 * distribution index eta; genes stay within the bounds. */
void nsga2_mutate(nsga2_rng_t *rng, double *x, const double *lo, const double *hi, size_t n,
                  double pm, double eta);

#endif
