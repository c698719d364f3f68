/* synth_rng.c - a small deterministic generator: xoshiro256** (Blackman and
 * Vigna, 2018) seeded through splitmix64, so scenes are reproducible from
 * one 64-bit seed on every platform. */
#include "synth_internal.h"

#include <math.h>

static uint64_t splitmix64(uint64_t *x)
{
    uint64_t z = (*x += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

static uint64_t rotl(uint64_t x, int k)
{
    return (x << k) | (x >> (64 - k));
}

void synth_rng_seed(synth_rng *r, uint64_t seed)
{
    for (int i = 0; i < 4; i++)
        r->s[i] = splitmix64(&seed);
}

uint64_t synth_rng_next(synth_rng *r)
{
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

double synth_rng_uniform(synth_rng *r, double lo, double hi)
{
    /* 53 random bits -> [0, 1) */
    double u = (double)(synth_rng_next(r) >> 11) * 0x1.0p-53;
    return lo + (hi - lo) * u;
}

int synth_rng_int(synth_rng *r, int lo, int hi)
{
    uint64_t span = (uint64_t)(hi - lo) + 1;
    return lo + (int)(synth_rng_next(r) % span);
}

double synth_rng_normal(synth_rng *r)
{
    /* Box-Muller; 1 - u keeps the logarithm finite */
    double u = 1.0 - synth_rng_uniform(r, 0, 1);
    double v = synth_rng_uniform(r, 0, 1);
    return sqrt(-2.0 * log(u)) * cos(2.0 * SYNTH_PI * v);
}
