/* nn/rng.c: xoshiro256** seeded by splitmix64 (reference algorithms from "Scrambled Linear
 * Pseudorandom Number Generators", ACM TOMS 47(4), 2021). */
#include "nn/rng.h"

#include <math.h>

static uint64_t splitmix64(uint64_t *x) {
    uint64_t z = (*x += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

void rng_seed(Rng *r, uint64_t seed) {
    uint64_t x = seed;
    for (int i = 0; i < 4; i++) r->s[i] = splitmix64(&x);
}

static inline uint64_t rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

uint64_t rng_u64(Rng *r) {
    uint64_t *s = r->s;
    uint64_t result = rotl(s[1] * 5, 7) * 9;
    uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 45);
    return result;
}

double rng_uniform(Rng *r) { return (double)(rng_u64(r) >> 11) * 0x1.0p-53; }

double rng_normal(Rng *r) {
    double u1 = rng_uniform(r), u2 = rng_uniform(r);
    if (u1 < 1e-300) u1 = 1e-300;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

uint64_t rng_below(Rng *r, uint64_t n) {
    if (n <= 1) return 0;
    uint64_t limit = UINT64_MAX - UINT64_MAX % n; /* reject the biased tail */
    uint64_t x;
    do x = rng_u64(r);
    while (x >= limit);
    return x % n;
}

void rng_shuffle(Rng *r, long *a, long n) {
    for (long i = n - 1; i > 0; i--) {
        long j = (long)rng_below(r, (uint64_t)i + 1);
        long t = a[i];
        a[i] = a[j];
        a[j] = t;
    }
}
