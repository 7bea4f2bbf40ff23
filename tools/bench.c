/* coexist benchmark: the cost of the stepping kernels, the Gram stage and whole cells on one core,
 * beside a NumPy/SciPy script computing the same cells (tools/bench_numpy.py), and the least time
 * an RK4 step could take on this machine.
 *
 *   coexist-bench [--quick | --kernels] [--json FILE] [--numpy-cells K]
 *
 * 1. Kernels: drive (open loop, no Gram) and probe (closed loop) steps of an N-node network with
 *    each tanh evaluation (libm, SLEEF, our own expm1-based one), in ns per node per RK4 stage;
 * tanh alone per element; dgemm (1000^3) and dsyrk (2N features, the drive's block and a long
 * block) rates.
 * 2. Bound: one RK4 step of the probe costs 4 stages x (2 nnz + 2 N dim + 2 nfeat dim + 8 N)
 *    flops plus 4 N tanh (the drive the same without the readout term); at the dgemm rate and
 *    the best tanh rate measured here that is the least time a step could take (a roofline-
 *    style bound: Williams, Waterman & Patterson 2009, Commun. ACM 52(4), 65). Printed as
 *    achieved / bound.
 * 3. Sweep: the benchmark sweep (generated here: nodes 1000 and 500, two limit cycles of our own,
 *    10^4 training samples per task, dt 0.01, two closed-loop runs of 1000 time units, 9 blend
 *    values x 2 spectral radii x 2 seeds) in grid order in one workspace, seconds per stage and
 *    cells per core-second (process CPU time, the fair measure on a shared machine); then K
 *    sample cells spread over the grid by the NumPy script, and the ratio of CPU seconds per
 *    cell. Then the sweep as it would run with every drive and probe step it took (early stops
 *    included) at the bound of part 2 and the other stages as measured, and the largest ratio to
 *    the NumPy script that this allows: what faster kernels alone could reach.
 * --quick: a reduced sweep and shorter runs for a smoke run of well under a minute. --kernels:
 * parts 1 and 2 only, at both sizes (15 s to a minute). Timings are
 * wall clock on a shared machine: compare ratios measured in one run, not absolute figures.
 * Everything runs on one core: BLAS on one thread, here and in the NumPy script.
 */
#define _POSIX_C_SOURCE 200809L
#include <cblas.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/clock.h"
#include "coexist/cell.h"
#include "coexist/error.h"
#include "coexist/reservoir.h"
#include "coexist/rng.h"
#include "coexist/study.h"
#include "cell/cell_impl.h"
#include "reservoir/reservoir_impl.h"

/* OpenBLAS's own declaration (cblas.h of some versions lacks it) */
void openblas_set_num_threads(int num_threads);

#ifndef CX_SOURCE_DIR
#define CX_SOURCE_DIR "."
#endif

/* The two tasks and fixed settings of the benchmark sweep (our own scenario). */
static const char *const sweep_fmt =
    "study: {name: bench-pair, seed: 4127}\n"
    "reservoir: {mean_degree: 3, rate: 5.0, input_scaling: 0.12, tanh: %s}\n"
    "tasks:\n"
    "  - {kind: cycle, name: tight, centre: [-0.9, 0.1], radius: 1.0, speed: 2.1}\n"
    "  - {kind: cycle, name: broad, centre: [1.1, -0.2], radius: 1.7, ellipticity: 0.75,"
    " speed: -1.2}\n"
    "training: {dt: 0.01, washout: 10, length: 100, ridge: 1.0e-4}\n"
    "probe: {horizon: %g, tail: %g, random_starts: 0, early_stop: %s}\n"
    "axes:\n"
    "  reservoir.nodes: %s\n"
    "  seed: {count: %d}\n"
    "  reservoir.spectral_radius: [0.4, 1.1]\n"
    "  training.blend: {from: 0.1, to: 0.9, count: %d}\n";

/* One axis of 8 cells at one seed and N = 1000, no blend axis: the broad cycle's radius (how far
 * it reaches into the tight one; a task axis) or the spectral radius. Every cell has its own
 * drive; their closed-loop runs can share one block (cx_cell_compute_group). */
#define CX_BENCH_AXES 2
static const char *const axis_what[CX_BENCH_AXES] = {"task axis", "spectral-radius axis"};
static const char *const axis_json[CX_BENCH_AXES] = {"task_axis", "spectral_radius_axis"};
static const char *const axis_line[CX_BENCH_AXES] = {
    "tasks.broad.radius: {from: 1.3, to: 2.0, count: 8}",
    "reservoir.spectral_radius: {from: 0.4, to: 1.5, count: 8}"};
static const char *const axis_fmt =
    "study: {name: bench-reach, seed: 4127}\n"
    "reservoir: {nodes: 1000, mean_degree: 3, rate: 5.0, input_scaling: 0.12, "
    "spectral_radius: 1.1, tanh: expm1}\n"
    "tasks:\n"
    "  - {kind: cycle, name: tight, centre: [-0.9, 0.1], radius: 1.0, speed: 2.1}\n"
    "  - {kind: cycle, name: broad, centre: [1.1, -0.2], radius: 1.7, ellipticity: 0.75,"
    " speed: -1.2}\n"
    "training: {dt: 0.01, washout: 10, length: 100, ridge: 1.0e-4, blend: 0.5}\n"
    "probe: {horizon: %g, tail: %g, random_starts: 0, early_stop: true}\n"
    "axes:\n"
    "  %s\n";

typedef struct options {
    int quick;
    int kernels_only;
    const char *json;
    int numpy_cells;
} options;

/* The tanh evaluations compared (enum cx_tanh order) and the one of the fast paths. */
#define CX_BENCH_TANHS 3
static const char *const tanh_names[CX_BENCH_TANHS] = {"libm", "vector", "expm1"};
#define CX_BENCH_FAST CX_TANH_EXPM1

