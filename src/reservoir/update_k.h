/* coexist: the vector form of one stage update (cx_res_stage_update of model.c: the leaky map,
 * stage 0, or the RK4 stages 1..4 of Kutta 1901 as in model.c), a template over the vector width:
 * include it after simd.h with CX_SIMD_LANES set; it defines update_k_avx2 or update_k_avx512
 * (update_k_avx512g with CX_SIMD_HWGATHER). Private header, included by fused_kernel.h,
 * rows_kernel.h and (through fused_kernel.h) pair_kernel.h, so that the three kernels share one
 * spelling of the update. Each lane does the scalar update's operations in its order. */

/* The L values at o: t the new tanh values, x the stage's input state, r the state at the step's
 * start, acc the RK4 sum so far; writes xout (and acc for stages 1..3) and returns the new
 * state. acc and r are not read for stage 0. The constants are broadcast here; the callers'
 * loops keep them in registers. */
__attribute__((always_inline, target(CXV_TARGET))) static inline CXV
CXV_FN(update_k)(const cx_reservoir *restrict res, int stage, CXV t, const double *restrict x,
                 double c0, double *restrict acc, const double *r, double *xout, cx_idx o)
{
    const CXV xi = CXV_LOAD(x + o);
    CXV xo;
    if (stage == 0) {
        xo = CXV_ADD(CXV_MUL(CXV_SET1(1.0 - res->leak), xi), CXV_MUL(CXV_SET1(res->leak), t));
    } else {
        const CXV k = CXV_MUL(CXV_SET1(res->rate), CXV_SUB(t, xi));
        const CXV ri = CXV_LOAD(r + o), cc = CXV_SET1(c0);
        if (stage == 1) {
            CXV_STORE(acc + o, k);
            xo = CXV_ADD(ri, CXV_MUL(cc, k));
        } else if (stage < 4) {
            CXV_STORE(acc + o, CXV_ADD(CXV_LOAD(acc + o), CXV_MUL(CXV_SET1(2.0), k)));
            xo = CXV_ADD(ri, CXV_MUL(cc, k));
        } else {
            xo = CXV_ADD(ri, CXV_MUL(cc, CXV_ADD(CXV_LOAD(acc + o), k)));
        }
    }
    CXV_STORE(xout + o, xo);
    return xo;
}
