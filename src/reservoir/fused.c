/* coexist: the closed-loop block kernel fused into one pass over the nodes, for AVX2 + FMA and
 * our own tanh (CX_TANH_EXPM1).
 *
 * batch.c advances B closed-loop runs as an n x B row-major block in four passes per RK4 stage
 * (pre-activations, tanh, stage update, readout). Profiling the benchmark sweep showed those
 * passes, compiled for the baseline x86-64 (two lanes, no FMA), costing about twice the tanh. Here
 * one pass over the nodes does all four for four runs at a time in one 256-bit register: node i's
 * pre-activations of the runs, their tanh (tanh_expm1.h, the very operations of the tanh pass),
 * the stage update (Lu, Hunt & Ott 2018, Chaos 28, 061104; the classical RK4 of Kutta 1901, as in
 * model.c) and node i's share of every run's readout. Every run's arithmetic is the scalar
 * kernels' (model.c), operation for operation and in the same order, with no fused multiply-add
 * outside the tanh (which uses them on every path), so a run's bits are the same as with one run
 * at a time; tests/test_speed.c checks it for B = 1..8 and both models.
 *
 * The block's width w is a multiple of 4 (batch.c pads it with copies of a run); the readouts of
 * the w columns are packed node by node (cx_res_pack_readouts) so that the weights of four runs
 * for one node and one output coordinate are one load.
 */
#include <string.h>

#include "reservoir/reservoir_impl.h"
#include "reservoir/tanh_expm1.h"

#if defined(__x86_64__)

int cx_res_fused_ok(const cx_reservoir *res)
{
    return res->tanh_mode == CX_TANH_EXPM1 && __builtin_cpu_supports("avx2") &&
           __builtin_cpu_supports("fma");
}

void cx_res_pack_readouts(cx_idx n, int dim, int features, int w, const double *const *w_out,
                          double *pack, double *pconst)
{
    const int nsq = features == CX_FEAT_LINEAR ? 1 : 2;
    for (cx_idx i = 0; i < n; i++)
        for (int h = 0; h < nsq; h++)
            for (int j = 0; j < dim; j++)
                for (int c = 0; c < w; c++)
                    pack[((i * nsq + h) * dim + j) * w + c] = w_out[c][(h * n + i) * dim + j];
    if (features == CX_FEAT_LINEAR_SQUARES_CONSTANT)
        for (int j = 0; j < dim; j++)
            for (int c = 0; c < w; c++)
                pconst[j * w + c] = w_out[c][2 * n * dim + j];
}

#define CX_FUSED       static inline __attribute__((always_inline, target("avx2,fma")))
#define CX_FUSED_CHUNK 8 /* nodes whose tanh are evaluated abreast */

