/* coexist tests: PCG32 streams (src/rng/rng.c).
 *
 * Reference: the PCG reference implementation (M. E. O'Neill, pcg-cpp 0.98.1, Debian package
 * libpcg-cpp-dev), run through the helper pcg_ref whose path is argv[1]; the reference values
 * measured on this project's machines (PLATFORM.md); moments of the uniform and normal laws.
 */
#define _POSIX_C_SOURCE 200809L
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/rng.h"
#include "testlib.h"

#define SRC_PCG  "O'Neill, pcg-cpp reference header pcg_random.hpp (libpcg-cpp-dev 0.98.1)"
#define SRC_PLAT "PLATFORM.md, pcg32(42, 54) measured with libpcg-cpp-dev 0.98.1"

static const char *helper;

/* Run the reference helper and read up to `max` hex numbers. Returns the count read. */
static size_t run_ref(const char *args, uint64_t *out, size_t max)
{
    char cmd[1024];
    snprintf(cmd, sizeof cmd, "'%s' %s", helper, args);
    FILE *f = popen(cmd, "r");
    if (f == NULL)
        return 0;
    size_t n = 0;
    unsigned long long v;
    while (n < max && fscanf(f, "%llx", &v) == 1)
        out[n++] = (uint64_t)v;
    pclose(f);
    return n;
}

struct pair {
    uint64_t seed, stream;
};

static const struct pair pairs[] = {
    {42u, 54u},
    {0u, 0u},
    {0xffffffffffffffffULL, 0xfffffffffffffffeULL},
    {0x853c49e6748fea9bULL, 0xda3e39cb94b95bdbULL},
    {2385u, 0x8000000000000001ULL},
    {0x0123456789abcdefULL, 0xfedcba9876543210ULL},
};

static void check_against_reference(void)
{
    enum { N = 1000 };
    static uint64_t ref[N];
    char args[256], what[256];
    for (size_t p = 0; p < sizeof pairs / sizeof pairs[0]; p++) {
        uint64_t s = pairs[p].seed, q = pairs[p].stream;
        cx_rng r;
        cx_rng_seed(&r, s, q);

        snprintf(args, sizeof args, "state %" PRIu64 " %" PRIu64, s, q);
        size_t got = run_ref(args, ref, 2);
        snprintf(what, sizeof what, "seed (%#" PRIx64 ", %#" PRIx64 "): increment and state", s, q);
        cx_test_true(what, got == 2 && ref[0] == r.inc && ref[1] == r.state, "exact", SRC_PCG);

        snprintf(args, sizeof args, "raw %" PRIu64 " %" PRIu64 " %d", s, q, N);
        got = run_ref(args, ref, N);
        size_t bad = got == N ? 0 : N;
        for (size_t i = 0; i < got; i++)
            bad += cx_rng_u32(&r) != (uint32_t)ref[i];
        snprintf(what, sizeof what, "seed (%#" PRIx64 ", %#" PRIx64 "): %d outputs", s, q, N);
        char det[64];
        snprintf(det, sizeof det, "%zu mismatches of %zu read", bad, got);
        cx_test_true(what, bad == 0, det, SRC_PCG);

        static const uint64_t skips[] = {1u, 1000u, 123456789u, 0x8000000000003039ULL};
        for (size_t k = 0; k < sizeof skips / sizeof skips[0]; k++) {
            cx_rng_seed(&r, s, q);
            cx_rng_advance(&r, skips[k]);
            snprintf(args, sizeof args, "skip %" PRIu64 " %" PRIu64 " %" PRIu64 " 16", s, q,
                     skips[k]);
            got = run_ref(args, ref, 16);
            bad = got == 16 ? 0 : 16;
            for (size_t i = 0; i < got; i++)
                bad += cx_rng_u32(&r) != (uint32_t)ref[i];
            snprintf(what, sizeof what,
                     "seed (%#" PRIx64 ", %#" PRIx64 "): advance(%" PRIu64 ") = discard", s, q,
                     skips[k]);
            snprintf(det, sizeof det, "16 outputs, %zu mismatches", bad);
            cx_test_true(what, bad == 0, det, SRC_PCG);
        }

        static const uint32_t bounds[] = {1u, 3u, 7u, 1000u, 0x80000001u, 0xffffffffu};
        for (size_t k = 0; k < sizeof bounds / sizeof bounds[0]; k++) {
            cx_rng_seed(&r, s, q);
            snprintf(args, sizeof args, "bound %" PRIu64 " %" PRIu64 " %u %d", s, q, bounds[k], N);
            got = run_ref(args, ref, N);
            bad = got == N ? 0 : N;
            for (size_t i = 0; i < got; i++)
                bad += cx_rng_below(&r, bounds[k]) != (uint32_t)ref[i];
            snprintf(what, sizeof what, "seed (%#" PRIx64 ", %#" PRIx64 "): %d draws below %u", s,
                     q, N, bounds[k]);
            snprintf(det, sizeof det, "%zu mismatches", bad);
            cx_test_true(what, bad == 0, det, SRC_PCG);
        }
    }
}

