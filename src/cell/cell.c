/* coexist: one grid cell end to end, as cached stages (see include/coexist/cell.h).
 *
 * The pipeline follows the usual reservoir-computing workflow for reconstructing attractors
 * (Lu, Hunt & Ott 2018, Chaos 28, 061104): drive the reservoir open loop with each task's
 * signal, discard a washout, accumulate the readout's normal equations, solve one weighted ridge
 * regression over all tasks (Hoerl & Kennard 1970), then close the loop and judge where each run
 * ends. Conventions fixed here:
 *  - every task's drive starts from r = 0;
 *  - the delay line is nilpotent (spectral radius 0), so for it the spectral-radius value sets
 *    the weight of every link instead of a rescaling;
 *  - blend weights: listed weights as given; else (alpha, 1 - alpha) for two tasks and 1/K each
 *    for K != 2 tasks (so blend 0.5 and equal weights agree for two tasks);
 *  - random starts are keyed by (study seed, replicate, nodes, start index) only, so the same
 *    starts are used across spectral radii, ridge and blend values (common random numbers make
 *    neighbouring cells of a map comparable).
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/clock.h"
#include "coexist/cell.h"
#include "coexist/error.h"
#include "coexist/rng.h"
#include "coexist/task.h"
#include "cell_impl.h"

const char *cx_cell_status_name(int status)
{
    switch (status) {
    case CX_CELL_NOT_DONE:
        return "not-done";
    case CX_CELL_COMPUTED:
        return "computed";
    case CX_CELL_FAILED_NOT_PD:
        return "failed-not-positive-definite";
    case CX_CELL_FAILED_NONFINITE:
        return "failed-non-finite";
    case CX_CELL_FAILED_INVALID:
        return "failed-invalid";
    case CX_CELL_SKIPPED:
        return "skipped";
    default:
        return "unknown";
    }
}

int cx_cell_ws_create(cx_cell_ws **out)
{
    int rc = CX_OK;
    cx_cell_ws *ws = NULL;
    CX_CALLOC(ws, 1);
    *out = ws;
done:
    return rc;
}

static void free_series(cx_cell_ws *ws)
{
    for (int k = 0; k < CX_MAX_TASKS; k++) {
        free(ws->series[k]);
        free(ws->training[k]);
        ws->series[k] = ws->training[k] = NULL;
        cx_attractor_destroy(&ws->att[k]);
    }
    ws->have_series = 0;
}

static void free_drive(cx_cell_ws *ws)
{
    for (int k = 0; k < CX_MAX_TASKS; k++) {
        free(ws->g[k]);
        free(ws->c[k]);
        free(ws->r_end[k]);
        ws->g[k] = ws->c[k] = ws->r_end[k] = NULL;
    }
    free(ws->work);
    ws->work = NULL;
    ws->have_drive = 0;
}

static void free_input(cx_cell_ws *ws)
{
    free(ws->w_in);
    free(ws->bias_unit);
    free(ws->bias);
    free(ws->m.val);
    free(ws->r);
    ws->w_in = ws->bias_unit = ws->bias = ws->m.val = ws->r = NULL;
    ws->have_input = 0;
    ws->m_scale = 0.0;
}

void cx_cell_ws_destroy(cx_cell_ws **p)
{
    if (p == NULL || *p == NULL)
        return;
    cx_cell_ws *ws = *p;
    free_series(ws);
    free_drive(ws);
    free_input(ws);
    cx_csr_free(&ws->m0);
    cx_res_ws_free(&ws->rws);
    cx_class_ws_free(&ws->cws);
    free(ws->w_out);
    free(ws->group_val);
    free(ws->y);
    free(ws->run_r);
    free(ws->truth);
    free(ws->kept_y);
    free(ws->kept_start);
    free(ws->run_ptr);
    free(ws->run_w);
    free(ws->run_lim);
    free(ws->run_val);
    free(ws->steps_done);
    free(ws->settled_at);
    free(ws);
    *p = NULL;
}

void cx_cell_ws_keep(cx_cell_ws *ws, int keep)
{
    ws->keep = keep;
}

void cx_cell_ws_counts(const cx_cell_ws *ws, cx_cell_counts *c)
{
    *c = ws->counts;
}

int64_t cx_cell_ws_settled(const cx_cell_ws *ws)
{
    return ws->settled;
}

void cx_cell_ws_steps(const cx_cell_ws *ws, int64_t *drive, int64_t *probe)
{
    *drive = ws->drive_node_steps;
    *probe = ws->probe_node_steps;
}

/* Stage 1: M (unscaled) and its spectral radius, keyed by the network parameters. */
static int stage_network(cx_cell_ws *ws, const cx_cell_params *p)
{
    int rc = CX_OK;
    uint64_t key = cx_cell_network_key(p);
    if (ws->have_net && ws->net_key == key)
        return CX_OK;
    free_input(ws);
    free_drive(ws);
    cx_csr_free(&ws->m0);
    ws->have_net = 0;

    uint64_t coords[8] = {p->replicate,
                          (uint64_t)p->net.nodes,
                          (uint64_t)p->net.topology,
                          cx_rng_bits(p->net.mean_degree),
                          cx_rng_bits(p->net.rewire),
                          (uint64_t)p->net.weight_law,
                          cx_rng_bits(p->net.weight_scale),
                          (uint64_t)p->net.self_loops};
    cx_rng rng;
    cx_rng_keyed(&rng, p->study_seed, CX_RNG_NETWORK, coords, 8);
    CX_TRY(cx_net_draw(&p->net, &rng, &ws->m0));
    ws->counts.networks++;
    cx_rng_keyed(&rng, p->study_seed, CX_RNG_NETWORK, coords, 8);
    cx_rng_advance(&rng, 0x9e3779b97f4a7c15ULL); /* a stream position the draw never reaches */
    CX_TRY(cx_net_spectral_radius(&ws->m0, 0, &rng, &ws->rho0));
    ws->counts.spectral_radii++;
    ws->net_key = key;
    ws->have_net = 1;
done:
    return rc;
}

