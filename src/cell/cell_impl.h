/* coexist: private state of the cell pipeline (see include/coexist/cell.h). */
#ifndef CX_CELL_IMPL_H
#define CX_CELL_IMPL_H

#include <stdint.h>

#include "coexist/cell.h"
#include "coexist/net.h"
#include "coexist/reservoir.h"
#include "coexist/classify.h"

void cx_key_u64(uint64_t *h, uint64_t v);
void cx_key_f64(uint64_t *h, double v);
uint64_t cx_cell_series_key(const cx_cell_params *p);
/* Centre (mean) and amplitude (RMS distance from the centre) of the last n_tail of n_total
 * samples of y. */
void cx_cell_tail_shape(const double *y, cx_idx n_total, cx_idx n_tail, int dim,
                        double *centre /* out, dim */, double *amplitude /* out */);
/* Group the runs that ended on untrained attractors (src/cell/untrained.c); sets each run's
 * cluster and the result's untrained counts. */
void cx_cell_cluster_untrained(cx_cell_result *r, const double (*centre)[CX_MAX_DIM],
                               const double *amplitude, int dim, double scale, double tol,
                               double period_rel);
/* Whole steps of dt in a time span (rounded to nearest). */
cx_idx cx_cell_steps(double time, double dt);

struct cx_cell_ws {
    /* network stage: unscaled M and its spectral radius */
    int have_net;
    uint64_t net_key;
    cx_csr m0;
    double rho0;
    /* input stage */
    int have_input;
    uint64_t input_key;
    cx_idx n;
    int dim;
    double *w_in;      /* n x dim */
    double *bias_unit; /* n, U(-1, 1); scaled by the cell's bias */
    /* M scaled to the cell's spectral radius (values only; structure borrowed from m0) */
    cx_csr m;
    double m_scale;
    double *bias; /* n */
    /* task signals */
    int have_series;
    uint64_t series_key;
    int ntasks;
    int model;
    cx_idx sub; /* samples per step in the stored signals: 2 continuous, 1 discrete */
    cx_idx wash, train, horizon;
    double *series[CX_MAX_TASKS];   /* (sub * (wash + train + horizon) + 1) x dim */
    double *training[CX_MAX_TASKS]; /* (train + 1) x dim: the training part at whole steps */
    cx_attractor *att[CX_MAX_TASKS];
    /* drive stage */
    int have_drive;
    uint64_t drive_key;
    int features;
    cx_idx nfeat;
    double *g[CX_MAX_TASKS]; /* nfeat x nfeat */
    double *c[CX_MAX_TASKS]; /* dim x nfeat */
    double *r_end[CX_MAX_TASKS];
    cx_res_ws *rws;
    cx_idx rws_n;
    int rws_dim, rws_features;
    /* solve and probes */
    double *w_out; /* CX_CELL_GROUP readouts, dim x nfeat each (the first is the last single
                      cell's, which cx_cell_dump writes); kept across drives, since the cells
                      of a group may each have their own */
    cx_idx w_out_cap;
    double *group_val; /* CX_CELL_GROUP x nnz: the values of M of the cells of a group */
    cx_idx group_val_cap;
    double *work;  /* nfeat^2 + dim * nfeat */
    double *r;     /* n */
    double *y;     /* nruns x (horizon + 1) x dim: every run's outputs */
    double *run_r; /* nruns x n: every run's state (start, then end) */
    cx_idx run_r_cap;
    /* per run of a group: state and output pointers (2 x cap), readouts, limits, values of M,
     * stop steps */
    double **run_ptr;
    const double **run_w;
    const cx_res_limits **run_lim;
    const double **run_val;
    cx_idx *steps_done, *settled_at;
    int run_ptr_cap;
    double *truth; /* (horizon + 1) x dim: a task's true continuation at whole steps */
    cx_idx y_cap;
    cx_class_ws *cws;
    cx_idx cws_cap;
    int cws_dim;
    /* kept for dump */
    int keep;
    double *kept_y; /* nruns x (horizon + 1) x dim */
    cx_idx kept_len[CX_MAX_RUNS];
    cx_idx kept_cap;
    double *kept_start; /* nruns x n: the reservoir state each run started from */
    cx_cell_counts counts;
    int64_t settled; /* closed-loop runs ended early on a fixed point */
    /* RK4 steps times nodes taken by the open-loop drives (training and random starts) and by
     * the closed-loop runs; the Lyapunov estimate is not counted */
    int64_t drive_node_steps, probe_node_steps;
};

#endif
