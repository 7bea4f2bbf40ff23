/* coexist: stage keys of a cell (see the table in include/coexist/cell.h) and the cost model.
 *
 * A key is a 64-bit hash of exactly the parameters a stage depends on, fed field by field (never
 * as raw struct bytes, whose padding is not part of the value) into FNV-1a (Fowler, Noll & Vo,
 * 1991; IETF draft-eastlake-fnv) with a SplitMix64 finaliser (Steele, Lea & Flood 2014, OOPSLA)
 * to spread the bits. Keys only decide reuse inside one process; they are not stored.
 */
#include <math.h>
#include <string.h>

#include "coexist/cell.h"
#include "coexist/rng.h"
#include "cell_impl.h"

#define FNV_OFFSET 0xcbf29ce484222325ULL
#define FNV_PRIME  0x100000001b3ULL

void cx_key_u64(uint64_t *h, uint64_t v)
{
    for (int i = 0; i < 8; i++) {
        *h ^= (v >> (8 * i)) & 0xffu;
        *h *= FNV_PRIME;
    }
}

void cx_key_f64(uint64_t *h, double v)
{
    cx_key_u64(h, cx_rng_bits(v));
}

static void key_str(uint64_t *h, const char *s)
{
    for (; *s != '\0'; s++) {
        *h ^= (unsigned char)*s;
        *h *= FNV_PRIME;
    }
    cx_key_u64(h, 0x5eedu);
}

static uint64_t key_finish(uint64_t h)
{
    return cx_rng_mix64(h);
}

static void key_network(uint64_t *h, const cx_cell_params *p)
{
    cx_key_u64(h, p->study_seed);
    cx_key_u64(h, p->replicate);
    cx_key_u64(h, (uint64_t)p->net.nodes);
    cx_key_u64(h, (uint64_t)p->net.topology);
    cx_key_f64(h, p->net.mean_degree);
    cx_key_f64(h, p->net.rewire);
    cx_key_u64(h, (uint64_t)p->net.weight_law);
    cx_key_f64(h, p->net.weight_scale);
    cx_key_u64(h, (uint64_t)p->net.self_loops);
}

static void key_input(uint64_t *h, const cx_cell_params *p)
{
    key_network(h, p);
    cx_key_u64(h, (uint64_t)p->dim);
    cx_key_u64(h, (uint64_t)p->res.input_layout);
}

static void key_task(uint64_t *h, const cx_task_spec *t)
{
    cx_key_u64(h, (uint64_t)t->kind);
    cx_key_u64(h, (uint64_t)t->dim);
    for (int j = 0; j < CX_MAX_DIM; j++) {
        cx_key_f64(h, t->centre[j]);
        cx_key_f64(h, t->shift[j]);
    }
    cx_key_f64(h, t->radius);
    cx_key_f64(h, t->speed);
    cx_key_f64(h, t->ellipticity);
    cx_key_f64(h, t->phase);
    cx_key_u64(h, (uint64_t)t->flow);
    for (int j = 0; j < CX_MAX_FLOW_PAR; j++)
        cx_key_f64(h, t->par[j]);
    for (int j = 0; j < 3; j++)
        cx_key_f64(h, t->x0[j]);
    cx_key_f64(h, t->transient);
    cx_key_f64(h, t->inner_dt);
    key_str(h, t->path);
    key_str(h, t->dataset);
    cx_key_f64(h, t->file_dt);
    cx_key_f64(h, t->scale);
    cx_key_f64(h, t->rotate);
    cx_key_u64(h, (uint64_t)t->mirror);
    cx_key_u64(h, (uint64_t)t->reverse);
}

