/* coexist: the pre-activations of one run, L nodes at a time in one vector register.
 *
 * The pass s_i = b_i + (sigma W_in u)_i + sum_j M_ij x_j of model.c, one node after another, was
 * the larger part of a one-run step (about 2 ns of the 3 ns per node per stage of the drive on
 * the project machine, tools/bench.c): each node is a short chain of dependent adds over a few
 * scattered loads. Here L nodes (4 with AVX2, 8 with AVX-512F) advance side by side, lane l
 * doing exactly node i's operations in node i's order (b_i + input, then the entries of row i
 * in storage order), so every s_i has the bits of the scalar pass. The rows are laid out in the
 * sliced ELLPACK form with rows sorted by length (SELL-C-sigma of Kreutzer, Hager, Wellein,
 * Fehske & Bishop 2014, SIAM J. Sci. Comput. 36(5), C401, with C = L and sigma = n): chunk c
 * holds L rows of similar length, its k-th entries side by side; a lane whose row is shorter
 * than k is left out by a mask, never given a zero entry (a zero times an infinite x would be
 * NaN, and -0 + 0 is +0). The layout is rebuilt by cx_res_meet at every call (O(n + nnz)), since
 * a caller may rescale M in place between calls. The rows past the last full chunk (the shortest)
 * take the scalar pass.
 */
#include <stdlib.h>
#include <string.h>

#include "coexist/clock.h"
#include "coexist/error.h"
#include "reservoir/reservoir_impl.h"

/* The per-node tables of the layout, all or nothing (a failure leaves none behind). */
static int rows_alloc(cx_res_ws *ws)
{
    int rc = CX_OK;
    const cx_idx n = ws->n;
    cx_idx *node = NULL, *pos = NULL, *len = NULL, *incol = NULL, *offs = NULL;
    double *bias = NULL, *inw = NULL, *win = NULL, *xbuf = NULL;
    CX_ALLOC(node, n);
    CX_ALLOC(pos, n);
    CX_ALLOC(xbuf, n);
    CX_ALLOC(len, n);
    CX_ALLOC(incol, n);
    CX_ALLOC(offs, n / 4 + 1);
    CX_ALLOC(bias, n);
    CX_ALLOC(inw, n);
    CX_ALLOC(win, n * ws->dim);
    ws->rows_node = node;
    ws->rows_pos = pos;
    ws->rows_x = xbuf;
    ws->rows_len = len;
    ws->rows_incol = incol;
    ws->rows_off = offs;
    ws->rows_bias = bias;
    ws->rows_inw = inw;
    ws->rows_win = win;
    return CX_OK;
done:
    free(xbuf);
    free(win);
    free(inw);
    free(bias);
    free(offs);
    free(incol);
    free(len);
    free(pos);
    free(node);
    return rc;
}

/* Room for `need` entries of the layout, all or nothing. */
static int rows_entries(cx_res_ws *ws, cx_idx need)
{
    int rc = CX_OK;
    cx_idx *col = NULL, *pcol = NULL;
    double *val = NULL;
    CX_ALLOC(col, need);
    CX_ALLOC(pcol, need);
    CX_ALLOC(val, need);
    free(ws->rows_col);
    free(ws->rows_pcol);
    free(ws->rows_val);
    ws->rows_col = col;
    ws->rows_pcol = pcol;
    ws->rows_val = val;
    ws->rows_cap = need;
    return CX_OK;
done:
    free(val);
    free(pcol);
    free(col);
    return rc;
}