/* Stage 2: W_in and the unit bias draw, keyed by network + dimension + layout; and the scaled
 * copy of M for the cell's spectral radius. */
static int stage_input(cx_cell_ws *ws, const cx_cell_params *p)
{
    int rc = CX_OK;
    cx_idx n = p->net.nodes;
    uint64_t key = cx_cell_input_key(p);
    if (!(ws->have_input && ws->input_key == key)) {
        free_input(ws);
        free_drive(ws);
        CX_ALLOC(ws->w_in, n * p->dim);
        CX_ALLOC(ws->bias_unit, n);
        CX_ALLOC(ws->bias, n);
        CX_ALLOC(ws->m.val, ws->m0.nnz > 0 ? ws->m0.nnz : 1);
        CX_ALLOC(ws->r, n);
        uint64_t coords[4] = {p->replicate, (uint64_t)n, (uint64_t)p->dim,
                              (uint64_t)p->res.input_layout};
        cx_rng rng;
        cx_rng_keyed(&rng, p->study_seed, CX_RNG_INPUT, coords, 4);
        CX_TRY(cx_net_input(n, p->dim, p->res.input_layout, &rng, ws->w_in));
        cx_rng_keyed(&rng, p->study_seed, CX_RNG_BIAS, coords, 2);
        for (cx_idx i = 0; i < n; i++)
            ws->bias_unit[i] = cx_rng_range(&rng, -1.0, 1.0);
        ws->n = n;
        ws->dim = p->dim;
        ws->input_key = key;
        ws->have_input = 1;
        ws->counts.inputs++;
    }
    double target = p->res.spectral_radius;
    double scale;
    if (ws->rho0 > 0.0)
        scale = target / ws->rho0;
    else
        scale = target / p->net.weight_scale; /* nilpotent (delay line): the value is the weight */
    if (scale != ws->m_scale) {
        ws->m.n = ws->m0.n;
        ws->m.nnz = ws->m0.nnz;
        ws->m.rowptr = ws->m0.rowptr; /* borrowed */
        ws->m.col = ws->m0.col;       /* borrowed */
        for (cx_idx i = 0; i < ws->m0.nnz; i++)
            ws->m.val[i] = ws->m0.val[i] * scale;
        ws->m_scale = scale;
    }
    for (cx_idx i = 0; i < n; i++)
        ws->bias[i] = p->res.bias * ws->bias_unit[i];
done:
    return rc;
}

