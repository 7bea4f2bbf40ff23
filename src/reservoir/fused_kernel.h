/* coexist: the fused closed-loop stage kernel (fused.c), a template over the vector width:
 * include it after simd.h with CX_SIMD_LANES set; it defines fused_stage_avx2 (4 lanes) or
 * fused_stage_avx512 (8 lanes) and cx_res_stage_fused_avx2 / _avx512, which take blocks of
 * w = L or 2 L columns. Private header, included once per width by fused.c. */
#include "reservoir/tanh_expm1_k.h"
#include "reservoir/update_k.h"

/* One stage for w = L nq (L = CX_SIMD_LANES) columns and a task dimension DIM (a constant where
 * inlined). */
static inline __attribute__((always_inline, target(CXV_TARGET))) void
CXV_FN(fused_stage)(const cx_res_ws *restrict ws, const cx_reservoir *restrict res, const int nq,
                    const int DIM, int stage, const double *restrict x, const double *restrict u,
                    double c0, double *restrict acc, double *r, double *xout,
                    const double *restrict pack, const double *restrict pconst, double *restrict y)
{
    const int w = CX_SIMD_LANES * nq;
    const cx_idx n = ws->n;
    const int features = ws->features;
    const int nsq = features == CX_FEAT_LINEAR ? 1 : 2;
    const cx_idx *restrict rowptr = res->m->rowptr;
    const cx_idx *restrict col = res->m->col;
    const double *restrict val = res->m->val;
    const double *restrict bval = ws->bval; /* per-column values of M, or NULL */
    /* the inputs of the columns, coordinate by coordinate: ut[j][c] = u[c][j] */
    double ut[CX_MAX_DIM * CX_MAX_RUNS];
    for (int c = 0; c < w; c++)
        for (int j = 0; j < DIM; j++)
            ut[j * w + c] = u[c * DIM + j];
    CXV ya[CX_MAX_DIM][CX_FUSED_NQ];
    for (int j = 0; j < DIM; j++)
        for (int q = 0; q < nq; q++)
            ya[j][q] = CXV_ZERO();
    /* CX_FUSED_CHUNK nodes at a time: their pre-activations, then their tanh four vectors
     * abreast (independent chains side by side, see tanh_expm1.h), then update and readout */
    for (cx_idx i0 = 0; i0 < n; i0 += CX_FUSED_CHUNK) {
        const int m = n - i0 < CX_FUSED_CHUNK ? (int)(n - i0) : CX_FUSED_CHUNK;
        CXV s[CX_FUSED_CHUNK * CX_FUSED_NQ];
        for (int a = 0; a < m; a++) {
            const cx_idx i = i0 + a;
            CXV *si = s + a * nq;
            const CXV bi = CXV_SET1(ws->bias[i]);
            /* pre-activation: b_i + input, then the entries of row i in storage order */
            if (ws->onehot) {
                const CXV wi = CXV_SET1(ws->inw[i]);
                const double *uj = ut + ws->incol[i] * w;
                for (int q = 0; q < nq; q++)
                    si[q] = CXV_ADD(bi, CXV_MUL(wi, CXV_LOAD(uj + CX_SIMD_LANES * q)));
            } else {
                for (int q = 0; q < nq; q++)
                    si[q] = bi;
                const double *wrow = ws->win + i * DIM;
                for (int j = 0; j < DIM; j++) {
                    const CXV wj = CXV_SET1(wrow[j]);
                    for (int q = 0; q < nq; q++)
                        si[q] =
                            CXV_ADD(si[q], CXV_MUL(wj, CXV_LOAD(ut + j * w + CX_SIMD_LANES * q)));
                }
            }
            if (bval != NULL) {
                /* each column with its own values of M (cells of several spectral radii) */
                for (cx_idx p = rowptr[i]; p < rowptr[i + 1]; p++) {
                    const double *xj = x + col[p] * w, *vp = bval + p * w;
                    for (int q = 0; q < nq; q++)
                        si[q] = CXV_ADD(si[q], CXV_MUL(CXV_LOAD(vp + CX_SIMD_LANES * q),
                                                       CXV_LOAD(xj + CX_SIMD_LANES * q)));
                }
            } else {
                for (cx_idx p = rowptr[i]; p < rowptr[i + 1]; p++) {
                    const CXV v = CXV_SET1(val[p]);
                    const double *xj = x + col[p] * w;
                    for (int q = 0; q < nq; q++)
                        si[q] = CXV_ADD(si[q], CXV_MUL(v, CXV_LOAD(xj + CX_SIMD_LANES * q)));
                }
            }
        }
        const int nv = m * nq;
        int v0 = 0;
        for (; v0 + CX_FUSED_K <= nv; v0 += CX_FUSED_K)
            CXV_FN(cx_tanh_expm1_k)(s + v0, CX_FUSED_K);
        for (; v0 < nv; v0++)
            CXV_FN(cx_tanh_expm1_k)(s + v0, 1);
        for (int a = 0; a < m; a++) {
            const cx_idx i = i0 + a;
            const double *wp = pack + i * nsq * DIM * w;
            for (int q = 0; q < nq; q++) {
                const cx_idx o = i * w + CX_SIMD_LANES * q;
                const CXV xo = CXV_FN(update_k)(res, stage, s[a * nq + q], x, c0, acc, r, xout, o);
                /* node i's share of the readouts: linear term then square (readout_add) */
                if (nsq == 1) {
                    for (int j = 0; j < DIM; j++)
                        ya[j][q] = CXV_ADD(ya[j][q],
                                           CXV_MUL(CXV_LOAD(wp + j * w + CX_SIMD_LANES * q), xo));
                } else {
                    const CXV x2 = CXV_MUL(xo, xo);
                    for (int j = 0; j < DIM; j++) {
                        const CXV lin = CXV_MUL(CXV_LOAD(wp + j * w + CX_SIMD_LANES * q), xo);
                        const CXV sq =
                            CXV_MUL(CXV_LOAD(wp + (DIM + j) * w + CX_SIMD_LANES * q), x2);
                        ya[j][q] = CXV_ADD(ya[j][q], CXV_ADD(lin, sq));
                    }
                }
            }
        }
    }
    for (int j = 0; j < DIM; j++)
        for (int q = 0; q < nq; q++) {
            double lane[CX_SIMD_LANES];
            CXV_STORE(lane, ya[j][q]);
            for (int l = 0; l < CX_SIMD_LANES; l++) {
                const int c = CX_SIMD_LANES * q + l;
                y[c * DIM + j] = features == CX_FEAT_LINEAR_SQUARES_CONSTANT
                                     ? lane[l] + pconst[j * w + c]
                                     : lane[l];
            }
        }
}

__attribute__((target(CXV_TARGET))) static void
CXV_FN(stage_fused)(const cx_res_ws *ws, const cx_reservoir *res, int w, int stage, const double *x,
                    const double *u, double c0, double *acc, double *r, double *xout,
                    const double *pack, const double *pconst, double *y)
{
    /* instantiated for the usual widths and task dimension, so that the loops over the runs and
     * the coordinates unroll and the sums stay in registers */
    const int dim = ws->dim;
    const int nq = w / CX_SIMD_LANES;
#define CX_CALL(NQ, DIM)                                                                           \
    CXV_FN(fused_stage)(ws, res, NQ, DIM, stage, x, u, c0, acc, r, xout, pack, pconst, y)
    if (nq == 1 && dim == 2)
        CX_CALL(1, 2);
    else if (nq == 2 && dim == 2)
        CX_CALL(2, 2);
    else if (nq == 1 && dim == 3)
        CX_CALL(1, 3);
    else if (nq == 2 && dim == 3)
        CX_CALL(2, 3);
    else if (nq == 1)
        CX_CALL(1, dim);
    else
        CX_CALL(2, dim);
#undef CX_CALL
}
