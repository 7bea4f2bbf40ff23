/* coexist: tanh over a vector of pre-activations, the one transcendental function of the
 * stepping kernels (one call per node per RK4 stage).
 *
 * CX_TANH_LIBM calls the C library's tanh element by element. CX_TANH_VECTOR uses the SIMD tanh
 * of SLEEF (Shibata & Petrogalli 2020, "SLEEF: A Portable Vectorized Library of C Standard
 * Mathematical Functions", IEEE Trans. Parallel Distrib. Syst. 31, 1316), in its 3.5-ULP
 * variant: eight lanes with AVX-512F, else four with AVX2 + FMA, else two with the SSE2/SSE4.1
 * functions that SLEEF dispatches at run time (the CPU is asked at every call, which is cheap).
 * On the project machine the three gave the same bits on 4 million arguments (tests/test_speed.c
 * checks the dispatched path against the 2-lane one), so a cube does not depend on which of them
 * a machine takes; that is a measurement, not a promise of SLEEF's. SLEEF's functions are
 * elementwise and evaluate each lane the same way whatever the vector position, so a value's tanh
 * does not depend on where it sits in the array or on the array length; the remainder of an array
 * that does not fill a vector is padded and evaluated as a full vector for the same reason.
 *
 * CX_TANH_EXPM1 is our own (below): tanh|x| = E / (E + 2) with E = expm1(2|x|), the sign put
 * back afterwards.
 *
 * Measured on the project machine (see tools/bench.c and the report of the speed issue): glibc
 * tanh about 10-12 ns per element; SLEEF's 3.5-ULP tanh about 2.5 ns (AVX2) and 1.5 ns
 * (AVX-512F); its 1-ULP AVX2 variant about 7 ns. The 3.5-ULP variant was kept: 3.5 ULP is a
 * relative error below 8e-16, far under every tolerance of the classifier, and it is the variant
 * that pays.
 */
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "reservoir/reservoir_impl.h"
#include "reservoir/tanh_expm1.h"

/* --- Our own tanh (CX_TANH_EXPM1) -------------------------------------------------------------
 * Written because SLEEF's fast variant was still most of the cost of a closed-loop step, and a
 * tanh that never needs more than expm1 and one division is shorter. For a = |x| (clamped to 20,
 * where tanh already rounds to 1; NaN passes through the clamp):
 *   t = 2a = k ln2 + r, k = round(t / ln2), |r| <= ln2 / 2, r by Cody & Waite's two-part
 *   reduction (Cody & Waite 1980, "Software Manual for the Elementary Functions", Prentice-Hall,
 *   ch. 6; the two parts of ln2 are fdlibm's);
 *   expm1(r) = r + r^2 (1/2! + r/3! + ... + r^11/13!): the Taylor series, whose first omitted term
 *   is below 2e-17 relative on |r| <= ln2/2;
 *   E = expm1(t) = 2^k expm1(r) + (2^k - 1) in one fused multiply-add (the reconstruction of Tang
 *   1992, "Table-driven implementation of the expm1 function in IEEE floating-point arithmetic",
 *   ACM TOMS 18, 211), which has no cancellation for k = 0 and loses under one bit for k >= 1;
 *   tanh a = E / (E + 2).
 * Every operation is an IEEE add, multiply, divide or fused multiply-add, so the AVX2 loop and the
 * portable C below (fma() of C99, correctly rounded) give the same bits on every machine, and a
 * value's tanh depends neither on its position nor on the array length. Measured error: at most
 * 3 ULP against the correctly rounded value (long double tanhl) and 4 ULP against glibc's tanh
 * (tests/test_speed.c checks <= 4 against libm over the whole range). */
static const double own_c[12] = {CX_TANH_C0, CX_TANH_C1, CX_TANH_C2,  CX_TANH_C3,
                                 CX_TANH_C4, CX_TANH_C5, CX_TANH_C6,  CX_TANH_C7,
                                 CX_TANH_C8, CX_TANH_C9, CX_TANH_C10, CX_TANH_C11};

static double own_tanh1(double x)
{
    double a = fabs(x);
    a = CX_TANH_CLAMP < a ? CX_TANH_CLAMP : a; /* as _mm256_min_pd(clamp, a): NaN stays NaN */
    const double t = a + a;
    const double kb = fma(t, CX_TANH_INV_LN2, CX_TANH_ROUND);
    const double k = kb - CX_TANH_ROUND;
    double r = fma(-k, CX_TANH_LN2_HI, t);
    r = fma(-k, CX_TANH_LN2_LO, r);
    double q = own_c[11];
    for (int j = 10; j >= 0; j--)
        q = fma(q, r, own_c[j]);
    const double p = fma(q, r * r, r);
    uint64_t kbits, sbits;
    memcpy(&kbits, &kb, sizeof kbits);
    sbits = (kbits - UINT64_C(0x4338000000000000) + 1023) << 52; /* 2^k */
    double s;
    memcpy(&s, &sbits, sizeof s);
    const double e = fma(s, p, s - 1.0);
    return copysign(e / (e + 2.0), x);
}

static void own_portable(double *x, cx_idx n)
{
    for (cx_idx i = 0; i < n; i++)
        x[i] = own_tanh1(x[i]);
}

/* The widest vector the kernels may use (cx_res_simd_limit); set before computing. */
static int simd_cap = 8;

int cx_res_simd_limit(int lanes)
{
    const int old = simd_cap;
    simd_cap = lanes;
    return old;
}

