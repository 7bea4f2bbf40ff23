/* coexist: our own tanh (CX_TANH_EXPM1), its constants and its 4-lane AVX2 body, shared by the
 * tanh pass (tanh.c) and the fused closed-loop kernel (fused.c) so that both evaluate exactly the
 * same operations. The method and its error are described in tanh.c. Private header. */
#ifndef COEXIST_TANH_EXPM1_H
#define COEXIST_TANH_EXPM1_H

#define CX_TANH_CLAMP   20.0
#define CX_TANH_LN2_HI  6.93147180369123816490e-01 /* fdlibm's ln2_hi: 32 significant bits */
#define CX_TANH_LN2_LO  1.90821492927058770002e-10 /* ln2 - ln2_hi */
#define CX_TANH_INV_LN2 0x1.71547652b82fep+0
#define CX_TANH_ROUND   0x1.8p52 /* adding it rounds a double of magnitude < 2^51 to an integer */

/* 1/(j+2)!, j = 0..11: expm1(r) = r + r^2 sum_j c_j r^j */
#define CX_TANH_C0  (1.0 / 2.0)
#define CX_TANH_C1  (1.0 / 6.0)
#define CX_TANH_C2  (1.0 / 24.0)
#define CX_TANH_C3  (1.0 / 120.0)
#define CX_TANH_C4  (1.0 / 720.0)
#define CX_TANH_C5  (1.0 / 5040.0)
#define CX_TANH_C6  (1.0 / 40320.0)
#define CX_TANH_C7  (1.0 / 362880.0)
#define CX_TANH_C8  (1.0 / 3628800.0)
#define CX_TANH_C9  (1.0 / 39916800.0)
#define CX_TANH_C10 (1.0 / 479001600.0)
#define CX_TANH_C11 (1.0 / 6227020800.0)

#if defined(__x86_64__)
#include <immintrin.h>

/* Our tanh of K vectors in place, the K evaluations interleaved step by step: each is a long
 * chain of dependent operations, and K independent ones side by side keep both FMA pipes busy
 * where one chain at a time leaves them waiting on its latency. Every lane gets exactly the
 * operations of the scalar own_tanh1() of tanh.c. */
#define CX_TANH_STEP(stmt)                                                                         \
    _Pragma("GCC unroll 8") for (int k_ = 0; k_ < K; k_++)                                         \
    {                                                                                              \
        stmt;                                                                                      \
    }

__attribute__((target("avx2,fma"), always_inline)) static inline void
cx_tanh_expm1_avx2_k(__m256d *v, const int K)
{
    const __m256d sign = _mm256_set1_pd(-0.0);
    const __m256d rnd = _mm256_set1_pd(CX_TANH_ROUND);
    __m256d t[8], kb[8], r[8], q[8];
    /* min(clamp, a) returns a when a is NaN, so NaN passes through */
    CX_TANH_STEP(t[k_] =
                     _mm256_min_pd(_mm256_set1_pd(CX_TANH_CLAMP), _mm256_andnot_pd(sign, v[k_])))
    CX_TANH_STEP(t[k_] = _mm256_add_pd(t[k_], t[k_]))
    CX_TANH_STEP(kb[k_] = _mm256_fmadd_pd(t[k_], _mm256_set1_pd(CX_TANH_INV_LN2), rnd))
    CX_TANH_STEP(
        r[k_] = _mm256_fnmadd_pd(_mm256_sub_pd(kb[k_], rnd), _mm256_set1_pd(CX_TANH_LN2_HI), t[k_]))
    CX_TANH_STEP(
        r[k_] = _mm256_fnmadd_pd(_mm256_sub_pd(kb[k_], rnd), _mm256_set1_pd(CX_TANH_LN2_LO), r[k_]))
    CX_TANH_STEP(
        q[k_] = _mm256_fmadd_pd(_mm256_set1_pd(CX_TANH_C11), r[k_], _mm256_set1_pd(CX_TANH_C10)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C9)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C8)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C7)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C6)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C5)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C4)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C3)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C2)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C1)))
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], r[k_], _mm256_set1_pd(CX_TANH_C0)))
    /* p = expm1(r) into q */
    CX_TANH_STEP(q[k_] = _mm256_fmadd_pd(q[k_], _mm256_mul_pd(r[k_], r[k_]), r[k_]))
    /* s = 2^k from the integer in the low bits of kb, into t */
    CX_TANH_STEP(t[k_] = _mm256_castsi256_pd(_mm256_slli_epi64(
                     _mm256_add_epi64(_mm256_sub_epi64(_mm256_castpd_si256(kb[k_]),
                                                       _mm256_set1_epi64x(0x4338000000000000LL)),
                                      _mm256_set1_epi64x(1023)),
                     52)))
    /* E = s p + (s - 1), into r */
    CX_TANH_STEP(r[k_] = _mm256_fmadd_pd(t[k_], q[k_], _mm256_sub_pd(t[k_], _mm256_set1_pd(1.0))))
    CX_TANH_STEP(r[k_] = _mm256_div_pd(r[k_], _mm256_add_pd(r[k_], _mm256_set1_pd(2.0))))
    CX_TANH_STEP(v[k_] = _mm256_or_pd(r[k_], _mm256_and_pd(v[k_], sign)))
}
#undef CX_TANH_STEP

#endif

#endif
