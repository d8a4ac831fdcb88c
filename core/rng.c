#include "rng.h"

uint64_t rng_mix64(uint64_t z)
{
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
    return z ^ (z >> 31);
}

uint64_t rng_splitmix64(uint64_t *state)
{
    return rng_mix64(*state += 0x9e3779b97f4a7c15ull);
}

double rng_uniform(uint64_t *state)
{
    return (double)(rng_splitmix64(state) >> 11) * 0x1.0p-53;
}
