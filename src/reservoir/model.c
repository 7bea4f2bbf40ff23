/* coexist: the reservoir models, their workspace, the feature map and the readout.
 *
 * Continuous time (Lu, Hunt & Ott 2018, Chaos 28, 061104):
 *     dr/dt = f(r; u) = gamma (-r + tanh(M r + sigma W_in u + b)),
 * advanced by the classical fourth-order Runge-Kutta method (Kutta 1901, Z. Math. Phys. 46, 435;
 * Hairer, Norsett & Wanner 1993, Solving ODEs I, table II.1.1):
 *     k1 = f(r; u_n), k2 = f(r + h/2 k1; u_{n+1/2}), k3 = f(r + h/2 k2; u_{n+1/2}),
 *     k4 = f(r + h k3; u_{n+1}),  r <- r + h/6 (k1 + 2 k2 + 2 k3 + k4).
 * Discrete leaky echo state network (Jaeger 2001, GMD Report 148; Jaeger, Lukosevicius, Popovici
 * & Siewert 2007, Neural Netw. 20, 335):
 *     r <- (1 - a) r + a tanh(M r + sigma W_in u + b).
 * Closed loop (Jaeger 2001; Lu, Hunt & Ott 2018): u = W_out q(x) is recomputed at every state the
 * right-hand side is evaluated at, including the RK4 stage states. W_in W_out is never formed: it
 * would be an n x n dense matrix, while the product through q costs O(n dim).
 *
 * Each right-hand side evaluation makes passes over the nodes: the pre-activations
 * s_i = b_i + (sigma W_in u)_i + sum_j M_ij x_j into one buffer, tanh of the whole buffer (so that
 * a SIMD tanh can run over it, see tanh.c), the elementwise stage update, and in the closed loop
 * the readout of the new stage state. The buffers are n doubles each and stay in the first cache
 * levels for the usual n (8 kB at n = 1000); the arithmetic of each node is the same as in one
 * fused pass, so the split changes no bits.
 */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "reservoir/reservoir_impl.h"

/* Default number of feature vectors buffered before one rank-B update of the Gram sums. Measured
 * with OpenBLAS 0.3.21 on one core at 2N = 2000 features: dsyrk ran at about 33 GFLOP/s with
 * B = 192 and 43 GFLOP/s with B = 512 (the dgemm peak of the same core is about 42), so 512; the
 * block is 2N x B doubles (8 MB at N = 1000). */
#define CX_RES_DEFAULT_BLOCK 512

cx_idx cx_features_count(int features, cx_idx n)
{
    switch (features) {
    case CX_FEAT_LINEAR_SQUARES:
        return 2 * n;
    case CX_FEAT_LINEAR:
        return n;
    case CX_FEAT_LINEAR_SQUARES_CONSTANT:
        return 2 * n + 1;
    default:
        return -1;
    }
}

static int alloc_block(cx_res_ws *ws, cx_idx block)
{
    int rc = CX_OK;
    double *q = NULL, *u = NULL;
    CX_ALLOC(q, ws->nfeat * block);
    CX_ALLOC(u, (cx_idx)ws->dim * block);
    free(ws->qblk);
    free(ws->ublk);
    ws->qblk = q;
    ws->ublk = u;
    ws->block = block;
    q = NULL;
    u = NULL;
done:
    free(u);
    free(q);
    return rc;
}

int cx_res_ws_alloc(cx_res_ws **out, cx_idx n, int dim, int features)
{
    int rc = CX_OK;
    cx_res_ws *ws = NULL;
    CX_REQUIRE(out != NULL, CX_ERR_INVALID, "reservoir workspace: no output pointer");
    *out = NULL;
    CX_REQUIRE(n >= 1, CX_ERR_INVALID, "reservoir workspace: %lld nodes", (long long)n);
    CX_REQUIRE(dim >= 1 && dim <= CX_MAX_DIM, CX_ERR_INVALID,
               "reservoir workspace: signal dimension %d outside 1..%d", dim, CX_MAX_DIM);
    CX_REQUIRE(cx_features_count(features, n) > 0, CX_ERR_INVALID,
               "reservoir workspace: unknown feature map %d", features);
    CX_REQUIRE(n <= INT32_MAX / 4, CX_ERR_INVALID, "reservoir workspace: %lld nodes is too many",
               (long long)n);
    CX_CALLOC(ws, 1);
    ws->n = n;
    ws->dim = dim;
    ws->features = features;
    ws->nfeat = cx_features_count(features, n);
    CX_CALLOC(ws->xa, n);
    CX_CALLOC(ws->xb, n);
    CX_CALLOC(ws->acc, n);
    CX_CALLOC(ws->r2, n);
    CX_CALLOC(ws->pre, n);
    CX_CALLOC(ws->rprev, n);
    CX_CALLOC(ws->bias, n);
    CX_CALLOC(ws->win, n * dim);
    CX_CALLOC(ws->inw, n);
    CX_CALLOC(ws->incol, n);
    CX_TRY(alloc_block(ws, CX_RES_DEFAULT_BLOCK));
    *out = ws;
    ws = NULL;
done:
    cx_res_ws_free(&ws);
    return rc;
}