/* The network sizes of the kernel figures and of the sweep. */
#define CX_BENCH_SIZES 2
static const cx_idx bench_sizes[CX_BENCH_SIZES] = {1000, 500};

/* Block sizes of the batched probe figures. */
#define CX_BENCH_NB 5
static const int bench_nb[CX_BENCH_NB] = {1, 2, 4, 8, 16};

typedef struct kernel_figs {
    cx_idx n;
    double drive[CX_BENCH_TANHS]; /* ns per node per RK4 stage, by enum cx_tanh */
    double probe[CX_BENCH_TANHS];
    double probe_batch[CX_BENCH_NB];  /* fast tanh, B runs per block (bench_nb), per node per run */
    double probe_batch4[CX_BENCH_NB]; /* the same with the vectors capped at 4 lanes (AVX2) */
    int lanes;                        /* the widest vector the kernels use here */
    int hwgather;                     /* 8 lanes: the gather instruction chosen (rows.c) */
    double drive_gather[2];           /* fast tanh, drive with scalar loads / the instruction */
    double tanh_ns[CX_BENCH_TANHS];   /* ns per element */
    double dgemm;                     /* GFLOP/s */
    double dsyrk_block, dsyrk_long;
    double gram;                     /* GFLOP/s through cx_res_drive */
    double drive_bound, probe_bound; /* ns per node per stage */
} kernel_figs;

typedef struct sweep_figs {
    cx_idx cells;
    double network, drive, gram, solve, probes, classify, total;
    double cpu; /* CPU seconds of the whole sweep */
    double gram_gflops;
    int64_t runs, settled;
    /* stepping work by network size (bench_sizes), RK4 steps x nodes (cx_cell_ws_steps) */
    int64_t drive_steps[CX_BENCH_SIZES], probe_steps[CX_BENCH_SIZES];
    int64_t outcomes[8];
    int labels_same;
    double numpy_per_cell, numpy_drive, numpy_gram, numpy_probes, numpy_total, numpy_cpu;
    double numpy_cpu_per_cell;
    double coexist_same_cells;
    int numpy_done;
} sweep_figs;

/* An axis sweep computed twice with the fast paths: cells sharing a block grouped, and one cell
 * at a time (each cell's two runs as one block). */
typedef struct task_figs {
    cx_idx cells;
    double probes[2], cpu[2]; /* [0] grouped, [1] one cell at a time */
    int labels_same;
} task_figs;

static void random_csr(cx_idx n, int deg, double scale, cx_rng *rng, cx_csr *m, cx_idx *rowptr,
                       cx_idx *col, double *val)
{
    m->n = n;
    m->nnz = n * deg;
    m->rowptr = rowptr;
    m->col = col;
    m->val = val;
    for (cx_idx i = 0; i <= n; i++)
        rowptr[i] = i * deg;
    for (cx_idx p = 0; p < n * deg; p++) {
        col[p] = (cx_idx)cx_rng_range(rng, 0.0, (double)n - 1e-9);
        val[p] = cx_rng_range(rng, -scale, scale);
    }
}

static double time_tanh(int mode, double *x, const double *src, cx_idx n, int reps)
{
    double best = INFINITY;
    for (int rep = 0; rep < 5; rep++) {
        double t0 = cx_clock_mono();
        for (int k = 0; k < reps; k++) {
            memcpy(x, src, (size_t)n * sizeof *x);
            cx_res_tanh(mode, x, n);
        }
        double t = (cx_clock_mono() - t0) / ((double)reps * (double)n);
        best = t < best ? t : best;
    }
    return 1e9 * best;
}

static double gflops_dgemm(void)
{
    const int n = 1000;
    const size_t nn = (size_t)n * (size_t)n;
    double *a = malloc(nn * sizeof *a), *b = malloc(nn * sizeof *b), *c = calloc(nn, sizeof *c);
    double best = 0.0;
    if (a != NULL && b != NULL && c != NULL) {
        for (int i = 0; i < n * n; i++)
            a[i] = b[i] = 1e-3 * (double)(i % 977);
        for (int rep = 0; rep < 3; rep++) {
            double t0 = cx_clock_mono();
            cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, n, n, 1.0, a, n, b, n, 0.0, c,
                        n);
            double g = 2.0 * n * (double)n * n / (cx_clock_mono() - t0) * 1e-9;
            best = g > best ? g : best;
        }
    }
    free(c);
    free(b);
    free(a);
    return best;
}

static double gflops_dsyrk(int nf, int k, int reps)
{
    double *q = malloc((size_t)nf * (size_t)k * sizeof *q);
    double *g = calloc((size_t)nf * (size_t)nf, sizeof *g);
    double best = 0.0;
    if (q != NULL && g != NULL) {
        for (long i = 0; i < (long)nf * k; i++)
            q[i] = 1e-3 * (double)(i % 991);
        for (int rep = 0; rep < 3; rep++) {
            double t0 = cx_clock_mono();
            for (int r = 0; r < reps; r++)
                cblas_dsyrk(CblasColMajor, CblasUpper, CblasNoTrans, nf, k, 1.0, q, nf, 1.0, g, nf);
            double flops = (double)reps * (double)nf * (nf + 1.0) * k;
            double gf = flops / (cx_clock_mono() - t0) * 1e-9;
            best = gf > best ? gf : best;
        }
    }
    free(g);
    free(q);
    return best;
}

