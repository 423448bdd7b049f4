/* Counter-based random numbers for the synthesiser: every value is a pure function of (seed,
 * stream, counters), so scenes and noise are the same whatever order or thread draws them. */
#ifndef SP_SYNTH_RNG_H
#define SP_SYNTH_RNG_H

#include <math.h>
#include <stdint.h>

/* splitmix64 finaliser (Steele, Lea & Flood 2014): a bijective 64-bit mix. */
static inline uint64_t rng_mix(uint64_t z)
{
    z += 0x9e3779b97f4a7c15ULL;
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/* Key for one stream of draws, e.g. (seed, RNG_NOISE, frame, 0). */
static inline uint64_t rng_key(uint64_t seed, uint64_t stream, uint64_t a, uint64_t b)
{
    return rng_mix(seed ^ rng_mix(stream ^ rng_mix(a ^ rng_mix(b))));
}

/* The n-th 64-bit draw of a stream. */
static inline uint64_t rng_u64(uint64_t key, uint64_t n)
{
    return rng_mix(key + n * 0xd1b54a32d192ed03ULL);
}

/* Uniform in (0, 1): 53 random bits, never exactly 0 or 1. */
static inline double rng_unit(uint64_t key, uint64_t n)
{
    return ((double)(rng_u64(key, n) >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

static inline double rng_range(uint64_t key, uint64_t n, double lo, double hi)
{
    return lo + (hi - lo) * rng_unit(key, n);
}

/* Two independent standard normals from one draw (Box–Muller 1958, 32-bit halves). */
static inline void rng_normal2(uint64_t key, uint64_t n, double *z0, double *z1)
{
    uint64_t u = rng_u64(key, n);
    double u1 = ((double)(u >> 32) + 0.5) * (1.0 / 4294967296.0);
    double u2 = ((double)(u & 0xffffffffULL) + 0.5) * (1.0 / 4294967296.0);
    double r = sqrt(-2.0 * log(u1));
    double a = 6.283185307179586 * u2;
    *z0 = r * cos(a);
    *z1 = r * sin(a);
}

static inline double rng_normal(uint64_t key, uint64_t n)
{
    double z0, z1;
    rng_normal2(key, n, &z0, &z1);
    return z0;
}

/* Stream identifiers: one per kind of draw. */
enum { RNG_NOISE = 1, RNG_LIGHT, RNG_DUST, RNG_BUBBLE, RNG_LAYOUT, RNG_FLICKER, RNG_EMIT };

#endif