void cx_res_ws_free(cx_res_ws **pws)
{
    if (pws == NULL || *pws == NULL)
        return;
    cx_res_ws *ws = *pws;
    free(ws->rows_x);
    free(ws->rows_pcol);
    free(ws->rows_pos);
    free(ws->rows_val);
    free(ws->rows_col);
    free(ws->rows_win);
    free(ws->rows_inw);
    free(ws->rows_bias);
    free(ws->rows_off);
    free(ws->rows_incol);
    free(ws->rows_len);
    free(ws->rows_node);
    free(ws->bpack);
    free(ws->bval_buf);
    free(ws->bpre);
    free(ws->bacc);
    free(ws->bxb);
    free(ws->bxa);
    free(ws->bprev);
    free(ws->bx);
    free(ws->ublk);
    free(ws->qblk);
    free(ws->incol);
    free(ws->inw);
    free(ws->win);
    free(ws->bias);
    free(ws->rprev);
    free(ws->pre);
    free(ws->r2);
    free(ws->acc);
    free(ws->xb);
    free(ws->xa);
    free(ws);
    *pws = NULL;
}

int cx_res_ws_set_block(cx_res_ws *ws, cx_idx block)
{
    int rc = CX_OK;
    CX_REQUIRE(ws != NULL, CX_ERR_INVALID, "reservoir workspace: NULL");
    CX_REQUIRE(block >= 1 && block <= 65536, CX_ERR_INVALID,
               "Gram block size %lld outside 1..65536", (long long)block);
    if (block != ws->block)
        CX_TRY(alloc_block(ws, block));
done:
    return rc;
}

int cx_res_meet(cx_res_ws *ws, const cx_reservoir *res)
{
    int rc = CX_OK;
    CX_REQUIRE(ws != NULL && res != NULL, CX_ERR_INVALID, "reservoir: NULL workspace or model");
    CX_REQUIRE(res->n == ws->n && res->dim == ws->dim && res->features == ws->features,
               CX_ERR_INVALID,
               "reservoir (n %lld, dim %d, features %d) does not fit its workspace (n %lld, dim "
               "%d, features %d)",
               (long long)res->n, res->dim, res->features, (long long)ws->n, ws->dim, ws->features);
    CX_REQUIRE(res->m != NULL && res->m->n == res->n && res->w_in != NULL, CX_ERR_INVALID,
               "reservoir: missing or mis-sized M or W_in");
    CX_REQUIRE(res->model == CX_MODEL_CONTINUOUS || res->model == CX_MODEL_DISCRETE, CX_ERR_INVALID,
               "reservoir: unknown model %d", res->model);
    const cx_idx n = ws->n;
    const int dim = ws->dim;
    const double sigma = res->input_scaling;
    int onehot = 1;
    for (cx_idx i = 0; i < n; i++) {
        int nz = 0;
        cx_idx col = 0;
        for (int j = 0; j < dim; j++) {
            double w = res->w_in[i * dim + j];
            ws->win[i * dim + j] = sigma * w;
            if (w != 0.0) {
                nz++;
                col = j;
            }
        }
        if (nz > 1)
            onehot = 0;
        ws->incol[i] = col;
        ws->inw[i] = sigma * res->w_in[i * dim + col];
        ws->bias[i] = res->bias != NULL ? res->bias[i] : 0.0;
    }
    ws->onehot = onehot;
    CX_TRY(cx_res_rows_build(ws, res));
done:
    return rc;
}