static int kernels(cx_idx n, int quick, kernel_figs *kf)
{
    int rc = CX_OK;
    const int dim = 2, deg = 3;
    const cx_idx nf = 2 * n;
    cx_idx *rowptr = NULL, *col = NULL;
    double *val = NULL, *win = NULL, *wout = NULL, *r = NULL, *u = NULL, *g = NULL, *c = NULL,
           *x = NULL;
    cx_res_ws *ws = NULL;
    cx_rng rng;
    cx_rng_seed(&rng, 90211, 7);
    CX_ALLOC(rowptr, n + 1);
    CX_ALLOC(col, n * deg);
    CX_ALLOC(val, n * deg);
    CX_ALLOC(win, n * dim);
    CX_ALLOC(wout, nf * dim);
    CX_ALLOC(r, n);
    CX_ALLOC(x, n);
    cx_csr m;
    random_csr(n, deg, 0.6, &rng, &m, rowptr, col, val);
    for (cx_idx i = 0; i < n * dim; i++)
        win[i] = 0.0;
    for (cx_idx i = 0; i < n; i++)
        win[i * dim + (i % dim)] = cx_rng_range(&rng, -1.0, 1.0);
    for (cx_idx i = 0; i < nf * dim; i++)
        wout[i] = cx_rng_range(&rng, -2.0, 2.0) / (double)n;
    CX_TRY(cx_res_ws_alloc(&ws, n, dim, CX_FEAT_LINEAR_SQUARES));
    cx_reservoir res = {0};
    res.n = n;
    res.dim = dim;
    res.model = CX_MODEL_CONTINUOUS;
    res.features = CX_FEAT_LINEAR_SQUARES;
    res.rate = 5.0;
    res.input_scaling = 0.12;
    res.m = &m;
    res.w_in = win;
    const cx_idx steps = quick ? 400 : 2000;
    CX_ALLOC(u, (2 * steps + 1) * dim);
    for (cx_idx s = 0; s <= 2 * steps; s++) {
        u[s * dim] = cos(0.01 * (double)s);
        u[s * dim + 1] = sin(0.01 * (double)s);
    }
    const double per = 1e9 / ((double)steps * 4.0 * (double)n);
    for (int mode = 0; mode < CX_BENCH_TANHS; mode++) {
        res.tanh_mode = mode;
        double bd = INFINITY, bp = INFINITY;
        for (int rep = 0; rep < 3; rep++) {
            for (cx_idx i = 0; i < n; i++)
                r[i] = 0.0;
            double t0 = cx_clock_mono();
            CX_TRY(cx_res_drive(ws, &res, u, 0.01, steps, 0, 1, r, NULL, NULL));
            bd = fmin(bd, (cx_clock_mono() - t0) * per);
            cx_idx done_steps = 0;
            t0 = cx_clock_mono();
            CX_TRY(cx_res_probe(ws, &res, wout, 0.01, steps, NULL, NULL, r, NULL, &done_steps));
            bp = fmin(bp, (cx_clock_mono() - t0) * per);
        }
        kf->drive[mode] = bd;
        kf->probe[mode] = bp;
    }
    kf->hwgather = cx_res_gather_hw();
    kf->drive_gather[0] = kf->drive_gather[1] = NAN;
    for (int hw = 0; hw < 2 && cx_res_simd_lanes() == 8; hw++) {
        /* the one-run drive with each 8-lane gather, alternating */
        res.tanh_mode = CX_BENCH_FAST;
        double bd = INFINITY;
        for (int rep = 0; rep < 3; rep++) {
            const int old = cx_res_gather_force(hw);
            for (cx_idx i = 0; i < n; i++)
                r[i] = 0.0;
            double t0 = cx_clock_mono();
            rc = cx_res_drive(ws, &res, u, 0.01, steps, 0, 1, r, NULL, NULL);
            bd = fmin(bd, (cx_clock_mono() - t0) * per);
            cx_res_gather_force(old);
            CX_TRY(rc);
        }
        kf->drive_gather[hw] = bd;
    }
    {
        /* batched probes: B runs from the same start, per node per run per stage, at the widest
         * vector and again capped at 4 lanes */
        double *rb = NULL;
        CX_ALLOC(rb, n * 16);
        CX_TRY(cx_res_ws_set_batch(ws, 16));
        res.tanh_mode = CX_BENCH_FAST;
        kf->lanes = cx_res_simd_lanes();
        for (int q = 0; q < 2 * CX_BENCH_NB && rc == CX_OK; q++) {
            const int nb = bench_nb[q % CX_BENCH_NB];
            double *rs[16];
            cx_idx sd[16], sa[16];
            const double *wo[16];
            double best = INFINITY;
            const int old = cx_res_simd_limit(q < CX_BENCH_NB ? 8 : 4);
            for (int rep = 0; rep < 3 && rc == CX_OK; rep++) {
                for (int b = 0; b < nb; b++) {
                    rs[b] = rb + b * n;
                    wo[b] = wout;
                    for (cx_idx i = 0; i < n; i++)
                        rs[b][i] = 0.01 * (double)((i * 7 + b) % 13);
                }
                double t0 = cx_clock_mono();
                rc =
                    cx_res_probe_batch(ws, &res, wo, NULL, 0.01, steps, NULL, nb, rs, NULL, sd, sa);
                best = fmin(best, (cx_clock_mono() - t0) * per / (double)nb);
            }
            cx_res_simd_limit(old);
            if (q < CX_BENCH_NB)
                kf->probe_batch[q] = best;
            else
                kf->probe_batch4[q - CX_BENCH_NB] = best;
        }
        free(rb);
        CX_TRY(rc);
    }
    for (cx_idx i = 0; i < n; i++)
        r[i] = 2.5 * sin(0.37 * (double)i); /* pre-activations of the usual size */
    for (int mode = 0; mode < CX_BENCH_TANHS; mode++)
        kf->tanh_ns[mode] = time_tanh(mode, x, r, n, quick ? 200 : 2000);
    kf->dgemm = gflops_dgemm();
    kf->dsyrk_block = gflops_dsyrk((int)nf, 512, quick ? 2 : 6);
    kf->dsyrk_long = gflops_dsyrk((int)nf, 2048, quick ? 1 : 3);
    /* Gram through the drive: washout 0, every sample accumulated. */
    {
        const cx_idx gsteps = quick ? 1024 : 4096;
        double *ug = NULL;
        CX_ALLOC(ug, (2 * gsteps + 1) * dim);
        for (cx_idx s = 0; s <= 2 * gsteps; s++) {
            ug[s * dim] = cos(0.01 * (double)s);
            ug[s * dim + 1] = sin(0.01 * (double)s);
        }
        CX_CALLOC(g, nf * nf);
        CX_CALLOC(c, nf * dim);
        for (cx_idx i = 0; i < n; i++)
            r[i] = 0.0;
        res.tanh_mode = CX_BENCH_FAST;
        double g0 = cx_res_ws_gram_seconds(ws);
        rc = cx_res_drive(ws, &res, ug, 0.01, 0, gsteps, 1, r, g, c);
        double gs = cx_res_ws_gram_seconds(ws) - g0;
        free(ug);
        CX_TRY(rc);
        kf->gram =
            (double)gsteps * ((double)nf * ((double)nf + 1.0) + 2.0 * (double)nf * dim) / gs * 1e-9;
    }
    /* The bound, per node per stage. */
    const double ns_flop = 1.0 / kf->dgemm; /* ns per flop at the dgemm rate */
    double t_tanh = INFINITY;
    for (int mode = 0; mode < CX_BENCH_TANHS; mode++)
        t_tanh = fmin(t_tanh, kf->tanh_ns[mode]);
    const double drive_flops = 2.0 * deg + 2.0 * dim + 8.0;
    const double probe_flops = drive_flops + 2.0 * 2.0 * dim; /* 2 nfeat dim / n = 4 dim */
    kf->drive_bound = drive_flops * ns_flop + t_tanh;
    kf->probe_bound = probe_flops * ns_flop + t_tanh;
    kf->n = n;
done:
    free(c);
    free(g);
    free(u);
    cx_res_ws_free(&ws);
    free(x);
    free(r);
    free(wout);
    free(win);
    free(val);
    free(col);
    free(rowptr);
    return rc;
}

