/* coexist: the few vector operations of our tanh and of the fused closed-loop kernel, spelled
 * once for 4 lanes (AVX2 + FMA, 256 bits) and once for 8 (AVX-512F, 512 bits), so that one
 * template (tanh_expm1_k.h, fused_kernel.h) serves both. Private header, included several times:
 * define CX_SIMD_LANES to 4 or 8 before including it; with CX_SIMD_LANES undefined it undefines
 * its macros again.
 *
 * Every macro is one IEEE operation per lane (add, subtract, multiply, divide, fused
 * multiply-add, minimum, bit operation), the same at both widths, so a lane's result does not
 * depend on the width: that is what keeps the bits of a run whichever vector unit computes it. */
#if defined(CX_SIMD_LANES)
#include <immintrin.h>

#if CX_SIMD_LANES == 4
#define CXV                 __m256d
#define CXV_TARGET          "avx2,fma"
#define CXV_FN(name)        name##_avx2
#define CXV_SET1(a)         _mm256_set1_pd(a)
#define CXV_ZERO()          _mm256_setzero_pd()
#define CXV_LOAD(p)         _mm256_loadu_pd(p)
#define CXV_STORE(p, v)     _mm256_storeu_pd(p, v)
#define CXV_ADD(a, b)       _mm256_add_pd(a, b)
#define CXV_SUB(a, b)       _mm256_sub_pd(a, b)
#define CXV_MUL(a, b)       _mm256_mul_pd(a, b)
#define CXV_DIV(a, b)       _mm256_div_pd(a, b)
#define CXV_FMADD(a, b, c)  _mm256_fmadd_pd(a, b, c)
#define CXV_FNMADD(a, b, c) _mm256_fnmadd_pd(a, b, c)
#define CXV_MIN(a, b)       _mm256_min_pd(a, b)
#define CXV_ABS(a)          _mm256_andnot_pd(_mm256_set1_pd(-0.0), a)
/* a with the sign bit of b or-ed in */
#define CXV_ORSIGN(a, b) _mm256_or_pd(a, _mm256_and_pd(b, _mm256_set1_pd(-0.0)))
/* the L values x[c[0]], ..., x[c[L-1]] by four scalar loads: the AVX2 gather instruction measured
 * slower (rows.c) */
#define CXV_GATHER(x, c) _mm256_set_pd((x)[(c)[3]], (x)[(c)[2]], (x)[(c)[1]], (x)[(c)[0]])
/* u[c[l]] in lane l for a short table u (at most CX_MAX_DIM entries), held as tab = CXV_TABLE(u,
 * d): at 4 lanes simply the loads */
#define CXV_TABLE(u, d)       _mm256_setzero_pd()
#define CXV_LOOKUP(tab, u, c) ((void)(tab), CXV_GATHER(u, c))
/* a + b in the lanes l with len[l] > k, a elsewhere */
#define CXV_ADD_IF(a, b, len, k)                                                                   \
    _mm256_blendv_pd(a, _mm256_add_pd(a, b),                                                       \
                     _mm256_castsi256_pd(_mm256_cmpgt_epi64(                                       \
                         _mm256_loadu_si256((const __m256i *)(len)), _mm256_set1_epi64x(k))))
/* 2^k from kb = k + 1.5 2^52 (k in its low bits) */
#define CXV_POW2(kb)                                                                               \
    _mm256_castsi256_pd(_mm256_slli_epi64(                                                         \
        _mm256_add_epi64(                                                                          \
            _mm256_sub_epi64(_mm256_castpd_si256(kb), _mm256_set1_epi64x(0x4338000000000000LL)),   \
            _mm256_set1_epi64x(1023)),                                                             \
        52))