/* The task signals (training and true continuation) and the trained attractors' clouds. */
static int stage_series(cx_cell_ws *ws, const cx_cell_params *p)
{
    int rc = CX_OK;
    uint64_t key = cx_cell_series_key(p);
    if (ws->have_series && ws->series_key == key)
        return CX_OK;
    free_series(ws);
    ws->model = p->res.model;
    ws->sub = p->res.model == CX_MODEL_CONTINUOUS ? 2 : 1;
    ws->wash = cx_cell_steps(p->train.washout, p->train.dt);
    ws->train = cx_cell_steps(p->train.length, p->train.dt);
    ws->horizon = cx_cell_steps(p->probe.horizon, p->train.dt);
    ws->ntasks = p->ntasks;
    int dim = p->dim;
    cx_idx total = ws->sub * (ws->wash + ws->train + ws->horizon) + 1;
    for (int k = 0; k < p->ntasks; k++) {
        CX_ALLOC(ws->series[k], total * dim);
        CX_ALLOC(ws->training[k], (ws->train + 1) * dim);
        CX_TRY(cx_task_series(&p->tasks[k], p->train.dt / (double)ws->sub, total, ws->series[k]));
        /* the training part at whole steps: samples wash .. wash + train */
        for (cx_idx i = 0; i <= ws->train; i++)
            for (int j = 0; j < dim; j++)
                ws->training[k][i * dim + j] = ws->series[k][(ws->sub * (ws->wash + i)) * dim + j];
        CX_TRY(cx_attractor_create(ws->training[k], ws->train + 1, dim, p->cls.cloud_points,
                                   &ws->att[k]));
    }
    ws->series_key = key;
    ws->have_series = 1;
done:
    if (rc != CX_OK)
        free_series(ws);
    return rc;
}

static int ensure_res_ws(cx_cell_ws *ws, const cx_cell_params *p)
{
    int rc = CX_OK;
    if (ws->rws != NULL && ws->rws_n == p->net.nodes && ws->rws_dim == p->dim &&
        ws->rws_features == p->res.features)
        return CX_OK;
    cx_res_ws_free(&ws->rws);
    CX_TRY(cx_res_ws_alloc(&ws->rws, p->net.nodes, p->dim, p->res.features));
    ws->rws_n = p->net.nodes;
    ws->rws_dim = p->dim;
    ws->rws_features = p->res.features;
done:
    return rc;
}

static void assemble(const cx_cell_ws *ws, const cx_cell_params *p, cx_reservoir *res)
{
    memset(res, 0, sizeof *res);
    res->n = p->net.nodes;
    res->dim = p->dim;
    res->model = p->res.model;
    res->features = p->res.features;
    res->rate = p->res.rate;
    res->leak = p->res.leak;
    res->input_scaling = p->res.input_scaling;
    res->tanh_mode = p->res.tanh_mode;
    res->m = &ws->m;
    res->w_in = ws->w_in;
    res->bias = p->res.bias > 0.0 ? ws->bias : NULL;
}

/* Stage 3: open-loop drive of every task with its Gram sums, keyed by the drive key. */
static int stage_drive(cx_cell_ws *ws, const cx_cell_params *p, const cx_reservoir *res,
                       cx_cell_timing *t)
{
    int rc = CX_OK;
    uint64_t key = cx_cell_drive_key(p);
    if (ws->have_drive && ws->drive_key == key)
        return CX_OK;
    free_drive(ws);
    cx_idx n = p->net.nodes;
    cx_idx nf = cx_features_count(p->res.features, n);
    int dim = p->dim;
    for (int k = 0; k < p->ntasks; k++) {
        CX_CALLOC(ws->g[k], nf * nf);
        CX_CALLOC(ws->c[k], nf * dim);
        CX_CALLOC(ws->r_end[k], n);
    }
    CX_ALLOC(ws->work, nf * nf + nf * dim);
    double t0 = cx_clock_mono(), g0 = cx_res_ws_gram_seconds(ws->rws);
    for (int k = 0; k < p->ntasks; k++)
        CX_TRY(cx_res_drive(ws->rws, res, ws->series[k], p->train.dt, ws->wash, ws->train,
                            p->train.stride, ws->r_end[k], ws->g[k], ws->c[k]));
    ws->drive_node_steps += (int64_t)p->ntasks * (int64_t)(ws->wash + ws->train) * (int64_t)n;
    t->drive = cx_clock_mono() - t0;
    t->gram = cx_res_ws_gram_seconds(ws->rws) - g0;
    ws->nfeat = nf;
    ws->features = p->res.features;
    ws->drive_key = key;
    ws->have_drive = 1;
    ws->counts.drives++;
done:
    if (rc != CX_OK)
        free_drive(ws);
    return rc;
}

static void blend_weights(const cx_cell_params *p, double *w)
{
    int k = p->ntasks;
    for (int i = 0; i < k; i++) {
        if (p->train.weights_listed)
            w[i] = p->train.weights[i];
        else if (k == 2)
            w[i] = i == 0 ? p->train.blend : 1.0 - p->train.blend;
        else
            w[i] = 1.0 / (double)k;
    }
}

/* Room for the readouts of a group (CX_CELL_GROUP of them, nfeat x dim each) and its scalings
 * of M (CX_CELL_GROUP x nnz). Not freed with the drive: the cells of a group can have drives of
 * their own (spectral radius, tasks, washout) and each readout must outlive the next cell's
 * drive. */
