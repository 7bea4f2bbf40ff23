/* coexist: the constants of our own tanh (CX_TANH_EXPM1), shared by the tanh pass (tanh.c) and
 * the fused closed-loop kernel (fused.c) so that both evaluate exactly the same operations. The
 * method and its error are described in tanh.c; its vector body is tanh_expm1_k.h. Private header.
 */
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

#endif