static int make_study(const options *o, const char *tanh_mode, const char *early, cx_study **s)
{
    char text[2048];
    int len = snprintf(text, sizeof text, sweep_fmt, tanh_mode, o->quick ? 100.0 : 1000.0,
                       o->quick ? 20.0 : 100.0, early, o->quick ? "[1000]" : "[1000, 500]",
                       o->quick ? 1 : 2, o->quick ? 3 : 9);
    return cx_study_load_buffer(text, (size_t)len, "bench-sweep", s);
}

/* Add one cell's stage times, labels and outcomes to the sweep figures. */
static void account(const cx_cell_params *p, const cx_cell_result *r, cx_idx cell, sweep_figs *sf,
                    int *labels, double *cell_seconds)
{
    sf->network += r->time.network;
    sf->drive += r->time.drive - r->time.gram;
    sf->gram += r->time.gram;
    sf->solve += r->time.solve;
    sf->probes += r->time.probes;
    sf->classify += r->time.classify;
    if (r->time.gram > 0.0) {
        double nf = 2.0 * (double)p->net.nodes;
        double samples = (double)p->ntasks * (double)cx_cell_steps(p->train.length, p->train.dt);
        sf->gram_gflops += samples * (nf * (nf + 1.0) + 4.0 * nf) * 1e-9;
    }
    cell_seconds[cell] = r->time.total;
    for (int j = 0; j < r->nruns; j++) {
        labels[cell * CX_MAX_RUNS + j] = r->status == CX_CELL_COMPUTED ? r->runs[j].outcome : -1;
        if (r->status == CX_CELL_COMPUTED && r->runs[j].outcome >= 0 && r->runs[j].outcome < 8)
            sf->outcomes[r->runs[j].outcome]++;
    }
    sf->runs += r->nruns;
}

/* Run every cell of the sweep in grid order, in groups of up to CX_CELL_GROUP cells as the
 * engine hands them to cx_cell_compute_group (group = 0: one cell at a time);
 * labels[cell * CX_MAX_RUNS + run] out. */
static int run_sweep(const cx_study *s, int group, sweep_figs *sf, int *labels,
                     double *cell_seconds)
{
    int rc = CX_OK;
    cx_cell_ws *ws = NULL;
    cx_cell_params p[CX_CELL_GROUP];
    cx_cell_result rg[CX_CELL_GROUP];
    CX_TRY(cx_cell_ws_create(&ws));
    sf->cells = cx_study_cells(s);
    /* process CPU time (one BLAS thread) is what a core-second means on a shared machine */
    double t0 = cx_clock_mono(), c0 = cx_clock_cpu();
    for (cx_idx first = 0; first < sf->cells;) {
        const cx_cell_params *pp[CX_CELL_GROUP];
        cx_idx ids[CX_CELL_GROUP];
        int k = 0, used = 0;
        for (; k < (group ? CX_CELL_GROUP : 1) && first + k < sf->cells; k++) {
            CX_TRY(cx_study_bind(s, first + k, &p[k]));
            pp[k] = &p[k];
            ids[k] = first + k;
        }
        int64_t d0, p0, d1, p1;
        cx_cell_ws_steps(ws, &d0, &p0);
        CX_TRY(cx_cell_compute_group(ws, pp, ids, k, rg, &used));
        cx_cell_ws_steps(ws, &d1, &p1);
        /* the cells of a group share the network, so its size */
        for (int i = 0; i < CX_BENCH_SIZES; i++)
            if (p[0].net.nodes == bench_sizes[i]) {
                sf->drive_steps[i] += d1 - d0;
                sf->probe_steps[i] += p1 - p0;
            }
        for (int g = 0; g < used; g++)
            account(&p[g], &rg[g], first + g, sf, labels, cell_seconds);
        first += used;
    }
    sf->total = cx_clock_mono() - t0;
    sf->cpu = cx_clock_cpu() - c0;
    sf->gram_gflops /= sf->gram;
    sf->settled = cx_cell_ws_settled(ws);
done:
    cx_cell_ws_destroy(&ws);
    return rc;
}