/* The task signals: tasks, time step and the lengths they are generated for. */
uint64_t cx_cell_series_key(const cx_cell_params *p)
{
    uint64_t h = FNV_OFFSET;
    cx_key_u64(&h, (uint64_t)p->res.model);
    cx_key_f64(&h, p->train.dt);
    cx_key_f64(&h, p->train.washout);
    cx_key_f64(&h, p->train.length);
    cx_key_f64(&h, p->probe.horizon);
    cx_key_u64(&h, (uint64_t)p->ntasks);
    for (int k = 0; k < p->ntasks; k++)
        key_task(&h, &p->tasks[k]);
    return key_finish(h);
}

uint64_t cx_cell_network_key(const cx_cell_params *p)
{
    uint64_t h = FNV_OFFSET;
    key_network(&h, p);
    return key_finish(h);
}

uint64_t cx_cell_input_key(const cx_cell_params *p)
{
    uint64_t h = FNV_OFFSET;
    key_input(&h, p);
    return key_finish(h);
}

/* The input key and what else makes the reservoir's equations: spectral radius (with_rho),
 * model and its settings, features, tanh evaluation, time step (shared by the drive and block
 * keys). */
static void key_reservoir(uint64_t *h, const cx_cell_params *p, int with_rho)
{
    key_input(h, p);
    if (with_rho)
        cx_key_f64(h, p->res.spectral_radius);
    cx_key_u64(h, (uint64_t)p->res.model);
    cx_key_f64(h, p->res.rate);
    cx_key_f64(h, p->res.leak);
    cx_key_f64(h, p->res.input_scaling);
    cx_key_f64(h, p->res.bias);
    cx_key_u64(h, (uint64_t)p->res.features);
    cx_key_u64(h, (uint64_t)p->res.tanh_mode);
    cx_key_f64(h, p->train.dt);
}

uint64_t cx_cell_drive_key(const cx_cell_params *p)
{
    uint64_t h = FNV_OFFSET;
    key_reservoir(&h, p, 1);
    cx_key_f64(&h, p->train.washout);
    cx_key_f64(&h, p->train.length);
    cx_key_u64(&h, (uint64_t)p->train.stride);
    cx_key_u64(&h, (uint64_t)p->ntasks);
    for (int k = 0; k < p->ntasks; k++)
        key_task(&h, &p->tasks[k]);
    return key_finish(h);
}

/* The cells that can share the closed-loop block (cx_cell_compute_group's test): input key,
 * reservoir settings but the spectral radius, time step, probe settings and task count. The
 * engine orders units of equal cost by it; grouping itself compares the parameters, so a
 * collision of this hash costs speed only. */
uint64_t cx_cell_block_key(const cx_cell_params *p)
{
    uint64_t h = FNV_OFFSET;
    key_reservoir(&h, p, 0);
    cx_key_f64(&h, p->probe.horizon);
    cx_key_f64(&h, p->probe.tail);
    cx_key_u64(&h, (uint64_t)p->probe.random_starts);
    cx_key_u64(&h, (uint64_t)p->probe.start_mode);
    cx_key_f64(&h, p->probe.start_box);
    cx_key_f64(&h, p->probe.drive_time);
    cx_key_u64(&h, (uint64_t)p->probe.lyapunov);
    cx_key_u64(&h, (uint64_t)p->probe.early_stop);
    cx_key_f64(&h, p->probe.lyapunov_time);
    cx_key_u64(&h, (uint64_t)p->ntasks);
    return key_finish(h);
}

cx_idx cx_cell_steps(double time, double dt)
{
    double s = floor(time / dt + 0.5);
    return s < 0 ? 0 : (cx_idx)s;
}

/* Flop model. Per reservoir evaluation: 2 nnz (mat-vec) + 2 N dim (input, dense bound) + a tanh
 * counted as 20 flops + 4 N (leak/RK4 update); per closed-loop evaluation add the readout
 * 2 nfeat dim. Gram: nfeat^2 per accumulated sample (dsyrk on the upper triangle) + 2 nfeat dim.
 * Solve: nfeat^3 / 3 (Cholesky) + 2 nfeat^2 dim (two triangular solves). The counts are rough;
 * the engine only needs them to rank work units and to estimate core-hours. */