int cx_res_rows_build(cx_res_ws *ws, const cx_reservoir *res)
{
    int rc = CX_OK;
    const int lanes = cx_res_simd_lanes();
    ws->rows_lanes = 0;
    if (lanes < 4)
        return CX_OK;
    const cx_idx n = ws->n;
    const int dim = ws->dim;
    const cx_csr *m = res->m;
    if (ws->rows_node == NULL)
        CX_TRY(rows_alloc(ws));
    /* positions by descending row length, ties in node order (a counting sort) */
    cx_idx maxlen = 0;
    for (cx_idx i = 0; i < n; i++) {
        const cx_idx len = m->rowptr[i + 1] - m->rowptr[i];
        maxlen = len > maxlen ? len : maxlen;
    }
    cx_idx *start = NULL;
    CX_CALLOC(start, maxlen + 2);
    for (cx_idx i = 0; i < n; i++)
        start[maxlen - (m->rowptr[i + 1] - m->rowptr[i]) + 1]++;
    for (cx_idx k = 1; k <= maxlen + 1; k++)
        start[k] += start[k - 1];
    for (cx_idx i = 0; i < n; i++)
        ws->rows_node[start[maxlen - (m->rowptr[i + 1] - m->rowptr[i])]++] = i;
    free(start);
    for (cx_idx q = 0; q < n; q++)
        ws->rows_pos[ws->rows_node[q]] = q;
    const cx_idx full = n / lanes * lanes;
    cx_idx need = 0;
    for (cx_idx q = 0; q < full; q += lanes) {
        const cx_idx i = ws->rows_node[q];
        need += (m->rowptr[i + 1] - m->rowptr[i]) * lanes;
    }
    if (need > ws->rows_cap || ws->rows_col == NULL)
        CX_TRY(rows_entries(ws, need > 0 ? need : 1)); /* never NULL, even for an empty M */
    cx_idx off = 0;
    for (cx_idx q = 0; q < n; q++) {
        const cx_idx i = ws->rows_node[q];
        ws->rows_len[q] = m->rowptr[i + 1] - m->rowptr[i];
        ws->rows_bias[q] = ws->bias[i];
        ws->rows_inw[q] = ws->inw[i];
        ws->rows_incol[q] = ws->incol[i];
    }
    for (cx_idx q0 = 0; q0 < full; q0 += lanes) {
        const cx_idx c = q0 / lanes;
        const cx_idx kmax = ws->rows_len[q0];
        ws->rows_off[c] = off;
        for (int j = 0; j < dim; j++)
            for (int l = 0; l < lanes; l++)
                ws->rows_win[(c * dim + j) * lanes + l] = ws->win[ws->rows_node[q0 + l] * dim + j];
        for (cx_idx k = 0; k < kmax; k++)
            for (int l = 0; l < lanes; l++) {
                const cx_idx i = ws->rows_node[q0 + l];
                const int in = k < ws->rows_len[q0 + l];
                /* a short row's lane reads x_i and adds nothing (masked) */
                ws->rows_col[off + k * lanes + l] = in ? m->col[m->rowptr[i] + k] : i;
                ws->rows_pcol[off + k * lanes + l] =
                    ws->rows_pos[ws->rows_col[off + k * lanes + l]];
                ws->rows_val[off + k * lanes + l] = in ? m->val[m->rowptr[i] + k] : 0.0;
            }
        off += kmax * lanes;
    }
    ws->rows_full = full;
    ws->rows_lanes = lanes;
    ws->rows_hwgather = lanes == 8 && cx_res_gather_hw();
done:
    return rc;
}

#if defined(__x86_64__)

#define CX_SIMD_LANES 4
#include "reservoir/simd.h"
#include "reservoir/rows_kernel.h"
#undef CX_SIMD_LANES
#include "reservoir/simd.h"

#define CX_SIMD_LANES 8
#include "reservoir/simd.h"
#include "reservoir/rows_kernel.h"
#undef CX_SIMD_LANES
#include "reservoir/simd.h"

/* the 8-lane passes again with the gather instruction (names ending in _avx512g); without
 * optimisation GCC spells the gather intrinsic as a macro whose all-lanes mask trips
 * -Wsign-conversion inside its own header, so that warning is off for these lines */
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wsign-conversion"
#define CX_SIMD_HWGATHER
#define CX_SIMD_LANES 8
#include "reservoir/simd.h"
#include "reservoir/rows_kernel.h"
#undef CX_SIMD_LANES
#include "reservoir/simd.h"
#undef CX_SIMD_HWGATHER
#pragma GCC diagnostic pop

/* Which 8-lane gather: -1 not yet measured, 0 scalar loads, 1 the gather instruction. The two
 * load the same values, so the choice changes only the speed. Measured once per process: AVX-512
 * gathers ran the one-run drive 1.2x faster than eight loads on an Intel Xeon of the project
 * (2.3 against 2.8 ns per node per stage, tools/bench.c), while the AVX2 gather was slower than
 * four loads there (3.7 against 3.4), so 4 lanes always load. */
static int gather_mode = -1;

int cx_res_gather_force(int mode)
{
    const int old = gather_mode;
    gather_mode = mode < 0 ? -1 : mode != 0;
    return old;
}

/* The best of several alternating timings of the same 8-lane gathers, both ways, over a 16 KiB
 * table and a scattered index pattern (some 30 microseconds in all). */
static int measure_gathers(void)
{
    enum { CX_GM = 2048, CX_ROUNDS = 15 };
    static double x[CX_GM];
    static cx_idx idx[CX_GM];
    for (cx_idx i = 0; i < CX_GM; i++) {
        x[i] = (double)i;
        idx[i] = (cx_idx)(((uint64_t)i * 2654435761u) % CX_GM);
    }
    double best[2] = {1e30, 1e30}, sink = 0.0;
    for (int round = 0; round < CX_ROUNDS; round++)
        for (int hw = 0; hw < 2; hw++) {
            const double t0 = cx_clock_mono();
            sink += hw ? gather_sum_avx512g(x, idx, CX_GM) : gather_sum_avx512(x, idx, CX_GM);
            const double t = cx_clock_mono() - t0;
            best[hw] = t < best[hw] ? t : best[hw];
        }
    /* the sums are equal (the same loads); comparing them keeps the loops from being dropped */
    return sink == sink && best[1] < best[0];
}

