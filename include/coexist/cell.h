/* coexist: one grid cell end to end (network, tasks, drive, solve, probes, classification),
 * organised as cached stages so that cells sharing a key reuse the expensive work.
 *
 * Stage keys (which sweep parameter invalidates which stage; this table is the one place it is
 * written down, and cx_cell_*_key implement it):
 *   network  <- study seed, replicate, nodes, topology, mean degree, rewire, weight law and
 *               scale, self loops                         (M unscaled and |lambda|max(M))
 *   input    <- network key + task dimension, input layout (W_in, bias law)
 *   drive    <- input key + spectral radius, model, rate, leak, input scaling, bias, features,
 *               tanh evaluation,
 *               tasks, dt, washout, length, stride         (G_k, C_k, end states r_k(T))
 *   solve    <- drive key + blend / weights + ridge        (W_out)
 *   probe    <- solve key + probe and classify settings    (labels and metrics)
 * and, beside the chain, the closed-loop block:
 *   block    <- input key + model, rate, leak, input scaling, bias, features, tanh evaluation,
 *               dt, probe settings, task count (not the spectral radius)
 *               (cells of one block key advance their runs together: cx_cell_compute_group)
 * A workspace keeps the last network and the last drive; the engine orders the cells of a work
 * unit (one drive key) one after another so that only the solve and the probes are repeated.
 */
#ifndef COEXIST_CELL_H
#define COEXIST_CELL_H

#include <stdint.h>

#include "coexist/config.h"
#include "coexist/classify.h"
#include "coexist/study.h"

/* Per-cell status. Stored in cubes and journals: never renumber, only append. */
enum cx_cell_status {
    CX_CELL_NOT_DONE = 0,
    CX_CELL_COMPUTED = 1,
    CX_CELL_FAILED_NOT_PD = 2,    /* the blended Gram matrix was not positive definite */
    CX_CELL_FAILED_NONFINITE = 3, /* the drive or readout produced non-finite values */
    CX_CELL_FAILED_INVALID = 4,   /* the parameter combination is invalid at this grid point */
    CX_CELL_SKIPPED = 5           /* not computed by design (refinement modes) */
};
const char *cx_cell_status_name(int status);

/* Wall-clock seconds of each stage of the last cell (reused stages count 0). */
typedef struct cx_cell_timing {
    double network;
    double drive; /* open-loop drive including the Gram accumulation */
    double gram;  /* of which the Gram (dsyrk/dgemm) part */
    double solve;
    double probes;
    double classify;
    double total;
} cx_cell_timing;

typedef struct cx_cell_result {
    cx_idx cell;
    int status; /* enum cx_cell_status */
    int ntasks;
    int nruns;               /* ntasks + random starts */
    int multifunctional;     /* 1 when every task's own run is reconstructed */
    int untrained;           /* distinct untrained attractors the runs ended on (any start) */
    int untrained_kinds[3];  /* of which fixed points, periodic orbits, aperiodic attractors */
    double rho_unscaled;     /* |lambda|max of the unscaled M */
    double wout_norm;        /* Frobenius norm of W_out */
    double wout_square_norm; /* Frobenius norm of the block of W_out on the squared states */
    cx_cell_timing time;
    cx_run_metrics runs[CX_MAX_RUNS]; /* runs 0..ntasks-1 start at the end of task k's
                                         training; the rest are random starts */
} cx_cell_result;

/* How often each stage ran in a workspace (to prove reuse). */
typedef struct cx_cell_counts {
    int64_t networks;
    int64_t spectral_radii;
    int64_t inputs;
    int64_t drives;
    int64_t solves;
    int64_t probes;
} cx_cell_counts;

typedef struct cx_cell_ws cx_cell_ws;
int cx_cell_ws_create(cx_cell_ws **ws /* out */);
void cx_cell_ws_destroy(cx_cell_ws **ws);

/* Keep the matrices and every run's trajectory of the next cell, for cx_cell_dump. */
void cx_cell_ws_keep(cx_cell_ws *ws, int keep);

/* Compute one cell. Outcomes (not PD, diverged, ...) are statuses in *out, not errors; an error
 * is returned only for failures of the machine or a bug (memory, I/O, LAPACK illegal argument).
 * OUT: *out. Not collective. */
int cx_cell_compute(cx_cell_ws *ws, const cx_cell_params *p, cx_idx cell,
                    cx_cell_result *out /* out */);

/* Most cells computed together by cx_cell_compute_group. */
#define CX_CELL_GROUP 8

/* Compute the leading cells of p[0..k-1] that share p[0]'s network, input, reservoir settings
 * other than the spectral radius, dt, probe settings and task count, at most CX_CELL_GROUP of
 * them: the closed-loop runs of all of them advance together in blocks, each run with its own
 * cell's scaling of M, readout, start, bound box and early-stop test. Cells that differ only in
 * their readout's parameters (blend, weights, ridge) also share one drive; cells that differ in
 * their spectral radius, tasks, washout, length, stride or classifier settings each have their
 * own (the cells of a blend, spectral-radius, overlap or washout axis, in the order the engine
 * hands them out). Each result
 * is bit for bit what cx_cell_compute gives for that cell alone, except the timings: the block's
 * probe time is shared out evenly. Always computes at least one cell. OUT: out[0..*used-1],
 * *used. Not collective. */
int cx_cell_compute_group(cx_cell_ws *ws, const cx_cell_params *const *p, const cx_idx *cells,
                          int k, cx_cell_result *out /* out */, int *used /* out */);

void cx_cell_ws_counts(const cx_cell_ws *ws, cx_cell_counts *c /* out */);
/* How many closed-loop runs of this workspace ended early on a fixed point (probe.early_stop). */
int64_t cx_cell_ws_settled(const cx_cell_ws *ws);
/* The work of the stepping kernels in this workspace so far, in RK4 steps times nodes: the
 * open-loop drives (training, washout included, and the drives to random starts) and the
 * closed-loop runs (each to where it ended). The Lyapunov estimate is not counted. */
void cx_cell_ws_steps(const cx_cell_ws *ws, int64_t *drive /* out */, int64_t *probe /* out */);

/* Check, before any work, that a dump can be written to `path`: it must not exist (unless
 * `overwrite`) and its directory must exist. CX_ERR_INVALID with a message otherwise. */
int cx_cell_dump_check(const char *path, int overwrite);

/* Write the kept matrices and trajectories of the last cell to an HDF5 file (serial).
 * Refuses to overwrite an existing file unless `overwrite`. */
int cx_cell_dump(const cx_cell_ws *ws, const cx_cell_params *p, const cx_cell_result *r,
                 const char *path, int overwrite);

uint64_t cx_cell_network_key(const cx_cell_params *p);
uint64_t cx_cell_input_key(const cx_cell_params *p);
uint64_t cx_cell_drive_key(const cx_cell_params *p);
uint64_t cx_cell_block_key(const cx_cell_params *p);

/* Estimated cost of one cell in floating-point operations when every stage runs, and its peak
 * memory in bytes. cx_cell_cost_parts splits the cost by stage: a work unit pays `network` and
 * `drive` once and `solve` + `probe` per cell. */
double cx_cell_cost_flops(const cx_cell_params *p);
void cx_cell_cost_parts(const cx_cell_params *p, double *network /* out */, double *drive /* out */,
                        double *solve /* out */, double *probe /* out */);
double cx_cell_memory_bytes(const cx_cell_params *p);

#endif
