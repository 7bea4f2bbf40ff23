/* coexist: the fused closed-loop stage for a block of two runs (fused.c), a template over the
 * vector width: include it after simd.h and fused_kernel.h with CX_SIMD_LANES set; it defines
 * pair_stage_avx2 (4 lanes) or pair_stage_avx512 (8 lanes). Private header, included once per width
 * by fused.c.
 *
 * Two runs fill a quarter of an AVX-512 register, and padding them to eight runs costs four times
 * their arithmetic. Here the block keeps its n x 2 layout: node i's two values are one 128-bit
 * pair, and P = L/2 consecutive nodes are one full register. The per-node parts (pre-activation
 * and readout) work on pairs; the tanh and the stage update, the larger part, on full registers.
 * The readout still runs node by node, so every run's sums keep the scalar order. */
/* after fused_kernel.h, which brings this width's tanh (tanh_expm1_k.h) and stage update
 * (update_k.h) */

#if CX_SIMD_LANES == 4
/* P pairs into one register, and a register into its P pairs */
#define CXP_JOIN(a) _mm256_insertf128_pd(_mm256_castpd128_pd256((a)[0]), (a)[1], 1)
#define CXP_SPLIT(v, o)                                                                            \
    do {                                                                                           \
        (o)[0] = _mm256_castpd256_pd128(v);                                                        \
        (o)[1] = _mm256_extractf128_pd(v, 1);                                                      \
    } while (0)
#else
#define CXP_JOIN(a)                                                                                \
    _mm512_insertf64x4(                                                                            \
        _mm512_castpd256_pd512(_mm256_insertf128_pd(_mm256_castpd128_pd256((a)[0]), (a)[1], 1)),   \
        _mm256_insertf128_pd(_mm256_castpd128_pd256((a)[2]), (a)[3], 1), 1)
/* _mm512_extractf64x2_pd is AVX512DQ; the 32x4 form is AVX512F and moves the same bits */
#define CXP_SPLIT(v, o)                                                                            \
    do {                                                                                           \
        (o)[0] = _mm512_castpd512_pd128(v);                                                        \
        (o)[1] = _mm_castps_pd(_mm512_extractf32x4_ps(_mm512_castpd_ps(v), 1));                    \
        (o)[2] = _mm_castps_pd(_mm512_extractf32x4_ps(_mm512_castpd_ps(v), 2));                    \
        (o)[3] = _mm_castps_pd(_mm512_extractf32x4_ps(_mm512_castpd_ps(v), 3));                    \
    } while (0)
#endif

#define CXP_GROUP 4 /* registers whose tanh are evaluated abreast */

/* Node i's pre-activations of the two runs: preact() of model.c for each, in its order. */
__attribute__((always_inline, target(CXV_TARGET))) static inline __m128d
CXV_FN(pair_preact)(const cx_res_ws *restrict ws, const cx_csr *restrict m, const int DIM,
                    const __m128d *restrict ut, const double *restrict x, cx_idx i)
{
    __m128d s = _mm_set1_pd(ws->bias[i]);
    if (ws->onehot) {
        s = _mm_add_pd(s, _mm_mul_pd(_mm_set1_pd(ws->inw[i]), ut[ws->incol[i]]));
    } else {
        const double *w = ws->win + i * DIM;
        for (int j = 0; j < DIM; j++)
            s = _mm_add_pd(s, _mm_mul_pd(_mm_set1_pd(w[j]), ut[j]));
    }
    if (ws->bval != NULL) /* each run with its own values of M (several spectral radii) */
        for (cx_idx p = m->rowptr[i]; p < m->rowptr[i + 1]; p++)
            s = _mm_add_pd(
                s, _mm_mul_pd(_mm_loadu_pd(ws->bval + p * 2), _mm_loadu_pd(x + m->col[p] * 2)));
    else
        for (cx_idx p = m->rowptr[i]; p < m->rowptr[i + 1]; p++)
            s = _mm_add_pd(s, _mm_mul_pd(_mm_set1_pd(m->val[p]), _mm_loadu_pd(x + m->col[p] * 2)));
    return s;
}