int cx_res_gather_hw(void)
{
    if (gather_mode < 0)
        gather_mode = cx_res_simd_lanes() == 8 ? measure_gathers() : 0;
    return gather_mode;
}

cx_idx cx_res_preact_rows(const cx_res_ws *ws, const double *x, const double *u, double *s)
{
    if (ws->rows_lanes == 8 && ws->rows_hwgather)
        preact_rows_avx512g(ws, x, u, s);
    else if (ws->rows_lanes == 8)
        preact_rows_avx512(ws, x, u, s);
    else if (ws->rows_lanes == 4)
        preact_rows_avx2(ws, x, u, s);
    else
        return 0;
    return ws->rows_full;
}

/* open_rows() for the positions past the full chunks, one at a time: node rows_node[q]'s
 * operations of cx_res_preact_node() and cx_res_stage_update(); the few tanh values take the
 * portable path of tanh.c, whose bits are the vector loops'. */
static void open_tail(const cx_res_ws *ws, const cx_reservoir *res, int stage, const double *x,
                      const double *u, double c0, double *acc, double *r, double *xout)
{
    const cx_idx n = ws->n, q0 = ws->rows_full;
    const cx_csr *m = res->m;
    double t[8];
    for (cx_idx q = q0; q < n; q++)
        t[q - q0] = cx_res_preact_node(ws, m, x, ws->rows_pos, u, ws->rows_node[q]);
    cx_res_tanh(res->tanh_mode, t, n - q0);
    cx_res_stage_update(res, n - q0, stage, x + q0, t, c0, acc != NULL ? acc + q0 : NULL, r + q0,
                        xout + q0);
}

static void open_stage(const cx_res_ws *ws, const cx_reservoir *res, int stage, const double *x,
                       const double *u, double c0, double *acc, double *r, double *xout)
{
    if (ws->rows_lanes == 8 && ws->rows_hwgather)
        open_rows_avx512g(ws, res, stage, x, u, c0, acc, r, xout);
    else if (ws->rows_lanes == 8)
        open_rows_avx512(ws, res, stage, x, u, c0, acc, r, xout);
    else
        open_rows_avx2(ws, res, stage, x, u, c0, acc, r, xout);
    open_tail(ws, res, stage, x, u, c0, acc, r, xout);
}

int cx_res_open_rows_ok(const cx_res_ws *ws, const cx_reservoir *res)
{
    return ws->rows_lanes >= 4 && res->tanh_mode == CX_TANH_EXPM1;
}

void cx_res_open_step_rows(cx_res_ws *ws, const cx_reservoir *res, double dt, const double *u0,
                           const double *uh, const double *u1, double *p)
{
    if (res->model == CX_MODEL_DISCRETE) {
        open_stage(ws, res, 0, p, u0, 0.0, NULL, NULL, ws->xa);
        memcpy(p, ws->xa, (size_t)ws->n * sizeof *p);
        return;
    }
    const double h2 = 0.5 * dt, h6 = dt / 6.0;
    open_stage(ws, res, 1, p, u0, h2, ws->acc, p, ws->xa);
    open_stage(ws, res, 2, ws->xa, uh, h2, ws->acc, p, ws->xb);
    open_stage(ws, res, 3, ws->xb, uh, dt, ws->acc, p, ws->xa);
    open_stage(ws, res, 4, ws->xa, u1, h6, ws->acc, p, p);
}

#else

int cx_res_gather_force(int mode)
{
    (void)mode;
    return 0;
}

int cx_res_gather_hw(void)
{
    return 0;
}

cx_idx cx_res_preact_rows(const cx_res_ws *ws, const double *x, const double *u, double *s)
{
    (void)ws, (void)x, (void)u, (void)s;
    return 0;
}

int cx_res_open_rows_ok(const cx_res_ws *ws, const cx_reservoir *res)
{
    (void)ws, (void)res;
    return 0;
}

void cx_res_open_step_rows(cx_res_ws *ws, const cx_reservoir *res, double dt, const double *u0,
                           const double *uh, const double *u1, double *p)
{
    (void)ws, (void)res, (void)dt, (void)u0, (void)uh, (void)u1, (void)p;
}

#endif

void cx_res_rows_gather(const cx_res_ws *ws, const double *r, double *p)
{
    for (cx_idx q = 0; q < ws->n; q++)
        p[q] = r[ws->rows_node[q]];
}

void cx_res_rows_scatter(const cx_res_ws *ws, const double *p, double *r)
{
    for (cx_idx q = 0; q < ws->n; q++)
        r[ws->rows_node[q]] = p[q];
}
