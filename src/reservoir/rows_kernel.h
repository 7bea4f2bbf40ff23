/* coexist: the vector pre-activation pass of one run (rows.c), a template over the vector width:
 * include it after simd.h with CX_SIMD_LANES set; it defines preact_rows_avx2 (4 lanes) or
 * preact_rows_avx512 (8 lanes). Private header, included once per width by rows.c. */

/* s_i for the nodes of the full chunks of the layout; lane l of chunk c is node rows_node[cL+l],
 * with exactly the operations of preact() in model.c. */
__attribute__((target(CXV_TARGET))) static void CXV_FN(preact_rows)(const cx_res_ws *restrict ws,
                                                                    const double *restrict x,
                                                                    const double *restrict u,
                                                                    double *restrict s)
{
    const int L = CX_SIMD_LANES;
    const int dim = ws->dim;
    const cx_idx nc = ws->rows_full / L;
    const cx_idx *restrict col = ws->rows_col;
    const double *restrict val = ws->rows_val;
    for (cx_idx c = 0; c < nc; c++) {
        const cx_idx q0 = c * L;
        CXV a = CXV_LOAD(ws->rows_bias + q0);
        if (ws->onehot) {
            a = CXV_ADD(a,
                        CXV_MUL(CXV_LOAD(ws->rows_inw + q0), CXV_GATHER(u, ws->rows_incol + q0)));
        } else {
            const double *w = ws->rows_win + c * dim * L;
            for (int j = 0; j < dim; j++)
                a = CXV_ADD(a, CXV_MUL(CXV_LOAD(w + j * L), CXV_SET1(u[j])));
        }
        /* rows sorted by descending length: every lane has the entries below the last lane's
         * length, the lanes beyond are masked */
        const cx_idx kmax = ws->rows_len[q0], kmin = ws->rows_len[q0 + L - 1];
        const cx_idx *cc = col + ws->rows_off[c];
        const double *vc = val + ws->rows_off[c];
        cx_idx k = 0;
        for (; k < kmin; k++)
            a = CXV_ADD(a, CXV_MUL(CXV_LOAD(vc + k * L), CXV_GATHER(x, cc + k * L)));
        for (; k < kmax; k++)
            a = CXV_ADD_IF(a, CXV_MUL(CXV_LOAD(vc + k * L), CXV_GATHER(x, cc + k * L)),
                           ws->rows_len + q0, k);
        double out[CX_SIMD_LANES];
        CXV_STORE(out, a);
        for (int l = 0; l < L; l++)
            s[ws->rows_node[q0 + l]] = out[l];
    }
}
