/* coexist: private layout of the reservoir workspace and the stepping kernels shared by
 * model.c, drive.c and probe.c. Not a public header: callers see cx_res_ws as opaque. */
#ifndef COEXIST_RESERVOIR_IMPL_H
#define COEXIST_RESERVOIR_IMPL_H

#include <math.h>
#include <stddef.h>

#include "coexist/reservoir.h"

struct cx_res_ws {
    cx_idx n;
    int dim;
    int features;
    cx_idx nfeat;
    /* RK4 stage states (xa, xb) and the running sum k1 + 2 k2 + 2 k3 (acc); the discrete map
     * writes its new state into xa. */
    double *xa;
    double *xb;
    double *acc;
    double *r2;    /* the second trajectory of the Lyapunov estimate */
    double *pre;   /* pre-activations of one stage, then their tanh */
    double *rprev; /* the state one step earlier (fixed-point test of the probe) */
    /* Filled by cx_res_meet from the reservoir, once per call, never per step. */
    double *bias;  /* n: b, or zeros */
    double *win;   /* n x dim row-major: sigma W_in */
    double *inw;   /* n: sigma times the single non-zero of row i (one-per-node layout) */
    cx_idx *incol; /* n: its column */
    int onehot;    /* every row of W_in has at most one non-zero */
    /* The rows of M for the vector pre-activation pass (rows.c), built by cx_res_meet: position
     * q holds node rows_node[q], by descending row length; positions [0, rows_full) form chunks
     * of rows_lanes (0: no layout, the scalar pass), chunk c's k-th entries at
     * rows_off[c] + k L + lane. */
    int rows_lanes;
    int rows_hwgather; /* 8 lanes: gather by the instruction (cx_res_gather_hw) */
    cx_idx rows_full;
    cx_idx rows_cap; /* entries allocated in rows_col and rows_val */
    cx_idx *rows_node, *rows_len, *rows_incol, *rows_off, *rows_col;
    double *rows_bias, *rows_inw, *rows_win, *rows_val;
    cx_idx *rows_pos;  /* n: the position of node i */
    cx_idx *rows_pcol; /* rows_col as positions: the columns of the drive in position order */
    double *rows_x;    /* n: a state in node order, unpermuted from the drive's */
    /* Gram accumulation block: q columns (nfeat x block, column-major) and u columns. */
    cx_idx block;
    double *qblk;
    double *ublk;
    double gram_seconds; /* wall time spent in the Gram updates since allocation */
    /* Batched closed loop (batch.c): n x batch_cap row-major blocks, allocated by
     * cx_res_ws_set_batch: states, states one step earlier, the two stage states, the RK4 sum
     * and the pre-activations. */
    int batch_cap;
    double *bx;
    double *bprev;
    double *bxa;
    double *bxb;
    double *bacc;
    double *bpre;
    double *bpack; /* the columns' readouts packed node by node for the fused kernel (fused.c) */
    /* Runs of one block with different values of M (cells of several spectral radii): entry p's
     * value for column c at bval[p w + c] (w the block's width), read by every block kernel in
     * place of M's own; NULL when the columns share M's values. bval_cap: doubles allocated. */
    const double *bval;
    double *bval_buf;
    cx_idx bval_cap;
};

/* Check that `res` fits the workspace and build the input tables. */
int cx_res_meet(cx_res_ws *ws, const cx_reservoir *res);

/* Whether a closed-loop output has left the box [lo, hi] (either NULL: no bound on that side) or
 * is not finite: the stop test of every probe (probe.c, batch.c). */
static inline int cx_res_outside(const double *y, int dim, const double *lo, const double *hi)
{
    for (int j = 0; j < dim; j++) {
        if (!isfinite(y[j]))
            return 1;
        if (lo != NULL && y[j] < lo[j])
            return 1;
        if (hi != NULL && y[j] > hi[j])
            return 1;
    }
    return 0;
}

/* Build the layout of the vector pre-activation pass for res (rows.c); called by cx_res_meet. */
int cx_res_rows_build(cx_res_ws *ws, const cx_reservoir *res);

/* Node i's pre-activation s_i = b_i + (sigma W_in u)_i + sum_j M_ij x_j, in this order (the
 * entries of row i in storage order): the scalar form every kernel's lanes reproduce. x is in
 * node order, or with pos != NULL in position order (x[pos[j]] is node j's value). */
