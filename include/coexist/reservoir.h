/* coexist: reservoir models, the open-loop drive with Gram accumulation, the blended ridge
 * readout and the closed-loop (autonomous) probe.
 *
 * Models:
 *  - continuous time, dr/dt = gamma (-r + tanh(M r + sigma W_in u + b)), integrated by fixed-step
 *    RK4 (Lu, Hunt & Ott 2018, Chaos 28, 061104);
 *  - discrete leaky echo state, r <- (1 - a) r + a tanh(M r + sigma W_in u + b) (Jaeger 2001, GMD
 *    Report 148; Jaeger, Lukosevicius, Popovici & Siewert 2007, Neural Netw. 20, 335).
 * Features q(r): [r; r^2] (default; squares break the r -> -r symmetry), [r], or [r; r^2; 1].
 * Readout: weighted ridge regression (Hoerl & Kennard 1970, Technometrics 12, 55):
 *    W_out = (sum_k w_k^2 C_k) (sum_k w_k^2 G_k + beta I)^-1,  G_k = sum q q^T, C_k = sum u q^T.
 */
#ifndef COEXIST_RESERVOIR_H
#define COEXIST_RESERVOIR_H

#include "coexist/config.h"
#include "coexist/net.h"

enum cx_model { CX_MODEL_CONTINUOUS = 0, CX_MODEL_DISCRETE = 1 };

enum cx_features {
    CX_FEAT_LINEAR_SQUARES = 0,         /* [r; r^2], 2N */
    CX_FEAT_LINEAR = 1,                 /* [r], N */
    CX_FEAT_LINEAR_SQUARES_CONSTANT = 2 /* [r; r^2; 1], 2N + 1 */
};

/* How tanh is evaluated in the stepping kernels. The two give different last bits, so the
 * choice is a sweep-file key (reservoir.tanh) and part of a study's canonical form. */
enum cx_tanh {
    CX_TANH_LIBM = 0,   /* the C library's tanh, one call per node */
    CX_TANH_VECTOR = 1, /* SLEEF's SIMD tanh, 3.5 ULP bound (see tanh.c) */
    CX_TANH_EXPM1 = 2   /* our own, E / (E + 2) with E = expm1(2x), <= 3 ULP measured (tanh.c) */
};

/* Reservoir parameters of one cell; zero-initialise before filling. */
typedef struct cx_res_params {
    int model;              /* enum cx_model */
    double spectral_radius; /* target |lambda|max of M */
    double rate;            /* gamma, 1 / time unit (continuous) */
    double leak;            /* a in (0, 1] (discrete) */
    double input_scaling;   /* sigma */
    int input_layout;       /* enum cx_input_layout */
    double bias;            /* b_i ~ U(-bias, bias); 0 = no bias */
    int features;           /* enum cx_features */
    int tanh_mode;          /* enum cx_tanh */
} cx_res_params;

/* Training parameters of one cell (times in time units of the task signals). */
typedef struct cx_train_params {
    double dt;          /* sample interval = RK4 step of the reservoir, or the map's time step */
    double washout;     /* driven time discarded before accumulating */
    double length;      /* driven time accumulated into the Gram sums */
    double ridge;       /* beta >= 0 */
    double blend;       /* alpha in [0, 1]: w = (alpha, 1 - alpha) for two tasks */
    int weights_listed; /* 1: use weights[] below; 0: blend for two tasks, equal for more */
    double weights[CX_MAX_TASKS];
    cx_idx stride; /* accumulate every stride-th sample */
} cx_train_params;

/* Number of features for n nodes. */
cx_idx cx_features_count(int features, cx_idx n);

/* An assembled reservoir: borrowed views of the scaled M, W_in (n x dim row-major) and b. */
typedef struct cx_reservoir {
    cx_idx n;
    int dim;
    int model;
    int features;
    double rate;
    double leak;
    double input_scaling;
    int tanh_mode;      /* enum cx_tanh */
    const cx_csr *m;    /* borrowed, already scaled to the target spectral radius */
    const double *w_in; /* borrowed */
    const double *bias; /* borrowed, length n, or NULL for none */
} cx_reservoir;