static void check_platform_values(void)
{
    static const uint32_t first[6] = {0xa15c02b7u, 0x7b47f409u, 0xba1d3330u,
                                      0x83d2f293u, 0xbfa4784bu, 0xcbed606eu};
    cx_rng r;
    cx_rng_seed(&r, 42u, 54u);
    cx_test_true("pcg32(42, 54) state after seeding = 0x185706b82c2e03f8",
                 r.state == 0x185706b82c2e03f8ULL, "exact", SRC_PLAT);
    cx_test_true("pcg32(42, 54) increment = 0x6d", r.inc == 0x6dULL, "exact", SRC_PLAT);
    int ok = 1;
    for (int i = 0; i < 6; i++)
        ok &= cx_rng_u32(&r) == first[i];
    cx_test_true("pcg32(42, 54) first six outputs", ok, "exact", SRC_PLAT);
    cx_rng_seed(&r, 42u, 54u);
    cx_rng_advance(&r, 1000u);
    cx_test_true("pcg32(42, 54) after discard(1000) next = 0xefebeab3",
                 cx_rng_u32(&r) == 0xefebeab3u, "exact", SRC_PLAT);
}

/* The keyed-stream construction documented in src/rng/rng.c, written out again here and fed to
 * the reference generator, so that the documentation, the code and PCG agree. */