static inline double cx_res_preact_node(const cx_res_ws *restrict ws, const cx_csr *restrict m,
                                        const double *restrict x, const cx_idx *restrict pos,
                                        const double *restrict u, cx_idx i)
{
    double s = ws->bias[i];
    if (ws->onehot) {
        s += ws->inw[i] * u[ws->incol[i]];
    } else {
        const double *w = ws->win + i * ws->dim;
        for (int j = 0; j < ws->dim; j++)
            s += w[j] * u[j];
    }
    const cx_idx *restrict col = m->col;
    const double *restrict val = m->val;
    const cx_idx end = m->rowptr[i + 1];
    if (pos == NULL)
        for (cx_idx p = m->rowptr[i]; p < end; p++)
            s += val[p] * x[col[p]];
    else
        for (cx_idx p = m->rowptr[i]; p < end; p++)
            s += val[p] * x[pos[col[p]]];
    return s;
}

/* Whether the 8-lane row passes gather with the gather instruction rather than scalar loads,
 * measured once per process (rows.c); cx_res_gather_force(0 or 1) fixes the choice, -1 asks for
 * a new measurement, and returns the previous setting. The bits are the same either way. */
int cx_res_gather_hw(void);
int cx_res_gather_force(int mode);

/* s_i = b_i + (sigma W_in u)_i + (M x)_i of one run for the nodes rows_node[q], q < the
 * returned count (rows_full, or 0 without a layout), with the bits of the scalar pass (rows.c). */
cx_idx cx_res_preact_rows(const cx_res_ws *ws, const double *x, const double *u, double *s);

/* The drive of one run in position order (rows.c): usable when cx_res_open_rows_ok (a row
 * layout and our own tanh). cx_res_rows_gather lays a state out by position (p[q] =
 * r[rows_node[q]]), cx_res_rows_scatter puts it back; cx_res_open_step_rows is
 * cx_res_open_step() on a state in position order, with the same bits node by node: the
 * pre-activations, tanh and stage update of the full chunks in one vector pass. */
int cx_res_open_rows_ok(const cx_res_ws *ws, const cx_reservoir *res);
void cx_res_rows_gather(const cx_res_ws *ws, const double *r, double *p);
void cx_res_rows_scatter(const cx_res_ws *ws, const double *p, double *r);
void cx_res_open_step_rows(cx_res_ws *ws, const cx_reservoir *res, double dt, const double *u0,
                           const double *uh, const double *u1, double *p);

/* x_i <- tanh(x_i), i < n, the way `mode` (enum cx_tanh) says; see tanh.c. */
void cx_res_tanh(int mode, double *x, cx_idx n);

/* The vector lanes the kernels use: 8 with AVX-512F, 4 with AVX2 + FMA, else 1, never more than
 * cx_res_simd_limit allows (tanh.c). */
int cx_res_simd_lanes(void);

/* The fused closed-loop block kernel (fused.c): usable when the tanh is our own and the CPU has
 * AVX2 + FMA; cx_res_fused_lanes gives the widest vector it can use (4 or 8), 0 when it cannot
 * be used. cx_res_pack_readouts lays out the readouts of w columns for it (pack: 2 n dim w
 * doubles, then pconst: dim w); cx_res_stage_fused is stage_block() of batch.c for a block
 * w = lanes or 2 lanes columns wide (lanes 4 or 8, at most cx_res_fused_lanes), with the same
 * bits. */
int cx_res_fused_lanes(const cx_reservoir *res);
void cx_res_pack_readouts(cx_idx n, int dim, int features, int w, const double *const *w_out,
                          double *pack, double *pconst);
void cx_res_stage_fused(const cx_res_ws *ws, const cx_reservoir *res, int lanes, int w, int stage,
                        const double *x, const double *u, double c0, double *acc, double *r,
                        double *xout, const double *pack, const double *pconst, double *y);

/* The stage update, elementwise over len values: stage 0 the leaky map, xout = (1 - a) x + a s;
 * stage 1..4 the RK4 stage with k = gamma (s - x) (model.c). Shared by the one-run kernels, the
 * generic block kernel and the tail of the drive's vector pass, so that all run one sequence. */
void cx_res_stage_update(const cx_reservoir *res, cx_idx len, int stage, const double *x,
                         const double *s, double c0, double *acc, double *r, double *xout);

/* q(r) into q (nfeat). */
void cx_res_features_of(const cx_res_ws *ws, const double *r, double *q /* out */);

/* One open-loop step from r (in/out) with input u0 at the step start, uh at its midpoint and u1
 * at its end (the discrete map reads u0 only). Requires cx_res_meet. */
void cx_res_open_step(cx_res_ws *ws, const cx_reservoir *res, double dt, const double *u0,
                      const double *uh, const double *u1, double *r);

/* One closed-loop step from r (in/out); y holds W_out q(r) on entry and W_out q(r_new) on
 * return. Requires cx_res_meet. */
void cx_res_closed_step(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                        double *r, double *y);

#endif