/* Axis sweep `which` (axis_line), grouped and one cell at a time; labels compared. */
static int run_axis(const options *o, int which, task_figs *tk)
{
    int rc = CX_OK;
    cx_study *s = NULL;
    int *lab[2] = {NULL, NULL};
    double *secs = NULL;
    char text[1024];
    int len = snprintf(text, sizeof text, axis_fmt, o->quick ? 100.0 : 1000.0,
                       o->quick ? 20.0 : 100.0, axis_line[which]);
    CX_TRY(cx_study_load_buffer(text, (size_t)len, "bench-axis", &s));
    tk->cells = cx_study_cells(s);
    CX_CALLOC(lab[0], tk->cells * CX_MAX_RUNS);
    CX_CALLOC(lab[1], tk->cells * CX_MAX_RUNS);
    CX_CALLOC(secs, tk->cells);
    for (int h = 0; h < 2; h++) {
        sweep_figs f;
        memset(&f, 0, sizeof f);
        CX_TRY(run_sweep(s, h == 0, &f, lab[h], secs));
        tk->probes[h] = f.probes;
        tk->cpu[h] = f.cpu;
    }
    tk->labels_same =
        memcmp(lab[0], lab[1], (size_t)(tk->cells * CX_MAX_RUNS) * sizeof *lab[0]) == 0;
done:
    free(secs);
    free(lab[1]);
    free(lab[0]);
    cx_study_destroy(&s);
    return rc;
}

/* The i-th of k sample cells, spread evenly over the grid (both node counts when k >= 2). */
static cx_idx sample_cell(const cx_study *s, int i, int k)
{
    return (cx_idx)i * cx_study_cells(s) / (cx_idx)k;
}

/* k sample cells by the NumPy script; reads its JSON line back (only the figures we need). */
static int run_numpy(const cx_study *s, const options *o, int k, sweep_figs *sf)
{
    int rc = CX_OK;
    char *cmd = NULL;
    size_t cap = 8192;
    CX_ALLOC(cmd, (cx_idx)cap);
    cx_cell_params p;
    CX_TRY(cx_study_bind(s, 0, &p));
    size_t used = (size_t)snprintf(
        cmd, cap,
        "OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1 /usr/bin/python3 %s/tools/bench_numpy.py "
        "'{\"mean_degree\": %g, \"input_scaling\": %g, "
        "\"rate\": %g, \"dt\": %g, \"washout\": %g, \"length\": %g, \"ridge\": %g, \"horizon\": "
        "%g, \"tail\": %g, \"bound\": %g, \"seed\": 4127, \"tasks\": ["
        "{\"centre\": [-0.9, 0.1], \"radius\": 1.0, \"speed\": 2.1}, "
        "{\"centre\": [1.1, -0.2], \"radius\": 1.7, \"ellipticity\": 0.75, \"speed\": -1.2}], "
        "\"cells\": [",
        CX_SOURCE_DIR, p.net.mean_degree, p.res.input_scaling, p.res.rate, p.train.dt,
        p.train.washout, p.train.length, p.train.ridge, p.probe.horizon, p.probe.tail, p.cls.bound);
    for (int i = 0; i < k && used < cap; i++) {
        CX_TRY(cx_study_bind(s, sample_cell(s, i, k), &p));
        used += (size_t)snprintf(
            cmd + used, cap - used, "%s{\"nodes\": %lld, \"spectral_radius\": %g, \"blend\": %g}",
            i ? ", " : "", (long long)p.net.nodes, p.res.spectral_radius, p.train.blend);
    }
    CX_REQUIRE(used + 8 < cap, CX_ERR_INVALID, "bench: NumPy command too long");
    strcat(cmd, "]}' ");
    (void)o;
    FILE *f = popen(cmd, "r");
    CX_REQUIRE(f != NULL, CX_ERR_IO, "bench: cannot start %s", cmd);
    static char line[1 << 16];
    size_t got = fread(line, 1, sizeof line - 1, f);
    line[got] = '\0';
    int st = pclose(f);
    CX_REQUIRE(st == 0 && got > 0, CX_ERR_IO, "bench: NumPy script failed (status %d)", st);
    const char *keys[5] = {"\"drive\": ", "\"gram\": ", "\"probes\": ", "\"total\": ", "\"cpu\": "};
    double *dst[5] = {&sf->numpy_drive, &sf->numpy_gram, &sf->numpy_probes, &sf->numpy_total,
                      &sf->numpy_cpu};
    for (int q = 0; q < 5; q++) {
        for (const char *at = strstr(line, keys[q]); at != NULL; at = strstr(at + 1, keys[q]))
            *dst[q] += strtod(at + strlen(keys[q]), NULL);
    }
    sf->numpy_per_cell = sf->numpy_total / (double)k;
    sf->numpy_cpu_per_cell = sf->numpy_cpu / (double)k;
    sf->numpy_done = k;
done:
    free(cmd);
    return rc;
}

/* The sweep as it would run if every drive and probe step took its bound (kf[i] for the
 * networks of bench_sizes[i]), the other stages (network, Gram, solve, classify) as measured:
 * seconds of the stepping kernels at the bound, and of the whole sweep. Every step counted is one
 * the sweep takes with its fast paths (early stops included), so no faster kernel can beat it
 * without changing the arithmetic or the number of steps. */
