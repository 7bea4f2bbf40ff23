/* coexist: PCG32 streams keyed by (study seed, purpose, coordinates).
 *
 * Generator: PCG32 = XSH-RR output permutation on a 64-bit LCG with multiplier
 * 6364136223846793005 (M. E. O'Neill, "PCG: A family of simple fast space-efficient statistically
 * good algorithms for random number generation", Harvey Mudd College tech. report
 * HMC-CS-2014-0905, 2014). Seeding, stepping and bounded draws follow the semantics of the
 * reference C functions pcg32_srandom_r, pcg32_random_r and pcg32_boundedrand_r, so a stream can
 * be checked against the reference implementation output for output.
 *
 * Jump-ahead: an LCG step s -> m s + c composed k times is s -> M s + C with M = m^k and
 * C = c (m^k - 1)/(m - 1); both are built by squaring in O(log k) (F. B. Brown, "Random number
 * generation with arbitrary strides", Trans. Am. Nucl. Soc. 71, 202, 1994).
 *
 * Keyed streams (part of the reproducibility contract; never change it, only add a new function):
 *   mix(z)  = SplitMix64 finalizer: z ^= z >> 30; z *= 0xbf58476d1ce4e5b9;
 *             z ^= z >> 27; z *= 0x94d049bb133111eb; z ^= z >> 31
 *             (G. L. Steele, D. Lea & C. H. Flood, "Fast splittable pseudorandom number
 *             generators", OOPSLA 2014).
 *   words   = study_seed, (uint64)(int64)purpose, ncoords, coords[0], ..., coords[ncoords-1]
 *   h_0     = 0x9e3779b97f4a7c15 (the SplitMix64 increment, 2^64 / golden ratio)
 *   h_{k+1} = mix(h_k ^ word_k) for each word in turn
 *   initstate = mix(h ^ 0x9e3779b97f4a7c15), initseq = mix(h ^ 0x3c6ef372fe94f82a),
 *   then cx_rng_seed(initstate, initseq).
 * mix is a nonlinear bijection, so the word order matters ((a, b) and (b, a) give different
 * streams), and hashing the count first keeps (a) apart from (a, 0).
 *
 * Doubles: uniform = ((a >> 5) 2^26 + (b >> 6)) 2^-53 with a, b two successive outputs (the
 * 53-bit construction of the MT19937 genrand_res53, Matsumoto & Nishimura 1998, ACM TOMACS 8, 3).
 * Normal deviates by the Marsaglia polar method (Marsaglia & Bray 1964, SIAM Rev. 6, 260).
 */
#include <math.h>
#include <string.h>

#include "coexist/rng.h"

#define CX_PCG_MULT   6364136223846793005ULL
#define CX_MIX_GAMMA  0x9e3779b97f4a7c15ULL
#define CX_MIX_GAMMA2 0x3c6ef372fe94f82aULL

uint64_t cx_rng_mix64(uint64_t z)
{
    z ^= z >> 30;
    z *= 0xbf58476d1ce4e5b9ULL;
    z ^= z >> 27;
    z *= 0x94d049bb133111ebULL;
    z ^= z >> 31;
    return z;
}

uint32_t cx_rng_u32(cx_rng *rng)
{
    uint64_t old = rng->state;
    rng->state = old * CX_PCG_MULT + rng->inc;
    uint32_t xorshifted = (uint32_t)(((old >> 18u) ^ old) >> 27u);
    uint32_t rot = (uint32_t)(old >> 59u);
    return (xorshifted >> rot) | (xorshifted << ((32u - rot) & 31u));
}

void cx_rng_seed(cx_rng *rng, uint64_t initstate, uint64_t initseq)
{
    rng->state = 0u;
    rng->inc = (initseq << 1u) | 1u;
    (void)cx_rng_u32(rng);
    rng->state += initstate;
    (void)cx_rng_u32(rng);
}

void cx_rng_keyed(cx_rng *rng, uint64_t study_seed, int purpose, const uint64_t *coords,
                  size_t ncoords)
{
    uint64_t h = CX_MIX_GAMMA;
    h = cx_rng_mix64(h ^ study_seed);
    h = cx_rng_mix64(h ^ (uint64_t)(int64_t)purpose);
    h = cx_rng_mix64(h ^ (uint64_t)ncoords);
    for (size_t i = 0; i < ncoords; i++)
        h = cx_rng_mix64(h ^ coords[i]);
    cx_rng_seed(rng, cx_rng_mix64(h ^ CX_MIX_GAMMA), cx_rng_mix64(h ^ CX_MIX_GAMMA2));
}

uint64_t cx_rng_bits(double x)
{
    uint64_t u;
    /* -0.0 == 0.0, and both must key the same stream. */
    if (x == 0.0)
        return 0u;
    memcpy(&u, &x, sizeof u);
    return u;
}

void cx_rng_advance(cx_rng *rng, uint64_t delta)
{
    uint64_t cur_mult = CX_PCG_MULT;
    uint64_t cur_plus = rng->inc;
    uint64_t acc_mult = 1u;
    uint64_t acc_plus = 0u;
    while (delta > 0) {
        if (delta & 1u) {
            acc_mult *= cur_mult;
            acc_plus = acc_plus * cur_mult + cur_plus;
        }
        cur_plus = (cur_mult + 1u) * cur_plus;
        cur_mult *= cur_mult;
        delta >>= 1u;
    }
    rng->state = acc_mult * rng->state + acc_plus;
}

uint32_t cx_rng_below(cx_rng *rng, uint32_t bound)
{
    /* Reject the lowest 2^32 mod bound outputs so that r % bound is exactly uniform. */
    uint32_t threshold = (0u - bound) % bound;
    for (;;) {
        uint32_t r = cx_rng_u32(rng);
        if (r >= threshold)
            return r % bound;
    }
}

double cx_rng_uniform(cx_rng *rng)
{
    /* Two statements fix the order in which the outputs are taken. */
    uint32_t a = cx_rng_u32(rng) >> 5u;
    uint32_t b = cx_rng_u32(rng) >> 6u;
    return ((double)a * 67108864.0 + (double)b) * (1.0 / 9007199254740992.0);
}

double cx_rng_range(cx_rng *rng, double a, double b)
{
    return a + (b - a) * cx_rng_uniform(rng);
}

double cx_rng_normal(cx_rng *rng)
{
    double u, v, s;
    do {
        u = 2.0 * cx_rng_uniform(rng) - 1.0;
        v = 2.0 * cx_rng_uniform(rng) - 1.0;
        s = u * u + v * v;
    } while (s >= 1.0 || s == 0.0);
    return u * sqrt(-2.0 * log(s) / s);
}