static uint64_t t_mix(uint64_t z)
{
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

static void check_keyed(void)
{
    cx_test_true("SplitMix64 finalizer of 0x9e3779b97f4a7c15 = 0xe220a8397b1dcdaf",
                 t_mix(0x9e3779b97f4a7c15ULL) == 0xe220a8397b1dcdafULL,
                 "first SplitMix64 output from state 0",
                 "Steele, Lea & Flood, Fast splittable pseudorandom number generators, OOPSLA "
                 "2014 (value from memory)");

    const uint64_t seed = 20260417u;
    const uint64_t c[3] = {1200u, 3u, cx_rng_bits(2.385)};
    uint64_t h = 0x9e3779b97f4a7c15ULL;
    h = t_mix(h ^ seed);
    h = t_mix(h ^ (uint64_t)CX_RNG_NETWORK);
    h = t_mix(h ^ 3u);
    for (int i = 0; i < 3; i++)
        h = t_mix(h ^ c[i]);
    uint64_t is = t_mix(h ^ 0x9e3779b97f4a7c15ULL), iq = t_mix(h ^ 0x3c6ef372fe94f82aULL);
    char args[256];
    uint64_t ref[64];
    snprintf(args, sizeof args, "raw %" PRIu64 " %" PRIu64 " 64", is, iq);
    size_t got = run_ref(args, ref, 64);
    cx_rng r;
    cx_rng_keyed(&r, seed, CX_RNG_NETWORK, c, 3);
    int ok = got == 64;
    for (size_t i = 0; i < got; i++)
        ok &= cx_rng_u32(&r) == (uint32_t)ref[i];
    cx_test_true("keyed stream = documented hash fed to reference pcg32", ok, "64 outputs",
                 SRC_PCG);

    cx_rng a, b;
    uint64_t x[8];
    cx_rng_keyed(&a, seed, CX_RNG_NETWORK, c, 3);
    cx_rng_keyed(&b, seed, CX_RNG_NETWORK, c, 3);
    ok = 1;
    for (int i = 0; i < 100; i++)
        ok &= cx_rng_u32(&a) == cx_rng_u32(&b);
    cx_test_true("keyed stream is deterministic", ok, "100 outputs",
                 "reproducibility contract, rng.h");

    /* Streams that must differ from the base key (seed, NETWORK, c): first 4 outputs compared. */
    struct {
        const char *what;
        uint64_t seed;
        int purpose;
        uint64_t co[3];
        size_t n;
    } alt[] = {
        {"other study seed", seed + 1u, CX_RNG_NETWORK, {c[0], c[1], c[2]}, 3},
        {"other purpose", seed, CX_RNG_INPUT, {c[0], c[1], c[2]}, 3},
        {"other coordinate", seed, CX_RNG_NETWORK, {c[0], c[1] + 1u, c[2]}, 3},
        {"swapped coordinates", seed, CX_RNG_NETWORK, {c[1], c[0], c[2]}, 3},
        {"one coordinate fewer", seed, CX_RNG_NETWORK, {c[0], c[1], 0u}, 2},
    };
    cx_rng base;
    cx_rng_keyed(&base, seed, CX_RNG_NETWORK, c, 3);
    for (int i = 0; i < 4; i++)
        x[i] = cx_rng_u32(&base);
    for (size_t k = 0; k < sizeof alt / sizeof alt[0]; k++) {
        cx_rng_keyed(&a, alt[k].seed, alt[k].purpose, alt[k].co, alt[k].n);
        int same = 1;
        for (int i = 0; i < 4; i++)
            same &= cx_rng_u32(&a) == (uint32_t)x[i];
        char what[128];
        snprintf(what, sizeof what, "keyed stream changes with %s", alt[k].what);
        cx_test_true(what, !same, "first 4 outputs differ", "reproducibility contract, rng.h");
    }
    const uint64_t z0[1] = {0u}, z1[2] = {0u, 0u};
    cx_rng_keyed(&a, seed, CX_RNG_TEST, z0, 1);
    cx_rng_keyed(&b, seed, CX_RNG_TEST, z1, 2);
    cx_test_true("key (0) differs from key (0, 0)", cx_rng_u32(&a) != cx_rng_u32(&b),
                 "first output", "reproducibility contract, rng.h");
    cx_test_true("cx_rng_bits(-0.0) == cx_rng_bits(0.0)", cx_rng_bits(-0.0) == cx_rng_bits(0.0), "",
                 "rng.h: -0.0 is folded to 0.0");
    cx_test_true("cx_rng_bits(2.385) is the IEEE 754 pattern 0x4003147ae147ae14",
                 cx_rng_bits(2.385) == 0x4003147ae147ae14ULL, "",
                 "IEEE 754-2008 binary64; pattern computed with /usr/bin/python3 struct.pack");
}

static void check_moments(void)
{
    enum { N = 1000000 };
    cx_rng r;
    const uint64_t key[1] = {7u};
    cx_rng_keyed(&r, 2385u, CX_RNG_TEST, key, 1);

    /* The 53-bit construction on the first two outputs of pcg32(42, 54). */
    cx_rng_seed(&r, 42u, 54u);
    double u0 = cx_rng_uniform(&r);
    double want =
        ((double)(0xa15c02b7u >> 5) * 67108864.0 + (double)(0x7b47f409u >> 6)) / 9007199254740992.0;
    cx_test_true("uniform = ((a >> 5) 2^26 + (b >> 6)) 2^-53", u0 == want, "exact",
                 "rng.h contract; a, b from PLATFORM.md pcg32(42, 54)");

    cx_rng_keyed(&r, 2385u, CX_RNG_TEST, key, 1);
    double s1 = 0, s2 = 0, lo = 1, hi = 0;
    for (int i = 0; i < N; i++) {
        double u = cx_rng_uniform(&r);
        lo = u < lo ? u : lo;
        hi = u > hi ? u : hi;
        s1 += u;
        s2 += (u - 0.5) * (u - 0.5);
    }
    double mean = s1 / N, var = s2 / N;
    cx_test_true("uniform draws lie in [0, 1)", lo >= 0.0 && hi < 1.0, "1e6 draws",
                 "rng.h contract");
    /* sd of the mean sqrt(1/12/N); sd of the variance sqrt((1/80 - 1/144)/N) = sqrt(1/(180 N)). */
    cx_test_abs("uniform mean (1e6 draws, 5 sigma)", mean, 0.5, 5.0 * sqrt(1.0 / 12.0 / N),
                "U(0,1): mean 1/2, Abramowitz & Stegun, Handbook of Math. Functions 1964, 26.1");
    cx_test_abs("uniform variance (1e6 draws, 5 sigma)", var, 1.0 / 12.0,
                5.0 * sqrt(1.0 / 180.0 / N),
                "U(0,1): variance 1/12, fourth central moment 1/80; Abramowitz & Stegun 1964");

    double m1 = 0, m2 = 0, m4 = 0;
    for (int i = 0; i < N; i++) {
        double z = cx_rng_normal(&r);
        m1 += z;
        m2 += z * z;
        m4 += z * z * z * z;
    }
    m1 /= N;
    m2 /= N;
    m4 /= N;
    cx_test_abs("normal mean (1e6 draws, 5 sigma)", m1, 0.0, 5.0 / sqrt((double)N),
                "N(0,1) moments, Abramowitz & Stegun 1964, 26.2");
    cx_test_abs("normal variance (1e6 draws, 5 sigma, Var z^2 = 2)", m2, 1.0, 5.0 * sqrt(2.0 / N),
                "N(0,1): E z^4 = 3, Abramowitz & Stegun 1964, 26.2");
    cx_test_abs("normal kurtosis (1e6 draws, 5 sigma, sd sqrt(24/N))", m4 / (m2 * m2), 3.0,
                5.0 * sqrt(24.0 / N),
                "N(0,1) kurtosis 3; asymptotic sd sqrt(24/N) of the sample kurtosis, Kendall & "
                "Stuart, Advanced Theory of Statistics (from memory)");
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: test_rng PATH_TO_pcg_ref\n");
        return 2;
    }
    helper = argv[1];
    check_platform_values();
    check_against_reference();
    check_keyed();
    check_moments();
    return cx_test_finish();
}
