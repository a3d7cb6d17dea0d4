/* nn/rng.h: xoshiro256** ("Scrambled Linear Pseudorandom Number Generators", ACM Transactions on
 * Mathematical Software 47(4), 2021), seeded through splitmix64. The whole state is the struct: save
 * and restore it by value for bit-exact resume. There is no global generator. */
#ifndef NN_RNG_H
#define NN_RNG_H

#include <stdint.h>

typedef struct { uint64_t s[4]; } Rng;

void rng_seed(Rng *r, uint64_t seed);
uint64_t rng_u64(Rng *r);
double rng_uniform(Rng *r);                 /* [0, 1), 53 bits */
double rng_normal(Rng *r);                  /* standard normal (Box-Muller, one value per call) */
uint64_t rng_below(Rng *r, uint64_t n);     /* uniform in [0, n), unbiased */
void rng_shuffle(Rng *r, long *a, long n);  /* Fisher-Yates */

#endif