static int ensure_readouts(cx_cell_ws *ws)
{
    int rc = CX_OK;
    const cx_idx need = CX_CELL_GROUP * ws->nfeat * ws->dim;
    CX_RESERVE(ws->w_out, ws->w_out_cap, need);
    const cx_idx nval = CX_CELL_GROUP * (ws->m0.nnz > 0 ? ws->m0.nnz : 1);
    CX_RESERVE(ws->group_val, ws->group_val_cap, nval);
done:
    return rc;
}

/* Buffers for nruns closed-loop runs (the runs of a whole group). */
static int ensure_run_buffers(cx_cell_ws *ws, const cx_cell_params *p, int nruns)
{
    int rc = CX_OK;
    cx_idx len = (ws->horizon + 1) * p->dim;
    if (ws->y_cap < (cx_idx)nruns * len) {
        free(ws->y);
        ws->y = NULL;
        ws->y_cap = 0;
        free(ws->truth);
        ws->truth = NULL;
        CX_ALLOC(ws->y, (cx_idx)nruns * len);
        CX_ALLOC(ws->truth, len);
        ws->y_cap = (cx_idx)nruns * len;
    }
    CX_RESERVE(ws->run_r, ws->run_r_cap, (cx_idx)nruns * p->net.nodes);
    if (ws->run_ptr_cap < nruns) {
        free(ws->run_ptr);
        free(ws->run_w);
        free(ws->run_lim);
        free(ws->run_val);
        free(ws->steps_done);
        free(ws->settled_at);
        ws->run_ptr = NULL;
        ws->run_w = NULL;
        ws->run_lim = NULL;
        ws->run_val = NULL;
        ws->steps_done = ws->settled_at = NULL;
        ws->run_ptr_cap = 0;
        CX_ALLOC(ws->run_ptr, 2 * (cx_idx)nruns);
        CX_ALLOC(ws->run_w, nruns);
        CX_ALLOC(ws->run_lim, nruns);
        CX_ALLOC(ws->run_val, nruns);
        CX_ALLOC(ws->steps_done, nruns);
        CX_ALLOC(ws->settled_at, nruns);
        ws->run_ptr_cap = nruns;
    }
    /* closed-loop runs advanced together as one block (cx_res_probe_batch): enough to share each
     * pass over M among several runs, few enough that the n x B blocks stay in the outer caches;
     * results do not depend on it (bit for bit) */
    const int batch = cx_res_batch_runs(p->res.tanh_mode);
    CX_TRY(cx_res_ws_set_batch(ws->rws, nruns < batch ? nruns : batch));
    if (ws->cws == NULL || ws->cws_cap < ws->horizon + 1 || ws->cws_dim != p->dim) {
        cx_class_ws_free(&ws->cws);
        CX_TRY(cx_class_ws_alloc(&ws->cws, ws->horizon + 1, p->dim));
        ws->cws_cap = ws->horizon + 1;
        ws->cws_dim = p->dim;
    }
    if (ws->keep) {
        cx_idx need = (cx_idx)nruns * len;
        if (ws->kept_cap < need) {
            free(ws->kept_y);
            free(ws->kept_start);
            ws->kept_y = ws->kept_start = NULL;
            ws->kept_cap = 0;
            CX_ALLOC(ws->kept_y, need);
            CX_ALLOC(ws->kept_start, (cx_idx)nruns * p->net.nodes);
            ws->kept_cap = need;
        }
    }
done:
    return rc;
}

/* The start state of run j: the end of task j's training, or a random start. */
static int run_start(cx_cell_ws *ws, const cx_cell_params *p, const cx_reservoir *res, int j,
                     double *r)
{
    int rc = CX_OK;
    cx_idx n = p->net.nodes;
    if (j < p->ntasks) {
        memcpy(r, ws->r_end[j], (size_t)n * sizeof *r);
        return CX_OK;
    }
    uint64_t coords[3] = {p->replicate, (uint64_t)n, (uint64_t)(j - p->ntasks)};
    cx_rng rng;
    cx_rng_keyed(&rng, p->study_seed, CX_RNG_PROBE_START, coords, 3);
    if (p->probe.start_mode == CX_START_BOX) {
        for (cx_idx i = 0; i < n; i++)
            r[i] = cx_rng_range(&rng, -p->probe.start_box, p->probe.start_box);
    } else {
        double pt[CX_MAX_DIM], lo[CX_MAX_DIM], hi[CX_MAX_DIM];
        const double *sig[CX_MAX_TASKS];
        cx_idx len[CX_MAX_TASKS];
        for (int k = 0; k < p->ntasks; k++) {
            sig[k] = ws->training[k];
            len[k] = ws->train + 1;
        }
        cx_class_box(sig, len, p->ntasks, p->dim, 1.0, lo, hi);
        for (int d = 0; d < p->dim; d++)
            pt[d] = cx_rng_range(&rng, lo[d], hi[d]);
        memset(r, 0, (size_t)n * sizeof *r);
        const cx_idx steps = cx_cell_steps(p->probe.drive_time, p->train.dt);
        CX_TRY(cx_res_drive_constant(ws->rws, res, pt, p->train.dt, steps, r));
        ws->drive_node_steps += (int64_t)steps * (int64_t)n;
    }
done:
    return rc;
}