/* Workspace for drive and probe of one reservoir size; sized once, no allocation afterwards. */
typedef struct cx_res_ws cx_res_ws;
int cx_res_ws_alloc(cx_res_ws **ws /* out */, cx_idx n, int dim, int features);
void cx_res_ws_free(cx_res_ws **ws);
/* Number of feature vectors buffered between two Gram updates (default 512); reallocates the
 * block, so call it outside any loop. Results agree for every block size up to rounding. */
int cx_res_ws_set_block(cx_res_ws *ws, cx_idx block);
/* Wall-clock seconds spent in Gram updates (dsyrk + dgemm) by this workspace since allocation. */
double cx_res_ws_gram_seconds(const cx_res_ws *ws);

/* Open-loop drive by one task's signal, with Gram accumulation.
 * u: samples of the signal at spacing dt/2 for the continuous model (u[2i] at step i, u[2i+1]
 * at its midpoint), at spacing dt for the discrete model; (washout + train) steps are taken.
 * After each step i >= washout with (i - washout) % stride == 0 the pair (q(r_{i+1}), u_{i+1})
 * is accumulated: G += q q^T (upper triangle, column-major nfeat x nfeat), C += u q^T
 * (column-major dim x nfeat). r: start state in, end state out. dt: the RK4 step (ignored by
 * the discrete model). Not collective. */
int cx_res_drive(cx_res_ws *ws, const cx_reservoir *res, const double *u, double dt, cx_idx washout,
                 cx_idx train, cx_idx stride, double *r, double *g /* in/out */,
                 double *c /* in/out */);

/* Outcome of a readout solve: not an error. */
enum cx_solve_status { CX_SOLVE_OK = 0, CX_SOLVE_NOT_PD = 1, CX_SOLVE_NONFINITE = 2 };

/* Blended ridge readout: A = sum w_k^2 G_k + beta I, B = sum w_k^2 C_k, W_out = B A^-1 by
 * Cholesky. g[k], c[k] as produced by cx_res_drive. work: nfeat*nfeat + dim*nfeat doubles.
 * OUT: w_out (dim x nfeat, column-major, ld = dim), *status. Returns CX_OK unless LAPACK saw an
 * illegal argument. */
int cx_readout_solve(cx_idx nfeat, int dim, int ntasks, const double *const *g,
                     const double *const *c, const double *w, double beta, double *work,
                     double *w_out /* out */, int *status /* out */);

/* The readout y = W_out q(r). */
void cx_res_readout(const cx_reservoir *res, const double *w_out, const double *r,
                    double *y /* out, dim */);

/* Closed loop: u = W_out q(r) fed back as the input. Takes nsteps steps of dt from r (in/out);
 * writes y at every step i = 0..nsteps (y[0] is the readout of the start state) into
 * y_out[(i) * dim] when y_out is not NULL. Stops early when any output is non-finite or leaves
 * [lo, hi] (per coordinate, when lo/hi are not NULL), returning the number of steps taken in
 * *steps_done: rows 0..*steps_done are written (on an early stop the last of them is the
 * offending output; 0 when the start readout already is), later rows are left untouched, and r
 * holds the state of row *steps_done. Not collective. */
int cx_res_probe(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                 cx_idx nsteps, const double *lo, const double *hi, double *r,
                 double *y_out /* out */, cx_idx *steps_done /* out */);

/* Early stop of a closed-loop run that has settled on a fixed point. The run is settled at step
 * i when each of the last `window` steps changed every state coordinate by at most state_step
 * and every output coordinate by at most output_step (max norms). A slow passage near a
 * saddle could pass such a test only with tolerances far above the rounding level of a step,
 * so callers choose them tiny and the window long (cell.c: one tail length). */
typedef struct cx_res_settle {
    cx_idx window;      /* steps; 0 = never stop early */
    double state_step;  /* max-norm bound of each step's change of r */
    double output_step; /* max-norm bound of each step's change of y */
} cx_res_settle;