static void at_bound(const kernel_figs *kf, int nk, const sweep_figs *sf, double *stepping,
                     double *total)
{
    double t = 0.0;
    for (int i = 0; i < nk; i++)
        t += 4e-9 * ((double)sf->drive_steps[i] * kf[i].drive_bound +
                     (double)sf->probe_steps[i] * kf[i].probe_bound);
    *stepping = t;
    *total = t + sf->network + sf->gram + sf->solve + sf->classify;
}

static void print_report(FILE *f, int json, const kernel_figs *kf, int nk, const sweep_figs *sf,
                         const sweep_figs *base, const task_figs *tk, int quick)
{
    const double per_cell = sf != NULL ? sf->total / (double)sf->cells : NAN;
    const double cpu_per_cell = sf != NULL ? sf->cpu / (double)sf->cells : NAN;
    double bound_steps = NAN, bound_total = NAN;
    if (sf != NULL)
        at_bound(kf, nk, sf, &bound_steps, &bound_total);
    const double bound_ratio = sf != NULL && sf->numpy_done
                                   ? sf->numpy_cpu_per_cell / (bound_total / (double)sf->cells)
                                   : NAN;
    if (json) {
        fprintf(f, "{\n  \"quick\": %s,\n  \"kernels\": [\n", quick ? "true" : "false");
        for (int i = 0; i < nk; i++) {
            const kernel_figs *k = &kf[i];
            fprintf(f, "    {\"nodes\": %lld", (long long)k->n);
            const char *what[3] = {"drive_ns_node_stage", "probe_ns_node_stage", "tanh_ns"};
            const double *figs[3] = {k->drive, k->probe, k->tanh_ns};
            for (int q = 0; q < 3; q++) {
                fprintf(f, ", \"%s\": {", what[q]);
                for (int mode = 0; mode < CX_BENCH_TANHS; mode++)
                    fprintf(f, "%s\"%s\": %.3f", mode ? ", " : "", tanh_names[mode], figs[q][mode]);
                fprintf(f, "}");
            }
            fprintf(f,
                    ", \"vector_lanes\": %d, \"gather_instruction\": %s, "
                    "\"drive_ns_node_stage_by_gather\": {\"loads\": %.3f, \"instruction\": %.3f}",
                    k->lanes, k->hwgather ? "true" : "false", k->drive_gather[0],
                    k->drive_gather[1]);
            const char *bw[2] = {"probe_batched_ns_node_run_stage", "probe_batched_4_lanes"};
            for (int h = 0; h < 2; h++) {
                fprintf(f, ", \"%s\": {", bw[h]);
                for (int q = 0; q < CX_BENCH_NB; q++)
                    fprintf(f, "%s\"%d\": %.3f", q ? ", " : "", bench_nb[q],
                            h ? k->probe_batch4[q] : k->probe_batch[q]);
                fprintf(f, "}");
            }
            fprintf(f,
                    ", \"fast_tanh\": \"%s\", \"dgemm_gflops\": %.2f, "
                    "\"dsyrk_gflops\": {\"block_512\": %.2f, \"block_2048\": %.2f}, "
                    "\"gram_gflops\": %.2f, \"bound_ns_node_stage\": {\"drive\": %.3f, "
                    "\"probe\": %.3f}}%s\n",
                    tanh_names[CX_BENCH_FAST], k->dgemm, k->dsyrk_block, k->dsyrk_long, k->gram,
                    k->drive_bound, k->probe_bound, i + 1 < nk ? "," : "");
        }
        if (sf == NULL) {
            fprintf(f, "  ]\n}\n");
            return;
        }
        fprintf(f,
                "  ],\n  \"sweep\": {\"cells\": %lld, \"seconds\": {\"network\": %.3f, \"drive\": "
                "%.3f, \"gram\": %.3f, \"solve\": %.3f, \"probes\": %.3f, \"classify\": %.3f, "
                "\"total\": %.3f}, \"gram_gflops\": %.2f, \"cells_per_core_second\": %.5f, "
                "\"runs\": %lld, \"runs_settled\": %lld},\n",
                (long long)sf->cells, sf->network, sf->drive, sf->gram, sf->solve, sf->probes,
                sf->classify, sf->total, sf->gram_gflops, 1.0 / cpu_per_cell, (long long)sf->runs,
                (long long)sf->settled);
        fprintf(f,
                "  \"plain_path\": {\"total\": %.3f, \"labels_identical\": %s},\n"
                "  \"numpy\": {\"cells\": %d, \"seconds_per_cell\": %.3f, \"drive\": %.3f, "
                "\"gram\": %.3f, \"probes\": %.3f, \"coexist_seconds_same_cells\": %.3f, "
                "\"cpu_seconds_per_cell\": %.3f, \"coexist_cpu_seconds_per_cell\": %.3f, "
                "\"throughput_ratio_cpu\": %.2f, \"throughput_ratio_wall\": %.2f},\n",
                base->total, sf->labels_same ? "true" : "false", sf->numpy_done, sf->numpy_per_cell,
                sf->numpy_drive, sf->numpy_gram, sf->numpy_probes, sf->coexist_same_cells,
                sf->numpy_cpu_per_cell, cpu_per_cell,
                sf->numpy_done ? sf->numpy_cpu_per_cell / cpu_per_cell : NAN,
                sf->numpy_done ? sf->numpy_per_cell / per_cell : NAN);
        fprintf(f,
                "  \"at_bound\": {\"stepping_seconds\": %.3f, \"stepping_seconds_measured\": "
                "%.3f, \"seconds\": %.3f, \"throughput_ratio_cpu\": %.2f},\n",
                bound_steps, sf->drive + sf->probes, bound_total, bound_ratio);
        for (int a = 0; a < CX_BENCH_AXES; a++)
            fprintf(f,
                    "  \"%s\": {\"cells\": %lld, \"probe_seconds\": {\"grouped\": %.3f, "
                    "\"one_cell_at_a_time\": %.3f}, \"cpu_seconds\": {\"grouped\": %.3f, "
                    "\"one_cell_at_a_time\": %.3f}, \"labels_identical\": %s}%s\n",
                    axis_json[a], (long long)tk[a].cells, tk[a].probes[0], tk[a].probes[1],
                    tk[a].cpu[0], tk[a].cpu[1], tk[a].labels_same ? "true" : "false",
                    a + 1 < CX_BENCH_AXES ? "," : "\n}");
        return;
    }
    fprintf(f, "| N | tanh | drive ns/node/stage | probe ns/node/stage | tanh ns |\n");
    fprintf(f, "|---|---|---|---|---|\n");
    for (int i = 0; i < nk; i++) {
        const kernel_figs *k = &kf[i];
        for (int mode = 0; mode < CX_BENCH_TANHS; mode++)
            fprintf(f, "| %lld | %s | %.2f | %.2f | %.2f |\n", (long long)k->n, tanh_names[mode],
                    k->drive[mode], k->probe[mode], k->tanh_ns[mode]);
        for (int h = 0; h < (k->lanes > 4 ? 2 : 1); h++) {
            const double *pb = h ? k->probe_batch4 : k->probe_batch;
            const int lanes = h ? 4 : k->lanes;
            fprintf(f, "| %lld | %s, batched B = 1/2/4/8/16, %d lanes | | ", (long long)k->n,
                    tanh_names[CX_BENCH_FAST], lanes);
            for (int q = 0; q < CX_BENCH_NB; q++)
                fprintf(f, "%s%.2f", q ? " / " : "", pb[q]);
            /* at 4 lanes the fused kernel takes up to 8 runs and the cells never form a block of
             * 16 (cx_res_batch_runs), so that figure is the generic kernel's */
            fprintf(f, "%s | |\n", lanes == 4 ? " (B = 16: generic kernel, not used)" : "");
        }
        if (k->lanes == 8)
            fprintf(f,
                    "| %lld | expm1, 8-lane gathers by scalar loads / by the instruction | %.2f / "
                    "%.2f (chosen here: %s) | | |\n",
                    (long long)k->n, k->drive_gather[0], k->drive_gather[1],
                    k->hwgather ? "instruction" : "loads");
        fprintf(f,
                "| %lld | bound | %.2f (achieved/bound %.2f) | %.2f (achieved/bound %.2f) | "
                "dgemm %.1f GFLOP/s |\n",
                (long long)k->n, k->drive_bound, k->drive[CX_BENCH_FAST] / k->drive_bound,
                k->probe_bound, k->probe[CX_BENCH_FAST] / k->probe_bound, k->dgemm);
        fprintf(f,
                "| %lld | Gram | %.1f GFLOP/s = %.0f %% of dsyrk(k=2048) %.1f; dsyrk(k=512) %.1f "
                "| | |\n",
                (long long)k->n, k->gram, 100.0 * k->gram / k->dsyrk_long, k->dsyrk_long,
                k->dsyrk_block);
    }
    if (sf == NULL)
        return;
    fprintf(f, "\nsweep: %lld cells, %lld runs (%lld ended early on a fixed point)\n",
            (long long)sf->cells, (long long)sf->runs, (long long)sf->settled);
    fprintf(f, "outcomes:");
    for (int i = 1; i < 8; i++)
        if (sf->outcomes[i] > 0)
            fprintf(f, " %s %lld", cx_outcome_name(i), (long long)sf->outcomes[i]);
    fprintf(f, "\n");
    fprintf(f, "| stage | seconds (fast paths) | seconds (libm, no early stop) |\n|---|---|---|\n");
    fprintf(f, "| network | %.2f | %.2f |\n| drive (steps) | %.2f | %.2f |\n", sf->network,
            base->network, sf->drive, base->drive);
    fprintf(f, "| Gram | %.2f (%.1f GFLOP/s) | %.2f |\n| solve | %.2f | %.2f |\n", sf->gram,
            sf->gram_gflops, base->gram, sf->solve, base->solve);
    fprintf(f, "| probes | %.2f | %.2f |\n| classify | %.2f | %.2f |\n", sf->probes, base->probes,
            sf->classify, base->classify);
    fprintf(f, "| total | %.2f | %.2f |\n", sf->total, base->total);
    fprintf(f,
            "CPU seconds: %.2f (plain path %.2f); cells per core-second (CPU): %.4f (plain path "
            "%.4f); labels identical: %s\n",
            sf->cpu, base->cpu, 1.0 / cpu_per_cell, (double)base->cells / base->cpu,
            sf->labels_same ? "yes" : "NO");
    if (sf->numpy_done)
        fprintf(f,
                "NumPy script, %d cell(s) spread over the sweep: %.2f s per cell (CPU %.2f; drive "
                "%.2f, of it Gram %.2f, probes %.2f); the same cells in coexist %.2f s (wall, "
                "with reuse); sweep throughput ratio %.1fx (CPU), %.1fx (wall)\n",
                sf->numpy_done, sf->numpy_per_cell, sf->numpy_cpu_per_cell,
                sf->numpy_drive / sf->numpy_done, sf->numpy_gram / sf->numpy_done,
                sf->numpy_probes / sf->numpy_done, sf->coexist_same_cells,
                sf->numpy_cpu_per_cell / cpu_per_cell, sf->numpy_per_cell / per_cell);
    fprintf(f,
            "at the bound: drive and probe steps %.2f s (measured %.2f s); with the other stages "
            "as measured the sweep would take %.2f s, %.3f s per cell",
            bound_steps, sf->drive + sf->probes, bound_total, bound_total / (double)sf->cells);
    if (sf->numpy_done)
        fprintf(f, ": at most %.1fx the NumPy script's throughput (CPU) with these steps\n",
                bound_ratio);
    else
        fprintf(f, "\n");
    for (int a = 0; a < CX_BENCH_AXES; a++)
        fprintf(f,
                "%s (%lld cells of one network, own drive each, no blend axis): probes %.2f s "
                "grouped vs %.2f s one cell at a time (%.2fx); CPU seconds %.2f vs %.2f (%.2fx); "
                "labels identical: %s\n",
                axis_what[a], (long long)tk[a].cells, tk[a].probes[0], tk[a].probes[1],
                tk[a].probes[1] / tk[a].probes[0], tk[a].cpu[0], tk[a].cpu[1],
                tk[a].cpu[1] / tk[a].cpu[0], tk[a].labels_same ? "yes" : "NO");
}