static double frobenius(const double *a, cx_idx rows, cx_idx cols, cx_idx ld, cx_idx first_col)
{
    double s = 0.0;
    for (cx_idx f = first_col; f < first_col + cols; f++)
        for (cx_idx j = 0; j < rows; j++)
            s += a[j + f * ld] * a[j + f * ld];
    return sqrt(s);
}

static void result_init(cx_cell_result *out, const cx_cell_params *p, cx_idx cell)
{
    memset(out, 0, sizeof *out);
    out->cell = cell;
    out->status = CX_CELL_NOT_DONE;
    out->ntasks = p->ntasks;
    out->nruns = p->ntasks + p->probe.random_starts;
    out->rho_unscaled = NAN;
    out->wout_norm = NAN;
    out->wout_square_norm = NAN;
    for (int j = 0; j < CX_MAX_RUNS; j++) {
        cx_run_metrics *m = &out->runs[j];
        m->outcome = CX_OUT_NOT_RUN;
        m->attractor = -1;
        for (int k = 0; k < CX_MAX_TASKS; k++)
            m->distance[k] = NAN;
        m->coverage = m->roundness = m->rotation = m->period = NAN;
        m->valid_time = m->lyapunov = m->stop_time = NAN;
        m->cluster = -1;
    }
}

/* Two cells have the same start states when they differ at most in their readout's parameters
 * (blend, weights, ridge): then network, input, drive, bound box and early-stop test are the
 * same too. Compared as bytes of the parameters with those fields made equal (cx_study_bind
 * zero-initialises the structure, padding included). */
static int same_but_readout(const cx_cell_params *a, const cx_cell_params *b)
{
    cx_cell_params t;
    memcpy(&t, b, sizeof t);
    t.train.blend = a->train.blend;
    t.train.weights_listed = a->train.weights_listed;
    memcpy(t.train.weights, a->train.weights, sizeof t.train.weights);
    t.train.ridge = a->train.ridge;
    return memcmp(&t, a, sizeof t) == 0;
}

/* Two cells can share the closed-loop block when they share the network, the input, the
 * reservoir settings but the spectral radius, the time step, the probe settings and the number
 * of tasks, whatever their spectral radius, tasks, training (washout, length, stride, readout)
 * and classifier settings, as the cells of a spectral-radius, overlap or washout axis. Each run
 * keeps its cell's scaling of M, readout, start, bound box and early-stop test
 * (cx_res_probe_batch takes them per run). */
static int same_block(const cx_cell_params *a, const cx_cell_params *b)
{
    cx_cell_params t;
    memcpy(&t, b, sizeof t);
    t.res.spectral_radius = a->res.spectral_radius;
    memcpy(t.tasks, a->tasks, sizeof t.tasks);
    const double dt = t.train.dt;
    t.train = a->train;
    t.train.dt = dt;
    t.cls = a->cls;
    return memcmp(&t, a, sizeof t) == 0;
}

/* Stages 1-4 of one cell: network, input, signals, drive (all cached) and its own readout into
 * readout slot `slot`. A readout that cannot be solved is a status in *r, not an error. */