#if defined(__x86_64__)
/* The intrinsics are read with the baseline ISA (each of GCC's headers gives its functions their
 * own target); sleef.h declares its AVX2 and AVX-512 functions only when __AVX2__ / __AVX512F__
 * are defined, so it is read under a target pragma. The wide loops carry their own target and
 * run only after the CPU check in tanh_vector. */
#include <immintrin.h>
#pragma GCC push_options
#pragma GCC target("avx2,fma,avx512f")
#include <sleef.h>
#pragma GCC pop_options

__attribute__((target("avx2,fma"))) static void tanh_avx2(double *x, cx_idx n)
{
    cx_idx i = 0;
    for (; i + 4 <= n; i += 4)
        _mm256_storeu_pd(x + i, Sleef_tanhd4_u35avx2(_mm256_loadu_pd(x + i)));
    if (i < n) {
        double pad[4] = {0.0, 0.0, 0.0, 0.0};
        memcpy(pad, x + i, (size_t)(n - i) * sizeof *x);
        _mm256_storeu_pd(pad, Sleef_tanhd4_u35avx2(_mm256_loadu_pd(pad)));
        memcpy(x + i, pad, (size_t)(n - i) * sizeof *x);
    }
}

__attribute__((target("avx512f"))) static void tanh_avx512(double *x, cx_idx n)
{
    cx_idx i = 0;
    for (; i + 8 <= n; i += 8)
        _mm512_storeu_pd(x + i, Sleef_tanhd8_u35avx512f(_mm512_loadu_pd(x + i)));
    if (i < n) {
        double pad[8] = {0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0};
        memcpy(pad, x + i, (size_t)(n - i) * sizeof *x);
        _mm512_storeu_pd(pad, Sleef_tanhd8_u35avx512f(_mm512_loadu_pd(pad)));
        memcpy(x + i, pad, (size_t)(n - i) * sizeof *x);
    }
}

static void tanh_sse(double *x, cx_idx n)
{
    cx_idx i = 0;
    for (; i + 2 <= n; i += 2)
        _mm_storeu_pd(x + i, Sleef_tanhd2_u35(_mm_loadu_pd(x + i)));
    if (i < n) {
        double pad[2] = {x[i], 0.0};
        _mm_storeu_pd(pad, Sleef_tanhd2_u35(_mm_loadu_pd(pad)));
        x[i] = pad[0];
    }
}


/* The tanh pass at L lanes: four vectors abreast, then one, then the portable C for the tail
 * (the same operations, so the same bits). */
#define CX_OWN_PASS                                                                                \
    __attribute__((target(CXV_TARGET))) static void CXV_FN(own)(double *x, cx_idx n)               \
    {                                                                                              \
        const int l = CX_SIMD_LANES;                                                               \
        cx_idx i = 0;                                                                              \
        for (; i + 4 * l <= n; i += 4 * l) {                                                       \
            CXV v[4];                                                                              \
            for (int k = 0; k < 4; k++)                                                            \
                v[k] = CXV_LOAD(x + i + l * k);                                                    \
            CXV_FN(cx_tanh_expm1_k)(v, 4);                                                         \
            for (int k = 0; k < 4; k++)                                                            \
                CXV_STORE(x + i + l * k, v[k]);                                                    \
        }                                                                                          \
        for (; i + l <= n; i += l) {                                                               \
            CXV v = CXV_LOAD(x + i);                                                               \
            CXV_FN(cx_tanh_expm1_k)(&v, 1);                                                        \
            CXV_STORE(x + i, v);                                                                   \
        }                                                                                          \
        own_portable(x + i, n - i);                                                                \
    }

#define CX_SIMD_LANES 4
#include "reservoir/simd.h"
#include "reservoir/tanh_expm1_k.h"
CX_OWN_PASS
#undef CX_SIMD_LANES
#include "reservoir/simd.h"

#define CX_SIMD_LANES 8
#include "reservoir/simd.h"
#include "reservoir/tanh_expm1_k.h"
CX_OWN_PASS
#undef CX_SIMD_LANES
#include "reservoir/simd.h"
#undef CX_OWN_PASS

int cx_res_simd_lanes(void)
{
    /* __builtin_cpu_supports reads a table filled once by libgcc at start-up. */
    if (simd_cap >= 8 && __builtin_cpu_supports("avx512f"))
        return 8;
    if (simd_cap >= 4 && __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma"))
        return 4;
    return 1;
}

static void own_tanh(double *x, cx_idx n)
{
    const int lanes = cx_res_simd_lanes();
    if (lanes == 8)
        own_avx512(x, n);
    else if (lanes == 4)
        own_avx2(x, n);
    else
        own_portable(x, n);
}

static void tanh_vector(double *x, cx_idx n)
{
    const int lanes = cx_res_simd_lanes();
    if (lanes == 8)
        tanh_avx512(x, n);
    else if (lanes == 4)
        tanh_avx2(x, n);
    else
        tanh_sse(x, n);
}
#else
#include <sleef.h>

int cx_res_simd_lanes(void)
{
    return 1;
}

static void own_tanh(double *x, cx_idx n)
{
    own_portable(x, n);
}

static void tanh_vector(double *x, cx_idx n)
{
    for (cx_idx i = 0; i < n; i++)
        x[i] = Sleef_tanh_u35(x[i]);
}
#endif

void cx_res_tanh(int mode, double *x, cx_idx n)
{
    if (mode == CX_TANH_EXPM1) {
        own_tanh(x, n);
        return;
    }
    if (mode == CX_TANH_VECTOR) {
        tanh_vector(x, n);
        return;
    }
    for (cx_idx i = 0; i < n; i++)
        x[i] = tanh(x[i]);
}
