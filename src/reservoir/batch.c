/* coexist: several closed-loop runs of one reservoir advanced together.
 *
 * The runs of a cell share M, W_in and b, and differ in their start states; runs of several cells
 * of one block group (along a blend, spectral-radius, overlap or washout axis, say) differ in
 * W_out, bound box, early-stop test and the scaling of M as well, so every run carries its own
 * readout, limits and values of M. B of them are stored as one n x B row-major block X (X[i B + c]
 * = node i of run c) and every RK4 stage (Lu, Hunt & Ott 2018, Chaos 28, 061104; see model.c for
 * the stage equations) is one sparse-times-block product: each stored entry M_ij is read once and
 * applied to the B values of node j, which sit side by side; tanh runs over the whole block
 * (tanh.c); the readout W_out q(x) of the B runs is B independent sums, each with its run's W_out.
 * The arithmetic of each run is, operation for operation, that of the single-run kernels (model.c,
 * probe.c): pre-activation b_i + input, then the entries of row i in storage order; the same stage
 * update; the readout summed node by node, linear term then square. So a run's outputs, end state
 * and stop step are bit-identical to cx_res_probe_settle's whatever B and whichever runs share the
 * block. Runs never interact: a column is only ever combined with itself. A run that leaves the
 * bound box or settles drops out and the block is compacted, so stopped runs cost nothing. Where
 * the runs have their own values of M, they are laid out column by column like the block (ws->bval)
 * and every kernel loads them per run instead of broadcasting one: the same product as the run's
 * own scaled M gives.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "reservoir/reservoir_impl.h"

/* Columns allocated for a batch of nb runs: room for the fused kernel's padding to a multiple
 * of its vector width, 4 or 8 (fused.c). */
static int padded(int nb)
{
    return (nb + 7) / 8 * 8;
}

int cx_res_batch_runs(int tanh_mode)
{
    /* the fused kernel's widest block: two vectors; the generic kernel unrolls up to 8 */
    const cx_reservoir probe = {.tanh_mode = tanh_mode};
    return cx_res_fused_lanes(&probe) == 8 ? 16 : 8;
}

int cx_res_ws_set_batch(cx_res_ws *ws, int nb)
{
    int rc = CX_OK;
    double *blk[7] = {NULL, NULL, NULL, NULL, NULL, NULL, NULL};
    CX_REQUIRE(ws != NULL && nb >= 1 && nb <= CX_MAX_RUNS, CX_ERR_INVALID,
               "batch of %d runs outside 1..%d", nb, CX_MAX_RUNS);
    if (nb <= ws->batch_cap)
        return CX_OK;
    const cx_idx w = padded(nb);
    for (int k = 0; k < 6; k++)
        CX_CALLOC(blk[k], ws->n * w);
    /* packed readouts: n x 2 x dim x w, and the constants dim x w */
    CX_CALLOC(blk[6], (2 * ws->n + 1) * ws->dim * w);
    free(ws->bx);
    free(ws->bprev);
    free(ws->bxa);
    free(ws->bxb);
    free(ws->bacc);
    free(ws->bpre);
    free(ws->bpack);
    ws->bx = blk[0];
    ws->bprev = blk[1];
    ws->bxa = blk[2];
    ws->bxb = blk[3];
    ws->bacc = blk[4];
    ws->bpre = blk[5];
    ws->bpack = blk[6];
    ws->batch_cap = nb;
    for (int k = 0; k < 7; k++)
        blk[k] = NULL;
done:
    for (int k = 6; k >= 0; k--)
        free(blk[k]);
    return rc;
}

/* The kernels below take the block width nb as a constant: stage_block() calls them through a
 * switch on nb = 1..8 so that the compiler unrolls the loops over the runs (an inner loop of
 * unknown length 2 cost more than the arithmetic). */
#define CX_INLINE static inline __attribute__((always_inline))

/* Pre-activations of node i for the B runs into s (n x B): per run exactly preact() of
 * model.c. */