static int cell_solve(cx_cell_ws *ws, const cx_cell_params *p, cx_cell_result *r, cx_reservoir *res,
                      int slot)
{
    int rc = CX_OK;
    double t0 = cx_clock_mono();
    CX_REQUIRE(p->ntasks >= 1 && p->ntasks <= CX_MAX_TASKS, CX_ERR_INVALID,
               "a cell needs 1 to %d tasks, got %d", CX_MAX_TASKS, p->ntasks);
    CX_REQUIRE(r->nruns <= CX_MAX_RUNS, CX_ERR_INVALID, "a cell has at most %d runs, got %d",
               CX_MAX_RUNS, r->nruns);
    CX_TRY(stage_network(ws, p));
    CX_TRY(stage_input(ws, p));
    r->time.network = cx_clock_mono() - t0;
    r->rho_unscaled = ws->rho0;
    CX_TRY(stage_series(ws, p));
    CX_TRY(ensure_res_ws(ws, p));
    assemble(ws, p, res);
    CX_TRY(stage_drive(ws, p, res, &r->time));
    CX_TRY(ensure_readouts(ws));
    double *w_out = ws->w_out + (cx_idx)slot * ws->nfeat * p->dim;

    /* Stage 4: the blended readout (into readout slot `slot`). */
    t0 = cx_clock_mono();
    double w[CX_MAX_TASKS];
    const double *g[CX_MAX_TASKS], *c[CX_MAX_TASKS];
    blend_weights(p, w);
    for (int k = 0; k < p->ntasks; k++) {
        g[k] = ws->g[k];
        c[k] = ws->c[k];
    }
    int solve_status = CX_SOLVE_OK;
    CX_TRY(cx_readout_solve(ws->nfeat, p->dim, p->ntasks, g, c, w, p->train.ridge, ws->work, w_out,
                            &solve_status));
    ws->counts.solves++;
    r->time.solve = cx_clock_mono() - t0;
    if (solve_status != CX_SOLVE_OK) {
        r->status =
            solve_status == CX_SOLVE_NOT_PD ? CX_CELL_FAILED_NOT_PD : CX_CELL_FAILED_NONFINITE;
        return CX_OK;
    }
    r->wout_norm = frobenius(w_out, p->dim, ws->nfeat, p->dim, 0);
    if (p->res.features != CX_FEAT_LINEAR)
        r->wout_square_norm = frobenius(w_out, p->dim, p->net.nodes, p->dim, p->net.nodes);
done:
    return rc;
}

/* What the closed-loop runs of a cell are judged by: the bound box, the early-stop test, the
 * tail and the trained attractors (those of the series staged last: stage_series first). */
typedef struct probe_setup {
    double lo[CX_MAX_DIM], hi[CX_MAX_DIM];
    cx_res_settle settle;
    cx_idx n_tail;
    const cx_attractor *atts[CX_MAX_TASKS];
    double big_s;
} probe_setup;

static void probe_setup_of(const cx_cell_ws *ws, const cx_cell_params *p, probe_setup *ps)
{
    const double *train_sig[CX_MAX_TASKS];
    cx_idx train_len[CX_MAX_TASKS];
    for (int k = 0; k < p->ntasks; k++) {
        train_sig[k] = ws->training[k];
        train_len[k] = ws->train + 1;
    }
    cx_class_box(train_sig, train_len, p->ntasks, p->dim, p->cls.bound, ps->lo, ps->hi);
    ps->n_tail = cx_cell_steps(p->probe.tail, p->train.dt);
    ps->big_s = 0.0;
    for (int k = 0; k < p->ntasks; k++) {
        ps->atts[k] = ws->att[k];
        ps->big_s += cx_attractor_scale(ws->att[k]) / (double)p->ntasks;
    }
    /* Early stop on a fixed point: the run must stand still for one whole tail, every step
     * moving the state by at most 1e-11 (max norm; states are O(1)) and the output by at most
     * 1e-6 of the fixed-point threshold fixed_tol * S (S as in the classifier). The tail at the
     * stop is then a fixed point by the classifier's own test with a margin of 1e6 / n_tail, and
     * the settled output fills the rest of the run. Tolerances: our choice, no published source. */
    ps->settle.window = 0;
    ps->settle.state_step = ps->settle.output_step = 0.0;
    if (p->probe.early_stop) {
        ps->settle.window = ps->n_tail;
        ps->settle.state_step = 1e-11;
        ps->settle.output_step = 1e-6 * p->cls.fixed_tol * ps->big_s;
    }
}

