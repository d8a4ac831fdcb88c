/* rng: splitmix64, the one small random generator of the project.
 *
 * Every seeded choice (the training sample, the simulated bench, the demo's
 * spread of conditions) draws from it, so a seed gives the same numbers on
 * every machine and build.  The state is one word the caller owns; there is
 * no global state. */
#ifndef ST_RNG_H
#define ST_RNG_H

#include <stdint.h>

/* splitmix64's finaliser: a well-mixed 64-bit hash of z. */
uint64_t rng_mix64(uint64_t z);

/* Advances *state and returns the next number of its sequence. */
uint64_t rng_splitmix64(uint64_t *state);

/* A uniform double in [0, 1) from the next number. */
double rng_uniform(uint64_t *state);

#endif