CX_INLINE void preact_node_block(const cx_res_ws *restrict ws, const cx_csr *restrict m,
                                 const int nb, const double *restrict x, const double *restrict u,
                                 cx_idx i, double *restrict s)
{
    const int dim = ws->dim;
    double si[CX_MAX_RUNS];
    const double bi = ws->bias[i];
    if (ws->onehot) {
        const double w = ws->inw[i];
        const cx_idx j = ws->incol[i];
        for (int c = 0; c < nb; c++)
            si[c] = bi + w * u[c * dim + j];
    } else {
        const double *w = ws->win + i * dim;
        for (int c = 0; c < nb; c++) {
            double v = bi;
            for (int j = 0; j < dim; j++)
                v += w[j] * u[c * dim + j];
            si[c] = v;
        }
    }
    if (ws->bval != NULL) {
        /* each column with its own values of M (cells of several spectral radii) */
        for (cx_idx p = m->rowptr[i]; p < m->rowptr[i + 1]; p++) {
            const double *restrict v = ws->bval + p * nb;
            const double *restrict xj = x + m->col[p] * nb;
            for (int c = 0; c < nb; c++)
                si[c] += v[c] * xj[c];
        }
    } else {
        for (cx_idx p = m->rowptr[i]; p < m->rowptr[i + 1]; p++) {
            const double v = m->val[p];
            const double *restrict xj = x + m->col[p] * nb;
            for (int c = 0; c < nb; c++)
                si[c] += v * xj[c];
        }
    }
    for (int c = 0; c < nb; c++)
        s[i * nb + c] = si[c];
}

/* Pre-activations of the B runs into s (n x B). For one run the vector pass over the nodes
 * (rows.c) takes the full chunks of the row layout and this loop the rest; for two it measured
 * slower than this loop, whose two runs per node overlap (tools/bench.c: 3.1 against 2.8 ns per
 * node per stage per run at N = 1000). */
CX_INLINE void preact_block(const cx_res_ws *restrict ws, const cx_csr *restrict m, const int nb,
                            const double *restrict x, const double *restrict u, double *restrict s)
{
    const cx_idx q0 = nb == 1 ? cx_res_preact_rows(ws, x, u, s) : 0;
    if (q0 == 0) {
        for (cx_idx i = 0; i < ws->n; i++)
            preact_node_block(ws, m, nb, x, u, i, s);
        return;
    }
    for (cx_idx q = q0; q < ws->n; q++)
        preact_node_block(ws, m, nb, x, u, ws->rows_node[q], s);
}

/* W_out q(x) of the B runs, run c with its own w_out[c], node by node, linear term then square:
 * readout_add() of model.c. y: nb x dim. */
CX_INLINE void readout_block(const double *const *w_out, cx_idx n, const int dim, int features,
                             const int nb, const double *restrict x, double *restrict y)
{
    double acc[CX_MAX_RUNS * CX_MAX_DIM];
    for (int q = 0; q < nb * dim; q++)
        acc[q] = 0.0;
    if (features == CX_FEAT_LINEAR) {
        for (cx_idx i = 0; i < n; i++)
            for (int c = 0; c < nb; c++) {
                const double *wl = w_out[c] + i * dim;
                for (int j = 0; j < dim; j++)
                    acc[c * dim + j] += wl[j] * x[i * nb + c];
            }
    } else {
        for (cx_idx i = 0; i < n; i++) {
            for (int c = 0; c < nb; c++) {
                const double *wl = w_out[c] + i * dim;
                const double *wq = w_out[c] + (n + i) * dim;
                const double v = x[i * nb + c];
                const double v2 = v * v;
                for (int j = 0; j < dim; j++)
                    acc[c * dim + j] += wl[j] * v + wq[j] * v2;
            }
        }
    }
    for (int q = 0; q < nb * dim; q++)
        y[q] = acc[q];
}