void cx_cell_cost_parts(const cx_cell_params *p, double *network, double *drive, double *solve,
                        double *probe)
{
    double n = (double)p->net.nodes;
    double nnz =
        n * (p->net.topology == CX_TOPO_ERDOS_RENYI || p->net.topology == CX_TOPO_SMALL_WORLD
                 ? p->net.mean_degree
                 : 1.0);
    double nf = (double)cx_features_count(p->res.features, p->net.nodes);
    double dim = (double)p->dim;
    double stages = p->res.model == CX_MODEL_CONTINUOUS ? 4.0 : 1.0;
    double eval = 2.0 * nnz + 2.0 * n * dim + 24.0 * n;
    double wash = (double)cx_cell_steps(p->train.washout, p->train.dt);
    double train = (double)cx_cell_steps(p->train.length, p->train.dt);
    double stride = p->train.stride > 0 ? (double)p->train.stride : 1.0;
    double horizon = (double)cx_cell_steps(p->probe.horizon, p->train.dt);
    double runs = (double)(p->ntasks + p->probe.random_starts);
    double tasks = (double)p->ntasks;
    double spectral = n <= 1500 ? 10.0 * n * n * n : 400.0 * nnz * 50.0;

    *network = 20.0 * nnz + spectral;
    *drive = tasks * ((wash + train) * stages * eval + train / stride * (nf * nf + 2.0 * nf * dim));
    *solve = nf * nf * nf / 3.0 + 2.0 * nf * nf * dim + tasks * nf * nf;
    *probe = runs * horizon * stages * (eval + 2.0 * nf * dim);
    if (p->probe.lyapunov)
        *probe += runs * 2.0 * (double)cx_cell_steps(p->probe.lyapunov_time, p->train.dt) * stages *
                  (eval + 2.0 * nf * dim);
}

double cx_cell_cost_flops(const cx_cell_params *p)
{
    double a, b, c, d;
    cx_cell_cost_parts(p, &a, &b, &c, &d);
    return a + b + c + d;
}

double cx_cell_memory_bytes(const cx_cell_params *p)
{
    double n = (double)p->net.nodes;
    double nf = (double)cx_features_count(p->res.features, p->net.nodes);
    double dim = (double)p->dim;
    double tasks = (double)p->ntasks;
    double nnz = n * (p->net.mean_degree > 1.0 ? p->net.mean_degree : 1.0);
    double steps = (double)(cx_cell_steps(p->train.washout, p->train.dt) +
                            cx_cell_steps(p->train.length, p->train.dt) +
                            cx_cell_steps(p->probe.horizon, p->train.dt));
    double dense_eig = n <= 1500 ? 8.0 * n * n * 2.0 : 0.0;
    /* a workspace computes up to CX_CELL_GROUP cells of one block group at once
     * (cx_cell_compute_group): their readouts, values of M, run states and outputs are held
     * together */
    const double group = CX_CELL_GROUP;
    const double runs = (double)(p->ntasks + p->probe.random_starts);
    return 8.0 *
               (tasks * (nf * nf + nf * dim) /* G_k, C_k */
                + nf * nf + nf * dim         /* solve workspace */
                + group * nf * dim           /* the group's readouts */
                + group * nnz                /* the group's values of M */
                + 24.0 * nnz                 /* the block's values of M, column by column */
                + tasks * 2.0 * steps * dim  /* task signals */
                + group * runs * ((double)cx_cell_steps(p->probe.horizon, p->train.dt) + 1.0) *
                      dim                            /* every run's outputs */
                + group * runs * n                   /* every run's state */
                + 16.0 * (6.0 + 2.0 * dim + 1.0) * n /* the block of up to 16 runs, packed W_out */
                + 24.0 * n + 2.0 * nnz               /* stage vectors, M */
                + 8.0 * n + 4.0 * nnz) +             /* M's rows for the vector pass (rows.c) */
           dense_eig;
}