/* Classify the runs of one cell (outputs in run_y, end states in run_state) and finish *r. */
static int cell_judge(cx_cell_ws *ws, const cx_cell_params *p, const cx_reservoir *res,
                      const probe_setup *ps, const double *w_out, double *const *run_state,
                      double *const *run_y, const cx_idx *steps_done, const cx_idx *settled_at,
                      cx_cell_result *r)
{
    int rc = CX_OK;
    const cx_idx len = (ws->horizon + 1) * p->dim;
    double tail_centre[CX_MAX_RUNS][CX_MAX_DIM], tail_amp[CX_MAX_RUNS];
    for (int j = 0; j < r->nruns; j++) {
        cx_run_metrics *m = &r->runs[j];
        ws->counts.probes++;
        if (settled_at[j] >= 0)
            ws->settled++;
        ws->probe_node_steps += (int64_t)steps_done[j] * (int64_t)p->net.nodes;
        double t0 = cx_clock_mono();
        cx_idx n_total = steps_done[j] + 1;
        cx_idx tail = ps->n_tail < n_total ? ps->n_tail : n_total;
        const double *tr = NULL;
        if (j < p->ntasks) {
            /* the true continuation from the end of training, at whole steps */
            const double *src = ws->series[j] + ws->sub * (ws->wash + ws->train) * p->dim;
            for (cx_idx i = 0; i < n_total; i++)
                for (int d = 0; d < p->dim; d++)
                    ws->truth[i * p->dim + d] = src[ws->sub * i * p->dim + d];
            tr = ws->truth;
        }
        CX_TRY(cx_classify_run(ws->cws, &p->cls, ps->atts, p->ntasks, ps->lo, ps->hi, run_y[j],
                               n_total, tail, p->dim, p->train.dt, j < p->ntasks ? j : -1, tr, m));
        cx_cell_tail_shape(run_y[j], n_total, tail, p->dim, tail_centre[j], &tail_amp[j]);
        if (p->probe.lyapunov && m->outcome != CX_OUT_DIVERGED) {
            cx_rng rng;
            uint64_t coords[3] = {p->replicate, (uint64_t)p->net.nodes, (uint64_t)j};
            cx_rng_keyed(&rng, p->study_seed, CX_RNG_LYAPUNOV, coords, 3);
            CX_TRY(cx_res_lyapunov(ws->rws, res, w_out, p->train.dt,
                                   cx_cell_steps(p->probe.lyapunov_time, p->train.dt), 1e-8, &rng,
                                   run_state[j], &m->lyapunov));
        }
        r->time.classify += cx_clock_mono() - t0;
        if (ws->keep) {
            memcpy(ws->kept_y + (cx_idx)j * len, run_y[j],
                   (size_t)(n_total * p->dim) * sizeof *ws->y);
            ws->kept_len[j] = n_total;
        }
    }
    r->status = CX_CELL_COMPUTED;
    r->multifunctional = 1;
    for (int k = 0; k < p->ntasks; k++)
        if (r->runs[k].outcome != CX_OUT_RECONSTRUCTED)
            r->multifunctional = 0;
    /* Distinct untrained attractors: centres and amplitudes within match_tol * S, periods
     * within 5 % (src/cell/untrained.c). */
    cx_cell_cluster_untrained(r, (const double(*)[CX_MAX_DIM])tail_centre, tail_amp, p->dim,
                              ps->big_s, p->cls.match_tol, 0.05);
done:
    return rc;
}

