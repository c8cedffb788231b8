/* The generator's random source: xoshiro256** seeded through splitmix64
 * (Blackman & Vigna, "Scrambled linear pseudorandom number generators", 2018;
 * reference constants from their public-domain C code, written out here from
 * memory). Hand-written so that a night depends only on its seed, never on the
 * platform's rand(). Gaussian values use Marsaglia's polar method. */
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

void rt_synth_rng_seed(synth_rng *rng, uint64_t seed, uint64_t stream)
{
    /* Mixing the stream id through splitmix64 first keeps streams of nearby
     * seeds (1, 2, 3 ...) unrelated. */
    uint64_t x = seed;
    uint64_t mixed = splitmix64(&x) ^ (stream * 0xd1342543de82ef95ULL + 0x632be59bd9b4e019ULL);
    for (int i = 0; i < 4; i++)
        rng->s[i] = splitmix64(&mixed);
    rng->has_spare = 0;
    rng->spare = 0.0;
}

uint64_t rt_synth_rng_next(synth_rng *rng)
{
    uint64_t *s = rng->s;
    const uint64_t result = rotl(s[1] * 5, 7) * 9;
    const uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 45);
    return result;
}

double rt_synth_rng_uniform(synth_rng *rng)
{
    /* 53 high bits: every value is an exact multiple of 2^-53 in [0, 1). */
    return (double)(rt_synth_rng_next(rng) >> 11) * 0x1.0p-53;
}

double rt_synth_rng_range(synth_rng *rng, double lo, double hi)
{
    return lo + (hi - lo) * rt_synth_rng_uniform(rng);
}

int rt_synth_rng_int(synth_rng *rng, int lo, int hi)
{
    if (hi <= lo)
        return lo;
    uint64_t span = (uint64_t)((int64_t)hi - lo + 1);
    /* Rejection keeps every value equally likely. */
    uint64_t limit = UINT64_MAX - UINT64_MAX % span;
    uint64_t r;
    do
        r = rt_synth_rng_next(rng);
    while (r >= limit);
    return (int)((int64_t)lo + (int64_t)(r % span));
}

double rt_synth_rng_gauss(synth_rng *rng)
{
    if (rng->has_spare) {
        rng->has_spare = 0;
        return rng->spare;
    }
    double u, v, s;
    do {
        u = 2.0 * rt_synth_rng_uniform(rng) - 1.0;
        v = 2.0 * rt_synth_rng_uniform(rng) - 1.0;
        s = u * u + v * v;
    } while (s >= 1.0 || s == 0.0);
    double m = sqrt(-2.0 * log(s) / s);
    rng->spare = v * m;
    rng->has_spare = 1;
    return u * m;
}
