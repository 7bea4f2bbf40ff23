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
 * Measured on the project machine (see tools/bench.c and the report of the speed issue): glibc
 * tanh about 10-12 ns per element; SLEEF's 3.5-ULP tanh about 2.5 ns (AVX2) and 1.5 ns
 * (AVX-512F); its 1-ULP AVX2 variant about 7 ns. The 3.5-ULP variant was kept: 3.5 ULP is a
 * relative error below 8e-16, far under every tolerance of the classifier, and it is the variant
 * that pays.
 */
#include <math.h>
#include <string.h>

#include "reservoir/reservoir_impl.h"

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

static void tanh_vector(double *x, cx_idx n)
{
    /* __builtin_cpu_supports reads a table filled once by libgcc at start-up. */
    if (__builtin_cpu_supports("avx512f"))
        tanh_avx512(x, n);
    else if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma"))
        tanh_avx2(x, n);
    else
        tanh_sse(x, n);
}
#else
#include <sleef.h>

static void tanh_vector(double *x, cx_idx n)
{
    for (cx_idx i = 0; i < n; i++)
        x[i] = Sleef_tanh_u35(x[i]);
}
#endif

void cx_res_tanh(int mode, double *x, cx_idx n)
{
    if (mode == CX_TANH_VECTOR) {
        tanh_vector(x, n);
        return;
    }
    for (cx_idx i = 0; i < n; i++)
        x[i] = tanh(x[i]);
}