#define CX_FOR_WIDTHS(CALL)                                                                        \
    switch (nb) {                                                                                  \
    case 1:                                                                                        \
        CALL(1);                                                                                   \
        break;                                                                                     \
    case 2:                                                                                        \
        CALL(2);                                                                                   \
        break;                                                                                     \
    case 3:                                                                                        \
        CALL(3);                                                                                   \
        break;                                                                                     \
    case 4:                                                                                        \
        CALL(4);                                                                                   \
        break;                                                                                     \
    case 5:                                                                                        \
        CALL(5);                                                                                   \
        break;                                                                                     \
    case 6:                                                                                        \
        CALL(6);                                                                                   \
        break;                                                                                     \
    case 7:                                                                                        \
        CALL(7);                                                                                   \
        break;                                                                                     \
    case 8:                                                                                        \
        CALL(8);                                                                                   \
        break;                                                                                     \
    default:                                                                                       \
        CALL(nb);                                                                                  \
    }

/* One RK4 stage (or the leaky map, stage 0) of the block: rk4_stage()/map_pass() of model.c for
 * every column. u, y: nb x dim. */
static void stage_block(const cx_res_ws *restrict ws, const cx_reservoir *restrict res, int nb,
                        int stage, const double *restrict x, const double *restrict u, double c0,
                        double *restrict acc, double *r, double *xout, const double *const *w_out,
                        double *restrict y)
{
    const cx_idx n = ws->n;
    const int dim = ws->dim;
    const int features = ws->features;
    double *restrict s = ws->bpre;
#define CX_PRE(w) preact_block(ws, res->m, w, x, u, s)
    CX_FOR_WIDTHS(CX_PRE)
#undef CX_PRE
    cx_res_tanh(res->tanh_mode, s, n * nb);
    cx_res_stage_update(res, n * nb, stage, x, s, c0, acc, r, xout);
#define CX_READ(w)                                                                                 \
    do {                                                                                           \
        if (dim == 2)                                                                              \
            readout_block(w_out, n, 2, features, w, xout, y);                                      \
        else                                                                                       \
            readout_block(w_out, n, dim, features, w, xout, y);                                    \
    } while (0)
    CX_FOR_WIDTHS(CX_READ)
#undef CX_READ
    if (features == CX_FEAT_LINEAR_SQUARES_CONSTANT)
        for (int c = 0; c < nb; c++)
            for (int j = 0; j < dim; j++)
                y[c * dim + j] += w_out[c][2 * n * dim + j];
}

/* The fused kernel's packed readouts of a block w columns wide, and their constants. */
static double *pconst_of(const cx_res_ws *ws, int w)
{
    return ws->bpack + 2 * ws->n * ws->dim * w;
}

/* One closed-loop step of the block: cx_res_closed_step() for every column. With lanes > 0 the
 * fused kernel at that vector width takes it (fused.c): the block is nb = lanes or 2 lanes
 * columns wide and the readouts are packed in ws->bpack. With keep_prev the new state is written
 * into ws->bprev's buffer and the two swapped, so that ws->bprev holds the state before the step
 * without a copy (the early-stop test compares the two). */
static void closed_step_block(cx_res_ws *ws, const cx_reservoir *res, const double *const *w_out,
                              double dt, int nb, int lanes, int keep_prev, double *y)
{
    double ys[CX_MAX_RUNS * CX_MAX_DIM], yt[CX_MAX_RUNS * CX_MAX_DIM];
    double *r = ws->bx;
    const double *pack = ws->bpack, *pconst = pconst_of(ws, nb);
#define CX_STAGE(st, x, u, c0, acc, rr, xout, yout)                                                \
    do {                                                                                           \
        if (lanes)                                                                                 \
            cx_res_stage_fused(ws, res, lanes, nb, st, x, u, c0, acc, rr, xout, pack, pconst,      \
                               yout);                                                              \
        else                                                                                       \
            stage_block(ws, res, nb, st, x, u, c0, acc, rr, xout, w_out, yout);                    \
    } while (0)
    if (res->model == CX_MODEL_DISCRETE) {
        CX_STAGE(0, r, y, 0.0, NULL, NULL, ws->bxa, ys);
        memcpy(y, ys, (size_t)(nb * ws->dim) * sizeof *y);
        if (keep_prev) {
            double *old = ws->bprev;
            ws->bprev = ws->bx;
            ws->bx = ws->bxa;
            ws->bxa = old;
        } else {
            memcpy(r, ws->bxa, (size_t)(ws->n * nb) * sizeof *r);
        }
        return;
    }
    const double h2 = 0.5 * dt, h6 = dt / 6.0;
    CX_STAGE(1, r, y, h2, ws->bacc, r, ws->bxa, ys);
    CX_STAGE(2, ws->bxa, ys, h2, ws->bacc, r, ws->bxb, yt);
    CX_STAGE(3, ws->bxb, yt, dt, ws->bacc, r, ws->bxa, ys);
    CX_STAGE(4, ws->bxa, ys, h6, ws->bacc, r, keep_prev ? ws->bprev : r, y);
#undef CX_STAGE
    if (keep_prev) {
        double *fresh = ws->bprev;
        ws->bprev = ws->bx;
        ws->bx = fresh;
    }
}

