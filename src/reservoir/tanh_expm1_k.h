/* coexist: the vector body of our own tanh (CX_TANH_EXPM1, method and error in tanh.c), a
 * template over the vector width: include it after simd.h with CX_SIMD_LANES set; it defines
 * cx_tanh_expm1_k_avx2 (4 lanes) or cx_tanh_expm1_k_avx512 (8 lanes). Private header, included
 * once per width by tanh.c and fused.c. */
#include "reservoir/tanh_expm1.h"

/* Our tanh of K vectors in place, the K evaluations interleaved step by step: each is a long
 * chain of dependent operations, and K independent ones side by side keep both FMA pipes busy
 * where one chain at a time leaves them waiting on its latency. Every lane gets exactly the
 * operations of the scalar own_tanh1() of tanh.c, at either width. */
#define CX_TANH_STEP(stmt)                                                                         \
    _Pragma("GCC unroll 8") for (int k_ = 0; k_ < K; k_++)                                         \
    {                                                                                              \
        stmt;                                                                                      \
    }

__attribute__((target(CXV_TARGET), always_inline)) static inline void
CXV_FN(cx_tanh_expm1_k)(CXV *v, const int K)
{
    const CXV rnd = CXV_SET1(CX_TANH_ROUND);
    CXV t[8], kb[8], r[8], q[8];
    /* min(clamp, a) returns a when a is NaN, so NaN passes through */
    CX_TANH_STEP(t[k_] = CXV_MIN(CXV_SET1(CX_TANH_CLAMP), CXV_ABS(v[k_])))
    CX_TANH_STEP(t[k_] = CXV_ADD(t[k_], t[k_]))
    CX_TANH_STEP(kb[k_] = CXV_FMADD(t[k_], CXV_SET1(CX_TANH_INV_LN2), rnd))
    CX_TANH_STEP(r[k_] = CXV_FNMADD(CXV_SUB(kb[k_], rnd), CXV_SET1(CX_TANH_LN2_HI), t[k_]))
    CX_TANH_STEP(r[k_] = CXV_FNMADD(CXV_SUB(kb[k_], rnd), CXV_SET1(CX_TANH_LN2_LO), r[k_]))
    CX_TANH_STEP(q[k_] = CXV_FMADD(CXV_SET1(CX_TANH_C11), r[k_], CXV_SET1(CX_TANH_C10)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C9)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C8)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C7)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C6)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C5)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C4)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C3)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C2)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C1)))
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], r[k_], CXV_SET1(CX_TANH_C0)))
    /* p = expm1(r) into q */
    CX_TANH_STEP(q[k_] = CXV_FMADD(q[k_], CXV_MUL(r[k_], r[k_]), r[k_]))
    /* s = 2^k from the integer in the low bits of kb, into t */
    CX_TANH_STEP(t[k_] = CXV_POW2(kb[k_]))
    /* E = s p + (s - 1), into r */
    CX_TANH_STEP(r[k_] = CXV_FMADD(t[k_], q[k_], CXV_SUB(t[k_], CXV_SET1(1.0))))
    CX_TANH_STEP(r[k_] = CXV_DIV(r[k_], CXV_ADD(r[k_], CXV_SET1(2.0))))
    CX_TANH_STEP(v[k_] = CXV_ORSIGN(r[k_], v[k_]))
}
#undef CX_TANH_STEP