/* The JSON report into `path`. A figure not measured on this machine (NaN, such as the 8-lane
 * gather figures on a CPU without AVX-512, or a ratio without NumPy cells) is written as null,
 * since JSON has no NaN. */
static int write_json(const char *path, const kernel_figs *kf, int nk, const sweep_figs *sf,
                      const sweep_figs *base, const task_figs *tk, int quick)
{
    int rc = CX_OK;
    char *text = NULL;
    size_t len = 0;
    FILE *f = NULL, *mem = open_memstream(&text, &len);
    CX_REQUIRE(mem != NULL, CX_ERR_NOMEM, "bench: no memory for the JSON report");
    print_report(mem, 1, kf, nk, sf, base, tk, quick);
    CX_REQUIRE(fclose(mem) == 0, CX_ERR_NOMEM, "bench: no memory for the JSON report");
    f = fopen(path, "w");
    CX_REQUIRE(f != NULL, CX_ERR_IO, "bench: cannot write %s", path);
    static const char *const bad[] = {": -nan", ": nan", ": -inf", ": inf"};
    for (size_t i = 0; i < len;) {
        size_t skip = 0;
        for (int b = 0; b < 4 && skip == 0; b++)
            if (strncmp(text + i, bad[b], strlen(bad[b])) == 0)
                skip = strlen(bad[b]);
        if (skip > 0) {
            fputs(": null", f);
            i += skip;
        } else {
            fputc(text[i++], f);
        }
    }
    const int closed = fclose(f);
    f = NULL;
    CX_REQUIRE(closed == 0, CX_ERR_IO, "bench: error writing %s", path);
done:
    if (f != NULL)
        fclose(f);
    free(text);
    return rc;
}