/* Node i's share of the two readouts (readout_add of model.c): linear term then square. */
__attribute__((always_inline, target(CXV_TARGET))) static inline void
CXV_FN(pair_readout)(const int nsq, const int DIM, const double *restrict wp, __m128d v,
                     __m128d *restrict ya)
{
    if (nsq == 1) {
        for (int j = 0; j < DIM; j++)
            ya[j] = _mm_add_pd(ya[j], _mm_mul_pd(_mm_loadu_pd(wp + j * 2), v));
        return;
    }
    const __m128d v2 = _mm_mul_pd(v, v);
    for (int j = 0; j < DIM; j++) {
        const __m128d lin = _mm_mul_pd(_mm_loadu_pd(wp + j * 2), v);
        const __m128d sq = _mm_mul_pd(_mm_loadu_pd(wp + (DIM + j) * 2), v2);
        ya[j] = _mm_add_pd(ya[j], _mm_add_pd(lin, sq));
    }
}

/* pair_readout() for DIM = 2 with the four sums in one register, lane 2 j + c holding run c's
 * coordinate j (the packed weights of node i are in that order, linear terms then squares):
 * the same operations per sum, in fewer instructions. */
__attribute__((always_inline, target(CXV_TARGET))) static inline void
CXV_FN(pair_readout2)(const int nsq, const double *restrict wp, __m128d v, __m256d *restrict ya)
{
    const __m256d vv = _mm256_insertf128_pd(_mm256_castpd128_pd256(v), v, 1);
    if (nsq == 1) {
        *ya = _mm256_add_pd(*ya, _mm256_mul_pd(_mm256_loadu_pd(wp), vv));
        return;
    }
#if CX_SIMD_LANES == 8
    /* linear and square terms of the four sums side by side in one 512-bit product */
    const __m512d both = _mm512_insertf64x4(_mm512_castpd256_pd512(vv), _mm256_mul_pd(vv, vv), 1);
    const __m512d prod = _mm512_mul_pd(_mm512_loadu_pd(wp), both);
    *ya = _mm256_add_pd(
        *ya, _mm256_add_pd(_mm512_castpd512_pd256(prod), _mm512_extractf64x4_pd(prod, 1)));
#else
    const __m256d lin = _mm256_mul_pd(_mm256_loadu_pd(wp), vv);
    const __m256d sq = _mm256_mul_pd(_mm256_loadu_pd(wp + 4), _mm256_mul_pd(vv, vv));
    *ya = _mm256_add_pd(*ya, _mm256_add_pd(lin, sq));
#endif
}