int cx_cell_compute_group(cx_cell_ws *ws, const cx_cell_params *const *p, const cx_idx *cells,
                          int k, cx_cell_result *out, int *used)
{
    int rc = CX_OK;
    double t_start = cx_clock_mono();
    cx_reservoir res;
    CX_REQUIRE(k >= 1 && p != NULL && cells != NULL && out != NULL && used != NULL, CX_ERR_INVALID,
               "cell group: %d cells or a NULL argument", k);
    /* The leading cells of p[0]'s block group (never more than CX_CELL_GROUP, and one at a time
     * when a dump is kept). */
    int ng = 1;
    if (!ws->keep)
        while (ng < k && ng < CX_CELL_GROUP && same_block(p[0], p[ng]))
            ng++;
    *used = ng;
    for (int g = 0; g < ng; g++)
        result_init(&out[g], p[g], cells[g]);

    /* Stages 1-4 cell by cell, each cell's run starts taken right after its drive (the end
     * states of its training, or random starts, which cells differing only in their readout
     * share), with its bound box and early-stop test. */
    const int nruns = out[0].nruns;
    probe_setup ps[CX_CELL_GROUP];
    cx_res_limits lim[CX_CELL_GROUP];
    double **run_state = NULL, **run_y = NULL;
    const double **run_w = NULL;
    const cx_res_limits **run_lim = NULL;
    const double **run_val = NULL;
    const double *val_of[CX_CELL_GROUP]; /* each cell's values of M (shared by equal scalings) */
    double scale_of[CX_CELL_GROUP];
    int q = 0, prev = -1; /* runs set up so far; the last cell whose readout was solved */
    for (int g = 0; g < ng; g++) {
        CX_TRY(cell_solve(ws, p[g], &out[g], &res, g));
        if (g == 0) {
            CX_TRY(ensure_run_buffers(ws, p[0], ng * nruns));
            run_state = ws->run_ptr;
            run_y = ws->run_ptr + ng * nruns;
            run_w = ws->run_w;
            run_lim = ws->run_lim;
            run_val = ws->run_val;
        }
        if (out[g].status != CX_CELL_NOT_DONE)
            continue;
        const double t0 = cx_clock_mono();
        /* this cell's M (stage_input scaled it), kept for the block: the slot of an earlier cell
         * with the same scaling, else its own copy */
        val_of[g] = NULL;
        scale_of[g] = ws->m_scale;
        for (int h = 0; h < g && val_of[g] == NULL; h++)
            if (out[h].status == CX_CELL_NOT_DONE && scale_of[h] == ws->m_scale)
                val_of[g] = val_of[h];
        if (val_of[g] == NULL) {
            double *slot = ws->group_val + (cx_idx)g * (ws->m0.nnz > 0 ? ws->m0.nnz : 1);
            memcpy(slot, ws->m.val, (size_t)ws->m.nnz * sizeof *slot);
            val_of[g] = slot;
        }
        probe_setup_of(ws, p[g], &ps[g]);
        lim[g] = (cx_res_limits){ps[g].lo, ps[g].hi, ps[g].settle};
        const cx_idx n = p[g]->net.nodes;
        const cx_idx len = (ws->horizon + 1) * p[g]->dim;
        for (int j = 0; j < nruns; j++, q++) {
            run_state[q] = ws->run_r + (cx_idx)q * n;
            if (prev >= 0 && same_but_readout(p[prev], p[g]))
                memcpy(run_state[q], run_state[q - nruns], (size_t)n * sizeof *ws->r);
            else
                CX_TRY(run_start(ws, p[g], &res, j, run_state[q]));
            if (ws->keep)
                memcpy(ws->kept_start + (cx_idx)j * n, run_state[q], (size_t)n * sizeof *ws->r);
            run_y[q] = ws->y + (cx_idx)q * len;
            run_w[q] = ws->w_out + (cx_idx)g * ws->nfeat * p[g]->dim;
            run_lim[q] = &lim[g];
            run_val[q] = val_of[g];
        }
        prev = g;
        out[g].time.probes = cx_clock_mono() - t0;
    }
    const int total = q;
    if (total == 0)
        goto finish;

    /* Stage 5: the runs of all cells whose readout was solved, advanced together in blocks of
     * cx_res_batch_runs (bit for bit what one run at a time gives), then each cell judged
     * against its own M, series and attractors (staged again: the caches hold one cell's). */
    double t0 = cx_clock_mono();
    const int batch = cx_res_batch_runs(p[0]->res.tanh_mode);
    for (int j = 0; j < total; j += batch) {
        int nb = total - j < batch ? total - j : batch;
        CX_TRY(cx_res_probe_batch(ws->rws, &res, run_w + j, run_val + j, p[0]->train.dt,
                                  ws->horizon, run_lim + j, nb, run_state + j, run_y + j,
                                  ws->steps_done + j, ws->settled_at + j));
    }
    /* the block's time, shared out over the cells by their runs (all cells have as many) */
    const double t_probe = (cx_clock_mono() - t0) / (double)(total / nruns);
    q = 0;
    for (int g = 0; g < ng; g++) {
        if (out[g].status != CX_CELL_NOT_DONE)
            continue;
        out[g].time.probes += t_probe;
        /* its M (for the Lyapunov exponent), series and attractors */
        CX_TRY(stage_input(ws, p[g]));
        CX_TRY(stage_series(ws, p[g]));
        probe_setup_of(ws, p[g], &ps[g]);
        CX_TRY(cell_judge(ws, p[g], &res, &ps[g], run_w[q], run_state + q, run_y + q,
                          ws->steps_done + q, ws->settled_at + q, &out[g]));
        q += nruns;
    }
finish:
    /* each cell's total: its own stages plus its share of the group's common time */
    {
        const double t_all = cx_clock_mono() - t_start;
        double own = 0.0;
        for (int g = 0; g < ng; g++)
            own += out[g].time.network + out[g].time.drive + out[g].time.solve +
                   out[g].time.probes + out[g].time.classify;
        for (int g = 0; g < ng; g++)
            out[g].time.total = out[g].time.network + out[g].time.drive + out[g].time.solve +
                                out[g].time.probes + out[g].time.classify +
                                (t_all > own ? (t_all - own) / (double)ng : 0.0);
    }
done:
    return rc;
}

int cx_cell_compute(cx_cell_ws *ws, const cx_cell_params *p, cx_idx cell, cx_cell_result *out)
{
    int used = 0;
    const cx_cell_params *pp[1] = {p};
    return cx_cell_compute_group(ws, pp, &cell, 1, out, &used);
}