/* One stage for w = 4 nq columns and a task dimension DIM (a constant where inlined). */
CX_FUSED void fused_stage(const cx_res_ws *restrict ws, const cx_reservoir *restrict res,
                          const int nq, const int DIM, int stage, const double *restrict x,
                          const double *restrict u, double c0, double *restrict acc, double *r,
                          double *xout, const double *restrict pack, const double *restrict pconst,
                          double *restrict y)
{
    const int w = 4 * nq;
    const cx_idx n = ws->n;
    const int features = ws->features;
    const int nsq = features == CX_FEAT_LINEAR ? 1 : 2;
    const cx_idx *restrict rowptr = res->m->rowptr;
    const cx_idx *restrict col = res->m->col;
    const double *restrict val = res->m->val;
    /* the inputs of the columns, coordinate by coordinate: ut[j][c] = u[c][j] */
    double ut[CX_MAX_DIM * CX_MAX_RUNS];
    for (int c = 0; c < w; c++)
        for (int j = 0; j < DIM; j++)
            ut[j * w + c] = u[c * DIM + j];
    __m256d ya[CX_MAX_DIM][2];
    for (int j = 0; j < DIM; j++)
        for (int q = 0; q < nq; q++)
            ya[j][q] = _mm256_setzero_pd();
    const __m256d gamma = _mm256_set1_pd(res->rate);
    const __m256d cc = _mm256_set1_pd(c0);
    const __m256d two = _mm256_set1_pd(2.0);
    const __m256d leak = _mm256_set1_pd(res->leak), keep = _mm256_set1_pd(1.0 - res->leak);
    /* CX_FUSED_CHUNK nodes at a time: their pre-activations, then their tanh four vectors
     * abreast (independent chains side by side, see tanh_expm1.h), then update and readout */
    for (cx_idx i0 = 0; i0 < n; i0 += CX_FUSED_CHUNK) {
        const int m = n - i0 < CX_FUSED_CHUNK ? (int)(n - i0) : CX_FUSED_CHUNK;
        __m256d s[CX_FUSED_CHUNK * 2];
        for (int a = 0; a < m; a++) {
            const cx_idx i = i0 + a;
            __m256d *si = s + a * nq;
            const __m256d bi = _mm256_set1_pd(ws->bias[i]);
            /* pre-activation: b_i + input, then the entries of row i in storage order */
            if (ws->onehot) {
                const __m256d wi = _mm256_set1_pd(ws->inw[i]);
                const double *uj = ut + ws->incol[i] * w;
                for (int q = 0; q < nq; q++)
                    si[q] = _mm256_add_pd(bi, _mm256_mul_pd(wi, _mm256_loadu_pd(uj + 4 * q)));
            } else {
                for (int q = 0; q < nq; q++)
                    si[q] = bi;
                const double *wrow = ws->win + i * DIM;
                for (int j = 0; j < DIM; j++) {
                    const __m256d wj = _mm256_set1_pd(wrow[j]);
                    for (int q = 0; q < nq; q++)
                        si[q] = _mm256_add_pd(
                            si[q], _mm256_mul_pd(wj, _mm256_loadu_pd(ut + j * w + 4 * q)));
                }
            }
            for (cx_idx p = rowptr[i]; p < rowptr[i + 1]; p++) {
                const __m256d v = _mm256_set1_pd(val[p]);
                const double *xj = x + col[p] * w;
                for (int q = 0; q < nq; q++)
                    si[q] = _mm256_add_pd(si[q], _mm256_mul_pd(v, _mm256_loadu_pd(xj + 4 * q)));
            }
        }
        const int nv = m * nq;
        int v0 = 0;
        for (; v0 + 4 <= nv; v0 += 4)
            cx_tanh_expm1_avx2_k(s + v0, 4);
        for (; v0 < nv; v0++)
            cx_tanh_expm1_avx2_k(s + v0, 1);
        for (int a = 0; a < m; a++) {
            const cx_idx i = i0 + a;
            const double *wp = pack + i * nsq * DIM * w;
            for (int q = 0; q < nq; q++) {
                const cx_idx o = i * w + 4 * q;
                const __m256d t = s[a * nq + q];
                const __m256d xi = _mm256_loadu_pd(x + o);
                __m256d xo;
                if (stage == 0) {
                    xo = _mm256_add_pd(_mm256_mul_pd(keep, xi), _mm256_mul_pd(leak, t));
                } else {
                    const __m256d k = _mm256_mul_pd(gamma, _mm256_sub_pd(t, xi));
                    const __m256d ri = _mm256_loadu_pd(r + o);
                    if (stage == 1) {
                        _mm256_storeu_pd(acc + o, k);
                        xo = _mm256_add_pd(ri, _mm256_mul_pd(cc, k));
                    } else if (stage < 4) {
                        _mm256_storeu_pd(acc + o, _mm256_add_pd(_mm256_loadu_pd(acc + o),
                                                                _mm256_mul_pd(two, k)));
                        xo = _mm256_add_pd(ri, _mm256_mul_pd(cc, k));
                    } else {
                        xo = _mm256_add_pd(
                            ri, _mm256_mul_pd(cc, _mm256_add_pd(_mm256_loadu_pd(acc + o), k)));
                    }
                }
                _mm256_storeu_pd(xout + o, xo);
                /* node i's share of the readouts: linear term then square (readout_add) */
                if (nsq == 1) {
                    for (int j = 0; j < DIM; j++)
                        ya[j][q] = _mm256_add_pd(
                            ya[j][q], _mm256_mul_pd(_mm256_loadu_pd(wp + j * w + 4 * q), xo));
                } else {
                    const __m256d x2 = _mm256_mul_pd(xo, xo);
                    for (int j = 0; j < DIM; j++) {
                        const __m256d lin = _mm256_mul_pd(_mm256_loadu_pd(wp + j * w + 4 * q), xo);
                        const __m256d sq =
                            _mm256_mul_pd(_mm256_loadu_pd(wp + (DIM + j) * w + 4 * q), x2);
                        ya[j][q] = _mm256_add_pd(ya[j][q], _mm256_add_pd(lin, sq));
                    }
                }
            }
        }
    }
    for (int j = 0; j < DIM; j++)
        for (int q = 0; q < nq; q++) {
            double lane[4];
            _mm256_storeu_pd(lane, ya[j][q]);
            for (int l = 0; l < 4; l++) {
                const int c = 4 * q + l;
                y[c * DIM + j] = features == CX_FEAT_LINEAR_SQUARES_CONSTANT
                                     ? lane[l] + pconst[j * w + c]
                                     : lane[l];
            }
        }
}

__attribute__((target("avx2,fma"))) void
cx_res_stage_fused(const cx_res_ws *ws, const cx_reservoir *res, int w, int stage, const double *x,
                   const double *u, double c0, double *acc, double *r, double *xout,
                   const double *pack, const double *pconst, double *y)
{
    /* instantiated for the usual widths and task dimension, so that the loops over the runs and
     * the coordinates unroll and the sums stay in registers */
    const int dim = ws->dim;
    if (w == 4 && dim == 2)
        fused_stage(ws, res, 1, 2, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (w == 8 && dim == 2)
        fused_stage(ws, res, 2, 2, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (w == 4 && dim == 3)
        fused_stage(ws, res, 1, 3, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (w == 8 && dim == 3)
        fused_stage(ws, res, 2, 3, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (w == 4)
        fused_stage(ws, res, 1, dim, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else
        fused_stage(ws, res, 2, dim, stage, x, u, c0, acc, r, xout, pack, pconst, y);
}

#else

int cx_res_fused_ok(const cx_reservoir *res)
{
    (void)res;
    return 0;
}

void cx_res_pack_readouts(cx_idx n, int dim, int features, int w, const double *const *w_out,
                          double *pack, double *pconst)
{
    (void)n, (void)dim, (void)features, (void)w, (void)w_out, (void)pack, (void)pconst;
}

void cx_res_stage_fused(const cx_res_ws *ws, const cx_reservoir *res, int w, int stage,
                        const double *x, const double *u, double c0, double *acc, double *r,
                        double *xout, const double *pack, const double *pconst, double *y)
{
    (void)ws, (void)res, (void)w, (void)stage, (void)x, (void)u, (void)c0, (void)acc, (void)r;
    (void)xout, (void)pack, (void)pconst, (void)y;
}

#endif