/* cx_res_probe with an early stop on a fixed point (settle may be NULL: no early stop). When the
 * run settles at step i, rows i+1..nsteps of y_out are filled with row i (the settled output),
 * *steps_done = nsteps, *settled_at = i and r holds the state of step i; otherwise
 * *settled_at = -1 and everything is as in cx_res_probe. The fill is what the full-horizon run
 * would give up to the drift the test allows (window * output_step at most per window). */
int cx_res_probe_settle(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                        cx_idx nsteps, const double *lo, const double *hi,
                        const cx_res_settle *settle, double *r, double *y_out /* out */,
                        cx_idx *steps_done /* out */, cx_idx *settled_at /* out */);

/* Room for batches of up to nb closed-loop runs (6 blocks of n x nb doubles); grows only, so
 * call it once before the probes of a cell, never in a loop. */
int cx_res_ws_set_batch(cx_res_ws *ws, int nb);

/* The most runs one batch should hold for reservoirs with this tanh (enum cx_tanh) on this CPU:
 * two vectors of the fused kernel (16 with AVX-512F, else 8). A block size, not a limit: the
 * results of a run do not depend on it. */
int cx_res_batch_runs(int tanh_mode);

/* What can end one closed-loop run of a batch before the horizon: the box its outputs must stay
 * inside (lo, hi: dim values each, either NULL for no bound on that side; a non-finite output
 * always ends the run) and the fixed-point test (settle.window 0: none). Runs of one cell share
 * one; runs of different cells in one batch each point at their cell's. */
typedef struct cx_res_limits {
    const double *lo, *hi;
    cx_res_settle settle;
} cx_res_limits;

/* nruns closed-loop runs of one reservoir advanced together as one n x B block (batch.c). Run b
 * has the readout w_out[b], the values m_val[b] of M (res->m->nnz values in res->m's pattern, as
 * the cells of a spectral-radius axis have; m_val or m_val[b] NULL: res->m's own) and the
 * limits lim[b] (lim NULL: no box, no early stop); runs may share any of these or each have
 * their own. Run b starts from r[b] (in/out, n values) and writes y_out[b] ((nsteps + 1) x dim,
 * or y_out / y_out[b] NULL), steps_done[b] and settled_at[b] exactly as cx_res_probe_settle
 * would for that run alone on res with M's values m_val[b], with w_out[b], lim[b]->lo,
 * lim[b]->hi and &lim[b]->settle, bit for bit, whatever nruns and whichever runs share the
 * block. nruns <= the size given to cx_res_ws_set_batch. Not collective. */
int cx_res_probe_batch(cx_res_ws *ws, const cx_reservoir *res, const double *const *w_out,
                       const double *const *m_val, double dt, cx_idx nsteps,
                       const cx_res_limits *const *lim, int nruns, double *const *r,
                       double *const *y_out /* out */, cx_idx *steps_done /* out */,
                       cx_idx *settled_at /* out */);

/* Drive with a constant input point p for nsteps (for "drive-point" random starts). */
int cx_res_drive_constant(cx_res_ws *ws, const cx_reservoir *res, const double *p, double dt,
                          cx_idx nsteps, double *r);

/* Cap the vector width of the stepping kernels at `lanes` doubles (8: AVX-512F, 4: AVX2 + FMA,
 * 1: no vector unit) and return the previous cap; the kernels take the widest the CPU has within
 * the cap (8 by default). Results are the same bits at every width: this is for benchmarks and
 * tests. Set it before computing, not while other threads step. */
int cx_res_simd_limit(int lanes);

/* Largest Lyapunov exponent of the closed loop by two nearby trajectories with renormalisation
 * every step (Benettin et al. 1980, Meccanica 15, 9), for either model. From r (in/out), `steps`
 * steps of dt; initial separation d0 in a direction drawn from rng. OUT: *lambda (1 / time
 * unit, i.e. per dt of time); NaN when a trajectory became non-finite, -inf when the two merged
 * to the last bit. Not collective. */
int cx_res_lyapunov(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                    cx_idx steps, double d0, cx_rng *rng, double *r, double *lambda /* out */);

#endif