/* Keep the columns c < nb_old with keep[c] != 0 of an n x w_old block and lay them out w_new
 * wide (w_new <= w_old), the columns past the kept ones filled with copies of the first kept
 * column (the fused kernel's padding: computed, never reported). Row by row through a copy of
 * the row, so the shrinking layout never overwrites a value still to be read. */
static void relayout(double *blk, cx_idx n, int w_old, int nb_old, const int *keep, int w_new)
{
    double row[CX_MAX_RUNS + 8];
    for (cx_idx i = 0; i < n; i++) {
        memcpy(row, blk + i * w_old, (size_t)w_old * sizeof *row);
        int to = 0;
        for (int c = 0; c < nb_old; c++)
            if (keep[c])
                blk[i * w_new + to++] = row[c];
        for (int c = to; c < w_new; c++)
            blk[i * w_new + c] = blk[i * w_new];
    }
}

/* The kernel for nb live runs: the vector width of the fused kernel (4 or 8, at most `most`),
 * or 0 for the generic one, and the block's width *w: nb padded to one or two vectors for the
 * fused kernel, else nb. Measured (tools/bench.c): for one or two runs the padding costs more
 * than the fused kernel saves (about 1.4x slower for one run, even for two); up to four runs
 * take one AVX2 vector; two runs take the pair kernel (w = 2, fused.c). */
static int block_kernel(int most, int nb, int *w)
{
    int lanes = 0;
    if (most >= 4 && nb == 2) {
        *w = 2;
        return most;
    }
    if (most >= 4 && nb >= 3)
        lanes = most == 8 && nb > 4 ? 8 : 4;
    if (lanes && nb > 2 * lanes)
        lanes = 0; /* wider than the kernel takes */
    *w = lanes ? (nb + lanes - 1) / lanes * lanes : nb;
    return lanes;
}

/* The values of M the block's w columns run with: when the nb live columns share one array, the
 * view mv takes it (and the one-run row layout is rebuilt if it changed: rows_for is the array
 * it was built from) and ws->bval is NULL; else ws->bval holds every column's values, the
 * padding columns those of column 0. */
static int block_values(cx_res_ws *ws, cx_reservoir *rv, cx_csr *mv, const double *const *vcol,
                        int nb, int w, const double **rows_for)
{
    int rc = CX_OK;
    int mixed = 0;
    for (int c = 1; c < nb; c++)
        mixed |= vcol[c] != vcol[0];
    mv->val = (double *)vcol[0]; /* read only: the kernels never write M */
    ws->bval = NULL;
    if (!mixed) {
        if (*rows_for != vcol[0]) {
            CX_TRY(cx_res_rows_build(ws, rv));
            *rows_for = vcol[0];
        }
        return CX_OK;
    }
    const cx_idx nnz = mv->nnz;
    CX_RESERVE(ws->bval_buf, ws->bval_cap, nnz * w);
    for (cx_idx p = 0; p < nnz; p++)
        for (int c = 0; c < w; c++)
            ws->bval_buf[p * w + c] = vcol[c < nb ? c : 0][p];
    ws->bval = ws->bval_buf;
done:
    return rc;
}

