/*
 * sim_random.c - the simulator's only source of randomness: splitmix64
 * (Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
 * OOPSLA 2014), as in Vigna's public-domain reference splitmix64.c
 * (https://prng.di.unimi.it/splitmix64.c). Never rand(), never the clock.
 */
#include "sim/sim.h"

#include <math.h>

void sim_rng_seed(sim_rng *rng, uint64_t seed) { rng->state = seed; }

uint64_t sim_rng_next(sim_rng *rng)
{
    uint64_t z = (rng->state += UINT64_C(0x9e3779b97f4a7c15));
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

double sim_rng_uniform(sim_rng *rng) { return (double)(sim_rng_next(rng) >> 11) * 0x1.0p-53; }

int sim_rng_range(sim_rng *rng, int low, int high)
{
    if (high <= low)
        return low;
    uint64_t span = (uint64_t)((int64_t)high - low + 1);
    return low + (int)(sim_rng_next(rng) % span);
}

double sim_rng_normal(sim_rng *rng)
{
    double u1 = sim_rng_uniform(rng);
    double u2 = sim_rng_uniform(rng);
    if (u1 < 1e-300)
        u1 = 1e-300;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

int sim_rng_pick(sim_rng *rng, const double *weights, size_t count)
{
    double total = 0.0;
    for (size_t i = 0; i < count; i++)
        total += weights[i] > 0.0 ? weights[i] : 0.0;
    if (total <= 0.0)
        return -1;
    double target = sim_rng_uniform(rng) * total;
    int last = -1;
    for (size_t i = 0; i < count; i++) {
        if (weights[i] <= 0.0)
            continue;
        last = (int)i;
        if (target < weights[i])
            return (int)i;
        target -= weights[i];
    }
    return last;
}

static uint64_t sim_mix_word(uint64_t h, uint64_t word)
{
    sim_rng rng = {h ^ word};
    return sim_rng_next(&rng);
}

uint64_t sim_mix(uint64_t seed, uint64_t a, uint64_t b, uint64_t c, uint64_t d)
{
    uint64_t h = sim_mix_word(UINT64_C(0x6d69746973696d31), seed);
    h = sim_mix_word(h, a);
    h = sim_mix_word(h, b);
    h = sim_mix_word(h, c);
    return sim_mix_word(h, d);
}