#elif CX_SIMD_LANES == 8
#define CXV        __m512d
#define CXV_TARGET "avx512f,avx2,fma"
#if defined(CX_SIMD_HWGATHER)
#define CXV_FN(name) name##_avx512g
#else
#define CXV_FN(name) name##_avx512
#endif
#define CXV_SET1(a)         _mm512_set1_pd(a)
#define CXV_ZERO()          _mm512_setzero_pd()
#define CXV_LOAD(p)         _mm512_loadu_pd(p)
#define CXV_STORE(p, v)     _mm512_storeu_pd(p, v)
#define CXV_ADD(a, b)       _mm512_add_pd(a, b)
#define CXV_SUB(a, b)       _mm512_sub_pd(a, b)
#define CXV_MUL(a, b)       _mm512_mul_pd(a, b)
#define CXV_DIV(a, b)       _mm512_div_pd(a, b)
#define CXV_FMADD(a, b, c)  _mm512_fmadd_pd(a, b, c)
#define CXV_FNMADD(a, b, c) _mm512_fnmadd_pd(a, b, c)
#define CXV_MIN(a, b)       _mm512_min_pd(a, b)
/* the bit operations on doubles are AVX512DQ; their integer forms are AVX512F */
#define CXV_ABS(a)                                                                                 \
    _mm512_castsi512_pd(_mm512_andnot_epi64(_mm512_set1_epi64(INT64_MIN), _mm512_castpd_si512(a)))
#define CXV_ORSIGN(a, b)                                                                           \
    _mm512_castsi512_pd(                                                                           \
        _mm512_or_epi64(_mm512_castpd_si512(a),                                                    \
                        _mm512_and_epi64(_mm512_castpd_si512(b), _mm512_set1_epi64(INT64_MIN))))
/* x[c[l]] in lane l: eight scalar loads, or with CX_SIMD_HWGATHER the gather instruction, which
 * is faster on some CPUs and slower on others (rows.c measures which); the same loads either
 * way, so the same bits */
#if defined(CX_SIMD_HWGATHER)
#define CXV_GATHER(x, c) _mm512_i64gather_pd(_mm512_loadu_si512((const void *)(c)), (x), 8)
#else
#define CXV_GATHER(x, c)                                                                           \
    _mm512_set_pd((x)[(c)[7]], (x)[(c)[6]], (x)[(c)[5]], (x)[(c)[4]], (x)[(c)[3]], (x)[(c)[2]],    \
                  (x)[(c)[1]], (x)[(c)[0]])
#endif
/* u[c[l]] in lane l for a table u of d <= 8 entries, held in one register tab = CXV_TABLE(u, d):
 * one permute instead of a gather */
#define CXV_TABLE(u, d)       _mm512_maskz_loadu_pd((__mmask8)((1u << (d)) - 1u), u)
#define CXV_LOOKUP(tab, u, c) _mm512_permutexvar_pd(_mm512_loadu_si512((const void *)(c)), tab)
#define CXV_ADD_IF(a, b, len, k)                                                                   \
    _mm512_mask_add_pd(                                                                            \
        a, _mm512_cmpgt_epi64_mask(_mm512_loadu_si512((const void *)(len)), _mm512_set1_epi64(k)), \
        a, b)
#define CXV_POW2(kb)                                                                               \
    _mm512_castsi512_pd(_mm512_slli_epi64(                                                         \
        _mm512_add_epi64(                                                                          \
            _mm512_sub_epi64(_mm512_castpd_si512(kb), _mm512_set1_epi64(0x4338000000000000LL)),    \
            _mm512_set1_epi64(1023)),                                                              \
        52))
#else
#error "CX_SIMD_LANES must be 4 or 8"
#endif

#else /* undefine */
#undef CXV
#undef CXV_TARGET
#undef CXV_FN
#undef CXV_SET1
#undef CXV_ZERO
#undef CXV_LOAD
#undef CXV_STORE
#undef CXV_ADD
#undef CXV_SUB
#undef CXV_MUL
#undef CXV_DIV
#undef CXV_FMADD
#undef CXV_FNMADD
#undef CXV_MIN
#undef CXV_ABS
#undef CXV_ORSIGN
#undef CXV_POW2
#undef CXV_GATHER
#undef CXV_ADD_IF
#undef CXV_TABLE
#undef CXV_LOOKUP
#endif