void cx_res_features_of(const cx_res_ws *ws, const double *restrict r, double *restrict q)
{
    const cx_idx n = ws->n;
    for (cx_idx i = 0; i < n; i++)
        q[i] = r[i];
    if (ws->features == CX_FEAT_LINEAR)
        return;
    for (cx_idx i = 0; i < n; i++)
        q[n + i] = r[i] * r[i];
    if (ws->features == CX_FEAT_LINEAR_SQUARES_CONSTANT)
        q[2 * n] = 1.0;
}

/* Pre-activation of node i at state x under input u. */
static inline double preact(const cx_res_ws *restrict ws, const cx_csr *restrict m,
                            const double *restrict x, const double *restrict u, cx_idx i)
{
    return cx_res_preact_node(ws, m, x, NULL, u, i);
}

/* The pre-activations of all nodes into s: the vector pass over the chunks of the row layout
 * (rows.c, the same bits), the scalar one over the rest. */
static void preact_pass(const cx_res_ws *restrict ws, const cx_csr *restrict m,
                        const double *restrict x, const double *restrict u, double *restrict s)
{
    const cx_idx q0 = cx_res_preact_rows(ws, x, u, s);
    if (q0 == 0) {
        for (cx_idx i = 0; i < ws->n; i++)
            s[i] = preact(ws, m, x, u, i);
        return;
    }
    for (cx_idx q = q0; q < ws->n; q++)
        s[ws->rows_node[q]] = preact(ws, m, x, u, ws->rows_node[q]);
}

/* Add node i's share of W_out q(x) to y, x_i = v. The order (node by node, linear term then
 * square) is the one cx_res_readout uses, so that both give the same bits. */
static inline void readout_add(const double *restrict w_out, cx_idx n, int dim, int features,
                               cx_idx i, double v, double *restrict y)
{
    const double *wl = w_out + i * dim;
    if (features == CX_FEAT_LINEAR) {
        for (int j = 0; j < dim; j++)
            y[j] += wl[j] * v;
    } else {
        const double *wq = w_out + (n + i) * dim;
        const double v2 = v * v;
        for (int j = 0; j < dim; j++)
            y[j] += wl[j] * v + wq[j] * v2;
    }
}

static inline void readout_finish(const double *restrict w_out, cx_idx n, int dim, int features,
                                  double *restrict y)
{
    if (features == CX_FEAT_LINEAR_SQUARES_CONSTANT)
        for (int j = 0; j < dim; j++)
            y[j] += w_out[2 * n * dim + j];
}

/* W_out q(x) into y, node by node. The loop is instantiated for dim = 2 apart (the usual task
 * dimension) so that the compiler can keep the sums in registers; the order of the operations is
 * the same for every dim. */
static void readout_pass(const double *restrict w_out, cx_idx n, int dim, int features,
                         const double *restrict x, double *restrict y)
{
    double acc[CX_MAX_DIM] = {0};
    if (dim == 2) {
        for (cx_idx i = 0; i < n; i++)
            readout_add(w_out, n, 2, features, i, x[i], acc);
    } else {
        for (cx_idx i = 0; i < n; i++)
            readout_add(w_out, n, dim, features, i, x[i], acc);
    }
    readout_finish(w_out, n, dim, features, acc);
    for (int j = 0; j < dim; j++)
        y[j] = acc[j];
}

void cx_res_readout(const cx_reservoir *res, const double *w_out, const double *r, double *y)
{
    readout_pass(w_out, res->n, res->dim, res->features, r, y);
}

void cx_res_stage_update(const cx_reservoir *restrict res, cx_idx len, int stage,
                         const double *restrict x, const double *restrict s, double c0,
                         double *restrict acc, double *r, double *xout)
{
    if (stage == 0) {
        const double a = res->leak, keep = 1.0 - a;
        for (cx_idx o = 0; o < len; o++)
            xout[o] = keep * x[o] + a * s[o];
        return;
    }
    const double gamma = res->rate;
    if (stage == 1) {
        for (cx_idx o = 0; o < len; o++) {
            const double k = gamma * (s[o] - x[o]);
            acc[o] = k;
            xout[o] = r[o] + c0 * k;
        }
    } else if (stage < 4) {
        for (cx_idx o = 0; o < len; o++) {
            const double k = gamma * (s[o] - x[o]);
            acc[o] += 2.0 * k;
            xout[o] = r[o] + c0 * k;
        }
    } else {
        /* xout is r itself here, x a separate buffer */
        for (cx_idx o = 0; o < len; o++) {
            const double k = gamma * (s[o] - x[o]);
            xout[o] = r[o] + c0 * (acc[o] + k);
        }
    }
}