static inline __attribute__((always_inline, target(CXV_TARGET))) void CXV_FN(pair_stage_dim)(
    const cx_res_ws *restrict ws, const cx_reservoir *restrict res, const int DIM, int stage,
    const double *restrict x, const double *restrict u, double c0, double *restrict acc, double *r,
    double *xout, const double *restrict pack, const double *restrict pconst, double *restrict y)
{
    enum { P = CX_SIMD_LANES / 2 };
    const cx_idx n = ws->n;
    const int nsq = ws->features == CX_FEAT_LINEAR ? 1 : 2;
    const cx_csr *m = res->m;
    __m128d ut[CX_MAX_DIM], ya[CX_MAX_DIM];
    __m256d ya2 = _mm256_setzero_pd(); /* DIM = 2: the four sums, pair_readout2() */
    for (int j = 0; j < DIM; j++) {
        ut[j] = _mm_set_pd(u[DIM + j], u[j]);
        ya[j] = _mm_setzero_pd();
    }
#define CXP_READ(i, v)                                                                             \
    do {                                                                                           \
        if (DIM == 2)                                                                              \
            CXV_FN(pair_readout2)(nsq, pack + (i)*nsq * 4, v, &ya2);                               \
        else                                                                                       \
            CXV_FN(pair_readout)(nsq, DIM, pack + (i)*nsq * DIM * 2, v, ya);                       \
    } while (0)
    const cx_idx span = (cx_idx)P * CXP_GROUP;
    cx_idx i0 = 0;
    /* CXP_GROUP registers of P nodes at a time (spelled with a constant count, so that it
     * unrolls), then the remaining whole registers */
#define CXP_BODY(G)                                                                                \
    do {                                                                                           \
        CXV v[CXP_GROUP];                                                                          \
        _Pragma("GCC unroll 4") for (int h = 0; h < (G); h++)                                      \
        {                                                                                          \
            __m128d s[P];                                                                          \
            _Pragma("GCC unroll 4") for (int a = 0; a < P; a++) s[a] =                             \
                CXV_FN(pair_preact)(ws, m, DIM, ut, x, i0 + h * P + a);                            \
            v[h] = CXP_JOIN(s);                                                                    \
        }                                                                                          \
        if ((G) == CXP_GROUP)                                                                      \
            CXV_FN(cx_tanh_expm1_k)(v, CXP_GROUP);                                                 \
        else                                                                                       \
            for (int h = 0; h < (G); h++)                                                          \
                CXV_FN(cx_tanh_expm1_k)(v + h, 1);                                                 \
        _Pragma("GCC unroll 4") for (int h = 0; h < (G); h++)                                      \
        {                                                                                          \
            const cx_idx ib = i0 + h * P;                                                          \
            const CXV xo = CXV_FN(update_k)(res, stage, v[h], x, c0, acc, r, xout, ib * 2);        \
            __m128d part[P];                                                                       \
            CXP_SPLIT(xo, part);                                                                   \
            _Pragma("GCC unroll 4") for (int a = 0; a < P; a++) CXP_READ(ib + a, part[a]);         \
        }                                                                                          \
    } while (0)
    for (; i0 + span <= n; i0 += span)
        CXP_BODY(CXP_GROUP);
    if (i0 + P <= n) {
        const int g = (int)((n - i0) / P);
        CXP_BODY(g);
        i0 += (cx_idx)g * P;
    }
#undef CXP_BODY
    /* the last n mod P nodes: their tanh in one register beside zeros, the update of model.c
     * (cx_res_stage_update), then their readout */
    if (i0 < n) {
        const int left = (int)(n - i0);
        __m128d s[P];
        for (int a = 0; a < P; a++)
            s[a] = a < left ? CXV_FN(pair_preact)(ws, m, DIM, ut, x, i0 + a) : _mm_setzero_pd();
        CXV v = CXP_JOIN(s);
        CXV_FN(cx_tanh_expm1_k)(&v, 1);
        double t[CX_SIMD_LANES];
        CXV_STORE(t, v);
        cx_res_stage_update(res, 2 * left, stage, x + i0 * 2, t, c0,
                            acc != NULL ? acc + i0 * 2 : NULL, r != NULL ? r + i0 * 2 : NULL,
                            xout + i0 * 2);
        for (int a = 0; a < left; a++)
            CXP_READ(i0 + a, _mm_loadu_pd(xout + (i0 + a) * 2));
    }
#undef CXP_READ
    if (DIM == 2) {
        double four[4];
        _mm256_storeu_pd(four, ya2);
        ya[0] = _mm_loadu_pd(four);
        ya[1] = _mm_loadu_pd(four + 2);
    }
    for (int j = 0; j < DIM; j++) {
        double lane[2];
        _mm_storeu_pd(lane, ya[j]);
        for (int c = 0; c < 2; c++)
            y[c * DIM + j] = ws->features == CX_FEAT_LINEAR_SQUARES_CONSTANT
                                 ? lane[c] + pconst[j * 2 + c]
                                 : lane[c];
    }
}

__attribute__((target(CXV_TARGET))) static void
CXV_FN(pair_stage)(const cx_res_ws *ws, const cx_reservoir *res, int stage, const double *x,
                   const double *u, double c0, double *acc, double *r, double *xout,
                   const double *pack, const double *pconst, double *y)
{
    if (ws->dim == 2)
        CXV_FN(pair_stage_dim)(ws, res, 2, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (ws->dim == 3)
        CXV_FN(pair_stage_dim)(ws, res, 3, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else
        CXV_FN(pair_stage_dim)(ws, res, ws->dim, stage, x, u, c0, acc, r, xout, pack, pconst, y);
}

#undef CXP_GROUP
#undef CXP_JOIN
#undef CXP_SPLIT