int main(int argc, char **argv)
{
    options o = {0, 0, NULL, -1};
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--quick") == 0) {
            o.quick = 1;
        } else if (strcmp(argv[i], "--kernels") == 0) {
            o.kernels_only = 1;
        } else if (strcmp(argv[i], "--json") == 0 && i + 1 < argc) {
            o.json = argv[++i];
        } else if (strcmp(argv[i], "--numpy-cells") == 0 && i + 1 < argc) {
            o.numpy_cells = atoi(argv[++i]);
        } else {
            fprintf(stderr,
                    "usage: coexist-bench [--quick | --kernels] [--json FILE] [--numpy-cells K]\n");
            return 2;
        }
    }
    if (o.numpy_cells < 0)
        o.numpy_cells = o.quick ? 1 : 2;
    /* one core: BLAS on one thread here and in the NumPy script, so that the dgemm rate of the
     * bound is one core's and the CPU seconds count no idle BLAS threads */
    openblas_set_num_threads(1);
    int rc = CX_OK;
    kernel_figs kf[2];
    sweep_figs sf, base;
    task_figs tk[CX_BENCH_AXES];
    memset(tk, 0, sizeof tk);
    memset(kf, 0, sizeof kf);
    memset(&sf, 0, sizeof sf);
    memset(&base, 0, sizeof base);
    cx_study *fast = NULL, *plain = NULL;
    int *lf = NULL, *lp = NULL;
    double *tf = NULL, *tp = NULL;
    const int nk = o.quick ? 1 : 2;
    for (int i = 0; i < nk; i++)
        CX_TRY(kernels(bench_sizes[i], o.quick, &kf[i]));
    if (o.kernels_only) {
        print_report(stdout, 0, kf, nk, NULL, NULL, NULL, o.quick);
        if (o.json != NULL)
            CX_TRY(write_json(o.json, kf, nk, NULL, NULL, NULL, o.quick));
        goto done;
    }
    CX_TRY(make_study(&o, tanh_names[CX_BENCH_FAST], "true", &fast));
    CX_TRY(make_study(&o, "libm", "false", &plain));
    cx_idx cells = cx_study_cells(fast);
    CX_CALLOC(lf, cells * CX_MAX_RUNS);
    CX_CALLOC(lp, cells * CX_MAX_RUNS);
    CX_CALLOC(tf, cells);
    CX_CALLOC(tp, cells);
    CX_TRY(run_sweep(fast, 1, &sf, lf, tf));
    CX_TRY(run_sweep(plain, 0, &base, lp, tp));
    sf.labels_same = memcmp(lf, lp, (size_t)(cells * CX_MAX_RUNS) * sizeof *lf) == 0;
    for (int a = 0; a < CX_BENCH_AXES; a++)
        CX_TRY(run_axis(&o, a, &tk[a]));
    int k = o.numpy_cells < cells ? o.numpy_cells : (int)cells;
    for (int i = 0; i < k; i++)
        sf.coexist_same_cells += tf[sample_cell(fast, i, k)];
    if (k > 0)
        CX_TRY(run_numpy(fast, &o, k, &sf));
    print_report(stdout, 0, kf, nk, &sf, &base, tk, o.quick);
    if (o.json != NULL)
        CX_TRY(write_json(o.json, kf, nk, &sf, &base, tk, o.quick));
done:
    free(tp);
    free(tf);
    free(lp);
    free(lf);
    cx_study_destroy(&plain);
    cx_study_destroy(&fast);
    if (rc != CX_OK) {
        cx_err_print("coexist-bench", 1);
        return 1;
    }
    return 0;
}