/* One RK4 stage: k = f(x; u); stage < 4 writes xout = r + c k and adds w k to acc (stage 1 sets
 * it); stage 4 finishes the step, r += c (acc + k), in place (x is then a separate buffer, so
 * the mat-vec never reads a value this pass has overwritten). With w_out, y receives
 * W_out q(xout). The update is elementwise, one loop per stage kind so that it vectorises. */
static void rk4_stage(const cx_res_ws *restrict ws, const cx_reservoir *restrict res, int stage,
                      const double *restrict x, const double *restrict u, double c,
                      double *restrict acc, double *r, double *xout, const double *restrict w_out,
                      double *restrict y)
{
    const cx_idx n = ws->n;
    const cx_csr *m = res->m;
    double *restrict s = ws->pre;
    preact_pass(ws, m, x, u, s);
    cx_res_tanh(res->tanh_mode, s, n);
    cx_res_stage_update(res, n, stage, x, s, c, acc, r, xout);
    if (w_out != NULL)
        readout_pass(w_out, n, ws->dim, ws->features, xout, y);
}

/* The leaky map into xout (never r itself: the mat-vec reads all of x). */
static void map_pass(const cx_res_ws *restrict ws, const cx_reservoir *restrict res,
                     const double *restrict x, const double *restrict u, double *restrict xout,
                     const double *restrict w_out, double *restrict y)
{
    const cx_idx n = ws->n;
    const cx_csr *m = res->m;
    double *restrict s = ws->pre;
    preact_pass(ws, m, x, u, s);
    cx_res_tanh(res->tanh_mode, s, n);
    cx_res_stage_update(res, n, 0, x, s, 0.0, NULL, NULL, xout);
    if (w_out != NULL)
        readout_pass(w_out, n, ws->dim, ws->features, xout, y);
}

void cx_res_open_step(cx_res_ws *ws, const cx_reservoir *res, double dt, const double *u0,
                      const double *uh, const double *u1, double *r)
{
    if (res->model == CX_MODEL_DISCRETE) {
        map_pass(ws, res, r, u0, ws->xa, NULL, NULL);
        memcpy(r, ws->xa, (size_t)ws->n * sizeof *r);
        return;
    }
    const double h2 = 0.5 * dt, h6 = dt / 6.0;
    rk4_stage(ws, res, 1, r, u0, h2, ws->acc, r, ws->xa, NULL, NULL);
    rk4_stage(ws, res, 2, ws->xa, uh, h2, ws->acc, r, ws->xb, NULL, NULL);
    rk4_stage(ws, res, 3, ws->xb, uh, dt, ws->acc, r, ws->xa, NULL, NULL);
    rk4_stage(ws, res, 4, ws->xa, u1, h6, ws->acc, r, r, NULL, NULL);
}

void cx_res_closed_step(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                        double *r, double *y)
{
    double ys[CX_MAX_DIM];
    if (res->model == CX_MODEL_DISCRETE) {
        map_pass(ws, res, r, y, ws->xa, w_out, ys);
        memcpy(r, ws->xa, (size_t)ws->n * sizeof *r);
        memcpy(y, ys, (size_t)ws->dim * sizeof *y);
        return;
    }
    const double h2 = 0.5 * dt, h6 = dt / 6.0;
    double yt[CX_MAX_DIM];
    rk4_stage(ws, res, 1, r, y, h2, ws->acc, r, ws->xa, w_out, ys);
    rk4_stage(ws, res, 2, ws->xa, ys, h2, ws->acc, r, ws->xb, w_out, yt);
    rk4_stage(ws, res, 3, ws->xb, yt, dt, ws->acc, r, ws->xa, w_out, ys);
    rk4_stage(ws, res, 4, ws->xa, ys, h6, ws->acc, r, r, w_out, y);
}
