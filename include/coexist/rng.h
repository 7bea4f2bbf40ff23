/* coexist: PCG random streams keyed by what a draw depends on.
 *
 * Generator: PCG32, the XSH-RR output permutation of a 64-bit LCG (M. E. O'Neill, "PCG: A family
 * of simple fast space-efficient statistically good algorithms for random number generation",
 * Harvey Mudd College tech. report HMC-CS-2014-0905, 2014). Streams are keyed: the seed and the
 * stream (increment) of a generator are pure functions of (study seed, purpose, coordinates),
 * never of rank, order or time.
 */
#ifndef COEXIST_RNG_H
#define COEXIST_RNG_H

#include <stdint.h>
#include <stddef.h>

typedef struct cx_rng {
    uint64_t state;
    uint64_t inc; /* always odd */
} cx_rng;

/* What a stream is for; part of the key so that two purposes never share a stream. The values
 * are part of the reproducibility contract: never renumber, only append. */
enum cx_rng_purpose {
    CX_RNG_NETWORK = 1,     /* adjacency and weights of M */
    CX_RNG_INPUT = 2,       /* W_in */
    CX_RNG_BIAS = 3,        /* node biases */
    CX_RNG_PROBE_START = 4, /* random closed-loop starts */
    CX_RNG_TASK = 5,        /* random task placement, noise in tasks */
    CX_RNG_LYAPUNOV = 6,    /* initial perturbation directions */
    CX_RNG_TEST = 99        /* tests only */
};

/* Seed exactly like the reference pcg32_srandom_r(rng, initstate, initseq). */
void cx_rng_seed(cx_rng *rng, uint64_t initstate, uint64_t initseq);

/* Derive a stream from a key: the study seed, a purpose and up to 8 coordinates (integers, or
 * doubles passed through cx_rng_bits). The key is hashed into (initstate, initseq). */
void cx_rng_keyed(cx_rng *rng, uint64_t study_seed, int purpose, const uint64_t *coords,
                  size_t ncoords);

/* The SplitMix64 finaliser (Steele, Lea & Flood 2014, OOPSLA): a bijective 64-bit mixer used to
 * turn keys into seeds (and by other modules to finish their hashes). */
uint64_t cx_rng_mix64(uint64_t z);

/* The bit pattern of a double, for keys (-0.0 is folded to 0.0). */
uint64_t cx_rng_bits(double x);

/* Next 32-bit output (pcg32_random_r). */
uint32_t cx_rng_u32(cx_rng *rng);

/* Advance by `delta` steps in O(log delta) (Brown 1994, "Random number generation with arbitrary
 * strides", Trans. Am. Nucl. Soc. 71). */
void cx_rng_advance(cx_rng *rng, uint64_t delta);

/* Uniform integer in [0, bound), unbiased (rejection as in the PCG reference). bound > 0. */
uint32_t cx_rng_below(cx_rng *rng, uint32_t bound);

/* Uniform double in [0, 1) with 53 random bits (two outputs). */
double cx_rng_uniform(cx_rng *rng);

/* Uniform double in [a, b). */
double cx_rng_range(cx_rng *rng, double a, double b);

/* Standard normal deviate by the Marsaglia polar method (Marsaglia & Bray 1964, SIAM Rev. 6,
 * 260); the spare deviate is discarded so that each call depends only on the stream position. */
double cx_rng_normal(cx_rng *rng);

#endif