int cx_res_probe_batch(cx_res_ws *ws, const cx_reservoir *res, const double *const *w_out,
                       const double *const *m_val, double dt, cx_idx nsteps,
                       const cx_res_limits *const *lim, int nruns, double *const *r,
                       double *const *y_out, cx_idx *steps_done, cx_idx *settled_at)
{
    int rc = CX_OK;
    const double *rows_for = NULL; /* the values of M the one-run row layout was built from */
    CX_TRY(cx_res_meet(ws, res));
    rows_for = res->m->val;
    CX_REQUIRE(w_out != NULL && r != NULL && steps_done != NULL && settled_at != NULL &&
                   nsteps >= 0,
               CX_ERR_INVALID, "batch probe: NULL argument or %lld steps", (long long)nsteps);
    CX_REQUIRE(nruns >= 1 && nruns <= ws->batch_cap, CX_ERR_INVALID,
               "batch probe: %d runs, the workspace holds %d (cx_res_ws_set_batch)", nruns,
               ws->batch_cap);
    CX_REQUIRE(res->model == CX_MODEL_DISCRETE || dt > 0.0, CX_ERR_INVALID,
               "batch probe: time step %g", dt);
    /* the limits of each run (none: a box without sides and no early stop) */
    static const cx_res_limits none = {NULL, NULL, {0, 0.0, 0.0}};
    const cx_res_limits *lr[CX_MAX_RUNS];
    int any_settle = 0;
    for (int b = 0; b < nruns; b++) {
        lr[b] = lim != NULL && lim[b] != NULL ? lim[b] : &none;
        const cx_res_settle *st = &lr[b]->settle;
        CX_REQUIRE(st->window >= 0 && st->state_step >= 0.0 && st->output_step >= 0.0,
                   CX_ERR_INVALID, "batch probe: run %d: negative early-stop window or tolerance",
                   b);
        any_settle |= st->window > 0;
    }
    const cx_idx n = ws->n;
    const int dim = ws->dim;
    const int most = cx_res_fused_lanes(res);
    /* the block runs on a view of res whose M takes the values of its runs (block_values) */
    cx_csr mv = *res->m;
    cx_reservoir rv = *res;
    rv.m = &mv;
    int run[CX_MAX_RUNS + 8], keep[CX_MAX_RUNS + 8];
    const double *wcol[CX_MAX_RUNS + 8]; /* the readout of each column of the block */
    const double *vcol[CX_MAX_RUNS + 8]; /* the values of M of each column */
    cx_idx still[CX_MAX_RUNS];
    double y[(CX_MAX_RUNS + 8) * CX_MAX_DIM], yprev[CX_MAX_RUNS * CX_MAX_DIM];
    int nb = 0;
    for (int b = 0; b < nruns; b++) {
        double yb[CX_MAX_DIM];
        settled_at[b] = -1;
        steps_done[b] = 0;
        CX_REQUIRE(w_out[b] != NULL, CX_ERR_INVALID, "batch probe: run %d has no readout", b);
        cx_res_readout(res, w_out[b], r[b], yb);
        if (y_out != NULL && y_out[b] != NULL)
            memcpy(y_out[b], yb, (size_t)dim * sizeof *yb);
        if (cx_res_outside(yb, dim, lr[b]->lo, lr[b]->hi))
            continue;
        run[nb] = b;
        wcol[nb] = w_out[b];
        vcol[nb] = m_val != NULL && m_val[b] != NULL ? m_val[b] : res->m->val;
        still[nb] = 0;
        memcpy(y + nb * dim, yb, (size_t)dim * sizeof *yb);
        memcpy(yprev + nb * dim, yb, (size_t)dim * sizeof *yb);
        nb++;
    }
    /* w: the block's width, nb live columns then copies of column 0 */
    int w = 0;
    int lanes = nb > 0 ? block_kernel(most, nb, &w) : 0;
    for (int c = 0; c < w; c++) {
        const int from = c < nb ? c : 0;
        for (cx_idx i = 0; i < n; i++)
            ws->bx[i * w + c] = ws->bprev[i * w + c] = r[run[from]][i];
        if (c >= nb) {
            wcol[c] = wcol[0];
            memcpy(y + c * dim, y, (size_t)dim * sizeof *y);
        }
    }
    if (lanes)
        cx_res_pack_readouts(n, dim, ws->features, w, wcol, ws->bpack, pconst_of(ws, w));
    if (nb > 0)
        CX_TRY(block_values(ws, &rv, &mv, vcol, nb, w, &rows_for));
    for (cx_idx i = 1; i <= nsteps && nb > 0; i++) {
        closed_step_block(ws, &rv, wcol, dt, w, lanes, any_settle, y);
        int stopped = 0;
        for (int c = 0; c < nb; c++) {
            const int b = run[c];
            const double *yc = y + c * dim;
            const cx_res_settle *settle = &lr[b]->settle;
            keep[c] = 1;
            if (y_out != NULL && y_out[b] != NULL)
                memcpy(y_out[b] + i * dim, yc, (size_t)dim * sizeof *yc);
            if (cx_res_outside(yc, dim, lr[b]->lo, lr[b]->hi)) {
                steps_done[b] = i;
                keep[c] = 0;
            } else if (settle->window > 0) {
                /* ws->bprev holds the state before the step (closed_step_block); the state test
                 * is needed only when the outputs stood still */
                double dr = 0.0, dy = 0.0;
                for (int j = 0; j < dim; j++) {
                    const double e = fabs(yc[j] - yprev[c * dim + j]);
                    dy = e > dy ? e : dy;
                    yprev[c * dim + j] = yc[j];
                }
                if (dy <= settle->output_step)
                    for (cx_idx k = 0; k < n; k++) {
                        const double e = fabs(ws->bx[k * w + c] - ws->bprev[k * w + c]);
                        dr = e > dr ? e : dr;
                    }
                still[c] = dr <= settle->state_step && dy <= settle->output_step ? still[c] + 1 : 0;
                if (still[c] >= settle->window && i < nsteps) {
                    settled_at[b] = i;
                    if (y_out != NULL && y_out[b] != NULL)
                        for (cx_idx k = i + 1; k <= nsteps; k++)
                            memcpy(y_out[b] + k * dim, yc, (size_t)dim * sizeof *yc);
                    steps_done[b] = nsteps;
                    keep[c] = 0;
                }
            }
            if (i == nsteps && keep[c])
                steps_done[b] = nsteps;
            if (!keep[c]) {
                for (cx_idx k = 0; k < n; k++)
                    r[b][k] = ws->bx[k * w + c];
                stopped++;
            }
        }
        if (stopped > 0 && stopped < nb) {
            const int nb_new = nb - stopped;
            int w_new = 0;
            lanes = block_kernel(most, nb_new, &w_new);
            relayout(ws->bx, n, w, nb, keep, w_new);
            relayout(ws->bprev, n, w, nb, keep, w_new);
            int to = 0;
            for (int c = 0; c < nb; c++) {
                if (!keep[c])
                    continue;
                run[to] = run[c];
                wcol[to] = wcol[c];
                vcol[to] = vcol[c];
                still[to] = still[c];
                memcpy(y + to * dim, y + c * dim, (size_t)dim * sizeof *y);
                memcpy(yprev + to * dim, yprev + c * dim, (size_t)dim * sizeof *y);
                to++;
            }
            for (int c = nb_new; c < w_new; c++) {
                wcol[c] = wcol[0];
                memcpy(y + c * dim, y, (size_t)dim * sizeof *y);
            }
            nb = nb_new;
            w = w_new;
            if (lanes)
                cx_res_pack_readouts(n, dim, ws->features, w, wcol, ws->bpack, pconst_of(ws, w));
            CX_TRY(block_values(ws, &rv, &mv, vcol, nb, w, &rows_for));
        } else if (stopped == nb) {
            nb = 0;
        }
    }
    for (int c = 0; c < nb; c++) {
        steps_done[run[c]] = nsteps;
        for (cx_idx k = 0; k < n; k++)
            r[run[c]][k] = ws->bx[k * w + c];
    }
done:
    ws->bval = NULL;
    /* the row layout back on res's own values, as cx_res_meet left it */
    if (rows_for != NULL && rows_for != res->m->val) {
        const int rrc = cx_res_rows_build(ws, res);
        rc = rc == CX_OK ? rrc : rc;
    }
    return rc;
}
