/* coexist: the vector passes of one run over the row layout (rows.c), a template over the vector
 * width: include it after simd.h with CX_SIMD_LANES set; it defines preact_rows_avx2 and
 * open_rows_avx2 (4 lanes) or preact_rows_avx512 and open_rows_avx512 (8 lanes; _avx512g with
 * CX_SIMD_HWGATHER). Private header, included by rows.c once per width and gather. */
#include "reservoir/tanh_expm1_k.h"
#include "reservoir/update_k.h"

/* The pre-activations of chunk c, lane l being the node at position cL + l: exactly the
 * operations of preact() in model.c. col: the columns of the entries (rows_col, node numbers, or
 * rows_pcol, positions, whichever order x is in). */
__attribute__((always_inline, target(CXV_TARGET))) static inline CXV
CXV_FN(chunk_preact)(const cx_res_ws *restrict ws, cx_idx c, const cx_idx *restrict col,
                     const double *restrict x, const double *restrict u, CXV utab)
{
    const int L = CX_SIMD_LANES;
    const cx_idx q0 = c * L;
    CXV a = CXV_LOAD(ws->rows_bias + q0);
    if (ws->onehot) {
        a = CXV_ADD(a,
                    CXV_MUL(CXV_LOAD(ws->rows_inw + q0), CXV_LOOKUP(utab, u, ws->rows_incol + q0)));
    } else {
        const double *w = ws->rows_win + c * ws->dim * L;
        for (int j = 0; j < ws->dim; j++)
            a = CXV_ADD(a, CXV_MUL(CXV_LOAD(w + j * L), CXV_SET1(u[j])));
    }
    /* rows sorted by descending length: every lane has the entries below the last lane's
     * length, the lanes beyond are masked */
    const cx_idx kmax = ws->rows_len[q0], kmin = ws->rows_len[q0 + L - 1];
    const cx_idx *cc = col + ws->rows_off[c];
    const double *vc = ws->rows_val + ws->rows_off[c];
    cx_idx k = 0;
    for (; k < kmin; k++)
        a = CXV_ADD(a, CXV_MUL(CXV_LOAD(vc + k * L), CXV_GATHER(x, cc + k * L)));
    for (; k < kmax; k++)
        a = CXV_ADD_IF(a, CXV_MUL(CXV_LOAD(vc + k * L), CXV_GATHER(x, cc + k * L)),
                       ws->rows_len + q0, k);
    return a;
}

/* The sum of x[idx[k]] over k < m (m a multiple of L), L lanes at a time: the gathers alone,
 * timed by rows.c to choose between the two 8-lane gathers. */
__attribute__((target(CXV_TARGET), unused)) static double
CXV_FN(gather_sum)(const double *restrict x, const cx_idx *restrict idx, cx_idx m)
{
    CXV a = CXV_ZERO(), b = CXV_ZERO();
    for (cx_idx k = 0; k + 2 * CX_SIMD_LANES <= m; k += 2 * CX_SIMD_LANES) {
        a = CXV_ADD(a, CXV_GATHER(x, idx + k));
        b = CXV_ADD(b, CXV_GATHER(x, idx + k + CX_SIMD_LANES));
    }
    double out[CX_SIMD_LANES], sum = 0.0;
    CXV_STORE(out, CXV_ADD(a, b));
    for (int l = 0; l < CX_SIMD_LANES; l++)
        sum += out[l];
    return sum;
}

/* s_i for the nodes of the full chunks of the layout (x, s in node order). */
__attribute__((target(CXV_TARGET))) static void CXV_FN(preact_rows)(const cx_res_ws *restrict ws,
                                                                    const double *restrict x,
                                                                    const double *restrict u,
                                                                    double *restrict s)
{
    const int L = CX_SIMD_LANES;
    const cx_idx nc = ws->rows_full / L;
    const CXV utab = CXV_TABLE(u, ws->dim);
    for (cx_idx c = 0; c < nc; c++) {
        double out[CX_SIMD_LANES];
        CXV_STORE(out, CXV_FN(chunk_preact)(ws, c, ws->rows_col, x, u, utab));
        for (int l = 0; l < L; l++)
            s[ws->rows_node[c * L + l]] = out[l];
    }
}

/* One open-loop stage of one run with every vector in position order (x[q] is node
 * rows_node[q]'s value): the pre-activations of CX_ROWS_GROUP chunks, their tanh (ours, the
 * operations of tanh_expm1_k.h) and the stage update (update_k.h, the operations of
 * cx_res_stage_update), for the positions of the full chunks. xout is never x. */
#define CX_ROWS_GROUP 4
__attribute__((target(CXV_TARGET))) static void
CXV_FN(open_rows)(const cx_res_ws *restrict ws, const cx_reservoir *restrict res, int stage,
                  const double *restrict x, const double *restrict u, double c0,
                  double *restrict acc, double *r, double *xout)
{
    const int L = CX_SIMD_LANES;
    const cx_idx nc = ws->rows_full / L;
    const CXV utab = CXV_TABLE(u, ws->dim);
    for (cx_idx c0g = 0; c0g < nc; c0g += CX_ROWS_GROUP) {
        const int g = nc - c0g < CX_ROWS_GROUP ? (int)(nc - c0g) : CX_ROWS_GROUP;
        CXV a[CX_ROWS_GROUP];
        for (int h = 0; h < g; h++)
            a[h] = CXV_FN(chunk_preact)(ws, c0g + h, ws->rows_pcol, x, u, utab);
        if (g == CX_ROWS_GROUP)
            CXV_FN(cx_tanh_expm1_k)(a, CX_ROWS_GROUP);
        else
            for (int h = 0; h < g; h++)
                CXV_FN(cx_tanh_expm1_k)(a + h, 1);
        for (int h = 0; h < g; h++)
            (void)CXV_FN(update_k)(res, stage, a[h], x, c0, acc, r, xout, (c0g + h) * L);
    }
}
#undef CX_ROWS_GROUP
