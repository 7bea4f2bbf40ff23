/* coexist tests: the reservoir kernels (src/reservoir): drive and Gram sums, blended ridge
 * readout, closed-loop probe and the Lyapunov exponent of the loop.
 *
 * Reference values come from analytic solutions, symmetries and LAPACK (dgels, dgeev); the
 * networks and signals are built here from closed forms and keyed PCG streams. Section and
 * equation numbers of the textbook citations below are quoted from memory. Tolerances: round-off
 * bounds for the exact cases; for the finite-time Lyapunov estimate (error O(1/T)) the 2 %
 * tolerance is common practice, no published source. */
#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "coexist/error.h"
#include "coexist/reservoir.h"
#include "coexist/rng.h"
#include "testlib.h"

#define SRC_HK                                                                                     \
    "Hoerl & Kennard 1970, Technometrics 12, 55 (ridge); dgels: Anderson et al. 1999, LAPACK "     \
    "Users' Guide, 3rd ed., sec. 2.3.2"
#define SRC_MIRROR                                                                                 \
    "analytic: tanh is odd, so with b = 0 (r, u) -> (-r, -u) maps trajectories to trajectories; "  \
    "G's r-r^2 block and C's r^2 block are odd"
#define SRC_SUM "definition of the Gram sums G = sum q q^T, C = sum u q^T (Hoerl & Kennard 1970)"
#define SRC_LINODE                                                                                 \
    "exact solution of the linear ODE r' = gamma (c - r), r(0) = 0: r = c (1 - exp(-gamma t)) "    \
    "(Boyce & DiPrima, Elementary Differential Equations, sec. 2.1)"
#define SRC_GEOM "geometric series: r_n = (1 - (1 - a)^n) c for r <- (1 - a) r + a c, r_0 = 0"
#define SRC_TAYLOR                                                                                 \
    "tanh x = x - x^3/3 + O(x^5) (Abramowitz & Stegun 1964, 4.5.64): the map equals its "          \
    "linearisation to O(s^2) relative"
#define SRC_RK4                                                                                    \
    "RK4 global error O(h^4), ratio 16 per halving (Hairer, Norsett & Wanner 1993, Solving ODEs "  \
    "I, sec. II.3)"
#define SRC_RK4R                                                                                   \
    "RK4 stability function R(z) = 1 + z + z^2/2 + z^3/6 + z^4/24 (Hairer & Wanner 1996, Solving " \
    "ODEs II, sec. IV.2)"
#define SRC_BEN                                                                                    \
    "Benettin et al. 1980, Meccanica 15, 9; linearisation at a fixed point (Strogatz 1994, "       \
    "Nonlinear Dynamics and Chaos, sec. 6.3); eigenvalues by LAPACK dgeev"

static double now(void)
{
    struct timespec t;
    timespec_get(&t, TIME_UTC);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static cx_rng stream(uint64_t what)
{
    cx_rng g;
    cx_rng_keyed(&g, 20261201u, CX_RNG_TEST, &what, 1);
    return g;
}

/* Directed random graph, each i <- j (j != i) with probability d / n, weights U(-s, s). */
static cx_csr make_er(cx_idx n, double d, double s, uint64_t key)
{
    cx_rng g = stream(key);
    cx_csr m = {0};
    m.n = n;
    m.rowptr = calloc((size_t)n + 1, sizeof *m.rowptr);
    cx_idx cap = (cx_idx)(d * (double)n * 2.0) + 16, nnz = 0;
    m.col = malloc((size_t)cap * sizeof *m.col);
    m.val = malloc((size_t)cap * sizeof *m.val);
    for (cx_idx i = 0; i < n; i++) {
        for (cx_idx j = 0; j < n; j++) {
            if (j == i || cx_rng_uniform(&g) >= d / (double)n)
                continue;
            if (nnz == cap) {
                cap *= 2;
                m.col = realloc(m.col, (size_t)cap * sizeof *m.col);
                m.val = realloc(m.val, (size_t)cap * sizeof *m.val);
            }
            m.col[nnz] = j;
            m.val[nnz] = cx_rng_range(&g, -s, s);
            nnz++;
        }
        m.rowptr[i + 1] = nnz;
    }
    m.nnz = nnz;
    return m;
}

static cx_csr make_empty(cx_idx n)
{
    cx_csr m = {0};
    m.n = n;
    m.rowptr = calloc((size_t)n + 1, sizeof *m.rowptr);
    m.col = malloc(sizeof *m.col);
    m.val = malloc(sizeof *m.val);
    return m;
}

static void free_csr(cx_csr *m)
{
    free(m->rowptr);
    free(m->col);
    free(m->val);
}

/* W_in, n x dim row-major: one U(-1, 1) entry per row, or all entries U(-1, 1). */
static double *make_win(cx_idx n, int dim, int dense, uint64_t key)
{
    cx_rng g = stream(key);
    double *w = calloc((size_t)(n * dim), sizeof *w);
    for (cx_idx i = 0; i < n; i++) {
        if (dense) {
            for (int j = 0; j < dim; j++)
                w[i * dim + j] = cx_rng_range(&g, -1.0, 1.0);
        } else {
            int j = (int)cx_rng_below(&g, (uint32_t)dim);
            w[i * dim + j] = cx_rng_range(&g, -1.0, 1.0);
        }
    }
    return w;
}

static double *make_vec(cx_idx n, double lo, double hi, uint64_t key)
{
    cx_rng g = stream(key);
    double *v = malloc((size_t)n * sizeof *v);
    for (cx_idx i = 0; i < n; i++)
        v[i] = cx_rng_range(&g, lo, hi);
    return v;
}

/* Test signals (closed forms): 0 = circle of radius 1.3 about (0.4, -0.2), period 2 pi / 1.7;
 * 1 = Lissajous curve (1.1 sin 1.3 t, 0.8 sin(2.6 t + 0.5)); 2 = a smaller circle run the
 * other way. Third coordinate, when asked, 0.3 cos(0.9 t). */
static void signal_at(int kind, double t, int dim, double *u)
{
    double x, y;
    switch (kind) {
    case 0:
        x = 0.4 + 1.3 * cos(1.7 * t);
        y = -0.2 + 1.3 * sin(1.7 * t);
        break;
    case 1:
        x = 1.1 * sin(1.3 * t);
        y = 0.8 * sin(2.6 * t + 0.5);
        break;
    default:
        x = -0.5 + 0.7 * cos(2.1 * t);
        y = 0.6 - 0.7 * sin(2.1 * t);
        break;
    }
    u[0] = x;
    if (dim > 1)
        u[1] = y;
    if (dim > 2)
        u[2] = 0.3 * cos(0.9 * t);
}

/* Samples for `steps` steps of dt: spacing dt/2 (2 steps + 1) or dt (steps + 1). */
static double *make_series(int kind, int model, double dt, cx_idx steps, int dim)
{
    cx_idx per = model == CX_MODEL_CONTINUOUS ? 2 : 1;
    cx_idx count = per * steps + 1;
    double *u = malloc((size_t)(count * dim) * sizeof *u);
    for (cx_idx s = 0; s < count; s++)
        signal_at(kind, (double)s * dt / (double)per, dim, u + s * dim);
    return u;
}

static void feats(int features, cx_idx n, const double *r, double *q)
{
    for (cx_idx i = 0; i < n; i++)
        q[i] = r[i];
    if (features == CX_FEAT_LINEAR)
        return;
    for (cx_idx i = 0; i < n; i++)
        q[n + i] = r[i] * r[i];
    if (features == CX_FEAT_LINEAR_SQUARES_CONSTANT)
        q[2 * n] = 1.0;
}

/* Record the accumulated pairs one step at a time (drive calls of one step, no accumulation):
 * q rows into qh (nsamp x nfeat row-major), u into uh (nsamp x dim). Returns nsamp. */
static cx_idx record(cx_res_ws *ws, const cx_reservoir *res, const double *u, double dt,
                     cx_idx washout, cx_idx train, cx_idx stride, double *r, double *qh, double *uh)
{
    cx_idx per = res->model == CX_MODEL_CONTINUOUS ? 2 : 1;
    cx_idx nf = cx_features_count(res->features, res->n), ns = 0;
    int dim = res->dim;
    for (cx_idx i = 0; i < washout + train; i++) {
        if (cx_res_drive(ws, res, u + per * i * dim, dt, 1, 0, 1, r, NULL, NULL) != CX_OK)
            return -1;
        if (i < washout || (i - washout) % stride != 0)
            continue;
        feats(res->features, res->n, r, qh + ns * nf);
        memcpy(uh + ns * dim, u + per * (i + 1) * dim, (size_t)dim * sizeof *u);
        ns++;
    }
    return ns;
}

static double max_abs(const double *a, cx_idx n)
{
    double m = 0.0;
    for (cx_idx i = 0; i < n; i++)
        m = fmax(m, fabs(a[i]));
    return m;
}

static cx_reservoir make_res(cx_idx n, int dim, int model, int features, const cx_csr *m,
                             const double *w_in, const double *bias)
{
    cx_reservoir res = {0};
    res.n = n;
    res.dim = dim;
    res.model = model;
    res.features = features;
    res.rate = 2.385;
    res.leak = 0.37;
    res.input_scaling = 0.45;
    res.m = m;
    res.w_in = w_in;
    res.bias = bias;
    return res;
}

/* W_out from the Gram route against an independent least-squares solve of the stacked weighted
 * problem [w_k Q_k^T; sqrt(beta) I] X = [w_k U_k^T; 0] by QR (dgels). */
static void test_ridge_vs_dgels(void)
{
    const cx_idx n = 110;
    const int dim = 2, ntasks = 3;
    const double dt = 0.02, beta = 2.385e-2;
    const cx_idx wash = 80, train = 260, stride = 2;
    const double w[3] = {0.7, 0.45, 1.3};
    cx_csr m = make_er(n, 4.0, 0.5, 1);
    double *win = make_win(n, dim, 0, 2);
    double *bias = make_vec(n, -0.3, 0.3, 3);
    cx_reservoir res = make_res(n, dim, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, &m, win, bias);
    cx_idx nf = cx_features_count(res.features, n);
    cx_res_ws *ws = NULL;
    if (cx_res_ws_alloc(&ws, n, dim, res.features) != CX_OK) {
        cx_test_true("workspace", 0, "alloc failed", "");
        return;
    }
    cx_idx maxs = train;
    double *qh = malloc((size_t)(ntasks * maxs * nf) * sizeof *qh);
    double *uh = malloc((size_t)(ntasks * maxs * dim) * sizeof *uh);
    double *g[3], *c[3];
    cx_idx ns[3];
    int ok = 1, same_end = 1;
    for (int k = 0; k < ntasks; k++) {
        double *u = make_series(k, res.model, dt, wash + train, dim);
        double *r1 = calloc((size_t)n, sizeof *r1), *r2 = calloc((size_t)n, sizeof *r2);
        g[k] = calloc((size_t)(nf * nf), sizeof **g);
        c[k] = calloc((size_t)(dim * nf), sizeof **c);
        ok &= cx_res_drive(ws, &res, u, dt, wash, train, stride, r1, g[k], c[k]) == CX_OK;
        ns[k] = record(ws, &res, u, dt, wash, train, stride, r2, qh + k * maxs * nf,
                       uh + k * maxs * dim);
        same_end &= memcmp(r1, r2, (size_t)n * sizeof *r1) == 0;
        free(r1);
        free(r2);
        free(u);
    }
    cx_test_true("drive returns CX_OK for three tasks", ok, "", "");
    cx_test_true("end state of one drive == end state of step-by-step drives (bitwise)", same_end,
                 "", "determinism of the fixed-step method");
    double *work = malloc((size_t)(nf * nf + dim * nf) * sizeof *work);
    double *wout = malloc((size_t)(dim * nf) * sizeof *wout);
    int status = -1;
    const double *gc[3] = {g[0], g[1], g[2]}, *cc[3] = {c[0], c[1], c[2]};
    int rc = cx_readout_solve(nf, dim, ntasks, gc, cc, w, beta, work, wout, &status);
    cx_test_true("readout solve returns CX_OK, status OK", rc == CX_OK && status == CX_SOLVE_OK, "",
                 "");
    cx_idx rows = ns[0] + ns[1] + ns[2] + nf;
    double *a = calloc((size_t)(rows * nf), sizeof *a);  /* column-major, ld = rows */
    double *b = calloc((size_t)(rows * dim), sizeof *b); /* column-major, ld = rows */
    cx_idx row = 0;
    for (int k = 0; k < ntasks; k++) {
        for (cx_idx s = 0; s < ns[k]; s++, row++) {
            for (cx_idx f = 0; f < nf; f++)
                a[row + f * rows] = w[k] * qh[(k * maxs + s) * nf + f];
            for (int j = 0; j < dim; j++)
                b[row + j * rows] = w[k] * uh[(k * maxs + s) * dim + j];
        }
    }
    for (cx_idx f = 0; f < nf; f++)
        a[(row + f) + f * rows] = sqrt(beta);
    lapack_int info = LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', (lapack_int)rows, (lapack_int)nf,
                                    (lapack_int)dim, a, (lapack_int)rows, b, (lapack_int)rows);
    double num = 0.0, den = 0.0;
    for (cx_idx f = 0; f < nf; f++)
        for (int j = 0; j < dim; j++) {
            double e = wout[j + f * dim] - b[f + j * rows];
            num += e * e;
            den += b[f + j * rows] * b[f + j * rows];
        }
    char d[160];
    snprintf(d, sizeof d, "dgels info %d, %lld x %lld stacked rows", (int)info, (long long)rows,
             (long long)nf);
    cx_test_true("dgels reference solved", info == 0, d, SRC_HK);
    cx_test_abs("|W_out - W_dgels|_F / |W_dgels|_F (3 tasks, weights 0.7 0.45 1.3, stride 2)",
                sqrt(num / den), 0.0, 1e-9, SRC_HK);
    for (int k = 0; k < ntasks; k++) {
        free(g[k]);
        free(c[k]);
    }
    free(a);
    free(b);
    free(wout);
    free(work);
    free(qh);
    free(uh);
    cx_res_ws_free(&ws);
    free(bias);
    free(win);
    free_csr(&m);
}

/* Mirror pair u, -u + delta: squared block of W_out; returns its max abs entry and the max abs
 * of the whole readout. */
static void mirror_readout(const cx_reservoir *res, cx_res_ws *ws, double delta, double *sq,
                           double *all, double *cross)
{
    const cx_idx n = res->n, wash = 60, train = 420;
    const int dim = res->dim;
    const double dt = 0.02;
    cx_idx nf = cx_features_count(res->features, n);
    cx_idx steps = wash + train;
    cx_idx count = (res->model == CX_MODEL_CONTINUOUS ? 2 : 1) * steps + 1;
    double *u = make_series(1, res->model, dt, steps, dim);
    double *um = malloc((size_t)(count * dim) * sizeof *um);
    for (cx_idx s = 0; s < count * dim; s++)
        um[s] = -u[s] + delta;
    double *g[2], *c[2];
    for (int k = 0; k < 2; k++) {
        double *r = calloc((size_t)n, sizeof *r);
        g[k] = calloc((size_t)(nf * nf), sizeof **g);
        c[k] = calloc((size_t)(dim * nf), sizeof **c);
        (void)cx_res_drive(ws, res, k == 0 ? u : um, dt, wash, train, 1, r, g[k], c[k]);
        free(r);
    }
    /* The r-r^2 block of w^2 G_1 + w^2 G_2 (upper triangle: rows < n, columns >= n). */
    *cross = 0.0;
    for (cx_idx col = n; col < 2 * n; col++)
        for (cx_idx rw = 0; rw < n; rw++)
            *cross = fmax(*cross, fabs(0.25 * g[0][rw + col * nf] + 0.25 * g[1][rw + col * nf]));
    double *work = malloc((size_t)(nf * nf + dim * nf) * sizeof *work);
    double *wout = malloc((size_t)(dim * nf) * sizeof *wout);
    const double w[2] = {0.5, 0.5};
    const double *gc[2] = {g[0], g[1]}, *cc[2] = {c[0], c[1]};
    int status = -1;
    (void)cx_readout_solve(nf, dim, 2, gc, cc, w, 1e-5, work, wout, &status);
    *sq = status == CX_SOLVE_OK ? max_abs(wout + n * dim, n * dim) : NAN;
    *all = status == CX_SOLVE_OK ? max_abs(wout, nf * dim) : NAN;
    free(wout);
    free(work);
    for (int k = 0; k < 2; k++) {
        free(g[k]);
        free(c[k]);
    }
    free(um);
    free(u);
}

static void test_mirror(void)
{
    const cx_idx n = 140;
    const int dim = 2;
    cx_csr m = make_er(n, 5.0, 0.45, 11);
    double *win = make_win(n, dim, 0, 12);
    for (int model = 0; model < 2; model++) {
        cx_reservoir res = make_res(n, dim, model, CX_FEAT_LINEAR_SQUARES, &m, win, NULL);
        cx_res_ws *ws = NULL;
        if (cx_res_ws_alloc(&ws, n, dim, res.features) != CX_OK)
            continue;
        const char *name = model == CX_MODEL_CONTINUOUS ? "continuous" : "discrete";
        double sq, all, cross;
        char what[200], d[200];
        mirror_readout(&res, ws, 0.0, &sq, &all, &cross);
        snprintf(what, sizeof what, "%s: r-r^2 block of the blended Gram sum == 0 exactly", name);
        snprintf(d, sizeof d, "max |block| = %.3g", cross);
        cx_test_true(what, cross == 0.0, d, SRC_MIRROR);
        snprintf(what, sizeof what, "%s: mirror pair, max |W_out squared block| == 0 exactly",
                 name);
        snprintf(d, sizeof d, "max |squared block| = %.3g, max |W_out| = %.3g", sq, all);
        cx_test_true(what, sq == 0.0 && all > 0.0, d, SRC_MIRROR);
        double prev = 0.0;
        int grows = 1;
        const double deltas[3] = {1e-3, 1e-2, 1e-1};
        for (int t = 0; t < 3; t++) {
            mirror_readout(&res, ws, deltas[t], &sq, &all, &cross);
            grows &= sq > prev && sq > 1e-14 * all;
            printf("  %s mirror shifted by %.0e: max |W_out squared block| = %.6g (max |W_out| "
                   "%.6g)\n",
                   name, deltas[t], sq, all);
            prev = sq;
        }
        snprintf(what, sizeof what,
                 "%s: shifted mirror (delta 1e-3, 1e-2, 1e-1): squared block non-zero, growing",
                 name);
        cx_test_true(what, grows, "", SRC_MIRROR);
        cx_res_ws_free(&ws);
    }
    free(win);
    free_csr(&m);
}

/* Blocked Gram sums against a naive per-sample accumulation. */
static void test_blocking(void)
{
    const cx_idx n = 70, wash = 37, train = 331;
    const int dim = 3;
    const double dt = 0.015;
    cx_csr m = make_er(n, 3.0, 0.6, 21);
    double *win = make_win(n, dim, 1, 22);
    double *bias = make_vec(n, -0.2, 0.2, 23);
    struct {
        int model, features;
        cx_idx block, stride;
    } cases[4] = {{CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, 7, 1},
                  {CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES_CONSTANT, 50, 3},
                  {CX_MODEL_DISCRETE, CX_FEAT_LINEAR, 13, 3},
                  {CX_MODEL_DISCRETE, CX_FEAT_LINEAR_SQUARES, 192, 1}};
    for (int t = 0; t < 4; t++) {
        cx_reservoir res = make_res(n, dim, cases[t].model, cases[t].features, &m, win, bias);
        cx_idx nf = cx_features_count(res.features, n);
        cx_res_ws *ws = NULL;
        if (cx_res_ws_alloc(&ws, n, dim, res.features) != CX_OK ||
            cx_res_ws_set_block(ws, cases[t].block) != CX_OK)
            continue;
        double *u = make_series(2, res.model, dt, wash + train, dim);
        double *r = calloc((size_t)n, sizeof *r);
        double *g = calloc((size_t)(nf * nf), sizeof *g),
               *c = calloc((size_t)(dim * nf), sizeof *c);
        /* Accumulation adds to what is there: start both from the same non-zero values. */
        for (cx_idx e = 0; e < nf * nf; e++)
            g[e] = 0.125;
        double *qh = malloc((size_t)(train * nf) * sizeof *qh);
        double *uh = malloc((size_t)(train * dim) * sizeof *uh);
        (void)cx_res_drive(ws, &res, u, dt, wash, train, cases[t].stride, r, g, c);
        memset(r, 0, (size_t)n * sizeof *r);
        cx_idx ns = record(ws, &res, u, dt, wash, train, cases[t].stride, r, qh, uh);
        double eg = 0.0, mg = 0.0, ec = 0.0, mc = 0.0;
        for (cx_idx col = 0; col < nf; col++) {
            for (cx_idx rw = 0; rw <= col; rw++) {
                double s = 0.125;
                for (cx_idx k = 0; k < ns; k++)
                    s += qh[k * nf + rw] * qh[k * nf + col];
                eg = fmax(eg, fabs(g[rw + col * nf] - s));
                mg = fmax(mg, fabs(s));
            }
            for (int j = 0; j < dim; j++) {
                double s = 0.0;
                for (cx_idx k = 0; k < ns; k++)
                    s += uh[k * dim + j] * qh[k * nf + col];
                ec = fmax(ec, fabs(c[j + col * dim] - s));
                mc = fmax(mc, fabs(s));
            }
        }
        char what[200];
        cx_idx want = (train + cases[t].stride - 1) / cases[t].stride;
        snprintf(what, sizeof what,
                 "%s, features %d, block %lld, stride %lld: %lld samples accumulated",
                 res.model == 0 ? "continuous" : "discrete", res.features,
                 (long long)cases[t].block, (long long)cases[t].stride, (long long)ns);
        cx_test_true(what, ns == want && ns % cases[t].block != 0, "", SRC_SUM);
        snprintf(what, sizeof what, "  blocked G == naive sum (max abs err / max abs)");
        cx_test_abs(what, eg / mg, 0.0, 1e-12, SRC_SUM);
        snprintf(what, sizeof what, "  blocked C == naive sum (max abs err / max abs)");
        cx_test_abs(what, ec / mc, 0.0, 1e-12, SRC_SUM);
        free(qh);
        free(uh);
        free(g);
        free(c);
        free(r);
        free(u);
        cx_res_ws_free(&ws);
    }
    free(bias);
    free(win);
    free_csr(&m);
}

/* Analytic cases of both models. */
static void test_analytic(void)
{
    const cx_idx n = 90;
    const int dim = 3;
    double *win = make_win(n, dim, 1, 31);
    double *bias = make_vec(n, -0.4, 0.4, 32);
    const double p[3] = {0.81, -1.27, 0.33};
    cx_csr m0 = make_empty(n);
    double *cinf = malloc((size_t)n * sizeof *cinf);
    double *r = malloc((size_t)n * sizeof *r);
    cx_res_ws *ws = NULL;
    (void)cx_res_ws_alloc(&ws, n, dim, CX_FEAT_LINEAR_SQUARES);
    {
        cx_reservoir res =
            make_res(n, dim, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, &m0, win, bias);
        res.rate = 1.7;
        for (cx_idx i = 0; i < n; i++) {
            double s = bias[i];
            for (int j = 0; j < dim; j++)
                s += res.input_scaling * win[i * dim + j] * p[j];
            cinf[i] = tanh(s);
        }
        const double dt = 0.005;
        const cx_idx steps = 800;
        memset(r, 0, (size_t)n * sizeof *r);
        (void)cx_res_drive_constant(ws, &res, p, dt, steps, r);
        double e = 0.0, t = (double)steps * dt;
        for (cx_idx i = 0; i < n; i++)
            e = fmax(e, fabs(r[i] - cinf[i] * (1.0 - exp(-res.rate * t))));
        cx_test_abs("continuous, M = 0, constant input: RK4 vs c (1 - exp(-gamma t)), t = 4", e,
                    0.0, 1e-9, SRC_LINODE);
        /* The same through cx_res_drive with a constant sample array. */
        double *u = malloc((size_t)((2 * steps + 1) * dim) * sizeof *u);
        for (cx_idx s = 0; s < 2 * steps + 1; s++)
            memcpy(u + s * dim, p, sizeof p);
        double *r2 = calloc((size_t)n, sizeof *r2);
        (void)cx_res_drive(ws, &res, u, dt, steps, 0, 1, r2, NULL, NULL);
        cx_test_true("drive with constant samples == constant drive (bitwise)",
                     memcmp(r, r2, (size_t)n * sizeof *r) == 0, "", "same RK4 step");
        free(r2);
        free(u);
    }
    {
        cx_reservoir res =
            make_res(n, dim, CX_MODEL_DISCRETE, CX_FEAT_LINEAR_SQUARES, &m0, win, bias);
        const cx_idx steps = 23;
        memset(r, 0, (size_t)n * sizeof *r);
        (void)cx_res_drive_constant(ws, &res, p, 1.0, steps, r);
        double e = 0.0;
        for (cx_idx i = 0; i < n; i++)
            e = fmax(e, fabs(r[i] - cinf[i] * (1.0 - pow(1.0 - res.leak, (double)steps))));
        /* cinf above used the same sigma and bias, so it is c for this model too. */
        cx_test_abs("discrete, M = 0, constant input: r_23 vs (1 - (1 - a)^23) c", e, 0.0, 1e-14,
                    SRC_GEOM);
    }
    cx_res_ws_free(&ws);
    {
        /* Linear regime: tiny input scaling, no bias, random M. */
        const cx_idx n2 = 120, steps = 300;
        cx_csr m = make_er(n2, 4.0, 0.4, 33);
        double *w2 = make_win(n2, 2, 0, 34);
        cx_reservoir res = make_res(n2, 2, CX_MODEL_DISCRETE, CX_FEAT_LINEAR, &m, w2, NULL);
        res.input_scaling = 1e-6;
        cx_res_ws *ws2 = NULL;
        (void)cx_res_ws_alloc(&ws2, n2, 2, CX_FEAT_LINEAR);
        double *u = make_series(0, res.model, 0.05, steps, 2);
        double *rr = calloc((size_t)n2, sizeof *rr), *rl = calloc((size_t)n2, sizeof *rl);
        double *t = malloc((size_t)n2 * sizeof *t);
        (void)cx_res_drive(ws2, &res, u, 0.05, steps, 0, 1, rr, NULL, NULL);
        for (cx_idx s = 0; s < steps; s++) {
            for (cx_idx i = 0; i < n2; i++) {
                double v =
                    res.input_scaling * (w2[i * 2] * u[s * 2] + w2[i * 2 + 1] * u[s * 2 + 1]);
                for (cx_idx q = m.rowptr[i]; q < m.rowptr[i + 1]; q++)
                    v += m.val[q] * rl[m.col[q]];
                t[i] = (1.0 - res.leak) * rl[i] + res.leak * v;
            }
            memcpy(rl, t, (size_t)n2 * sizeof *t);
        }
        double num = 0.0, den = 0.0;
        for (cx_idx i = 0; i < n2; i++) {
            num += (rr[i] - rl[i]) * (rr[i] - rl[i]);
            den += rl[i] * rl[i];
        }
        cx_test_abs("discrete, sigma = 1e-6: |r - r_linear| / |r_linear| after 300 steps",
                    sqrt(num / den), 0.0, 1e-9, SRC_TAYLOR);
        free(t);
        free(rl);
        free(rr);
        free(u);
        cx_res_ws_free(&ws2);
        free(w2);
        free_csr(&m);
    }
    {
        /* Fourth order: nonlinear drive to t = 3 at h, h/2, h/4 against h/16. */
        const cx_idx n2 = 80;
        cx_csr m = make_er(n2, 4.0, 0.7, 35);
        double *w2 = make_win(n2, 2, 1, 36);
        double *b2 = make_vec(n2, -0.5, 0.5, 37);
        cx_reservoir res = make_res(n2, 2, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR, &m, w2, b2);
        res.input_scaling = 1.4;
        cx_res_ws *ws2 = NULL;
        (void)cx_res_ws_alloc(&ws2, n2, 2, CX_FEAT_LINEAR);
        double *ends[4];
        const cx_idx mult[4] = {1, 2, 4, 16};
        for (int k = 0; k < 4; k++) {
            double h = 0.1 / (double)mult[k];
            cx_idx steps = 30 * mult[k];
            double *u = make_series(0, res.model, h, steps, 2);
            ends[k] = calloc((size_t)n2, sizeof **ends);
            (void)cx_res_drive(ws2, &res, u, h, steps, 0, 1, ends[k], NULL, NULL);
            free(u);
        }
        double e[3];
        for (int k = 0; k < 3; k++) {
            e[k] = 0.0;
            for (cx_idx i = 0; i < n2; i++)
                e[k] = fmax(e[k], fabs(ends[k][i] - ends[3][i]));
        }
        printf("  RK4 errors at h = 0.1, 0.05, 0.025: %.3e %.3e %.3e\n", e[0], e[1], e[2]);
        cx_test_abs("RK4 error ratio e(h/2) / e(h/4) (driven, nonlinear)", e[1] / e[2], 16.0, 2.0,
                    SRC_RK4);
        for (int k = 0; k < 4; k++)
            free(ends[k]);
        cx_res_ws_free(&ws2);
        free(b2);
        free(w2);
        free_csr(&m);
    }
    free(r);
    free(cinf);
    free_csr(&m0);
    free(bias);
    free(win);
}

static void test_probe(void)
{
    const cx_idx n = 130, steps = 400;
    const int dim = 2;
    cx_csr m = make_er(n, 4.0, 0.5, 41);
    double *win = make_win(n, dim, 0, 42);
    double *bias = make_vec(n, -0.3, 0.3, 43);
    for (int model = 0; model < 2; model++) {
        const char *name = model == CX_MODEL_CONTINUOUS ? "continuous" : "discrete";
        char what[200], d[200];
        cx_reservoir res = make_res(n, dim, model, CX_FEAT_LINEAR_SQUARES, &m, win, bias);
        cx_idx nf = cx_features_count(res.features, n);
        cx_res_ws *ws = NULL;
        (void)cx_res_ws_alloc(&ws, n, dim, res.features);
        double *wout = make_vec(nf * dim, -0.02, 0.02, 44);
        double *r0 = make_vec(n, -0.5, 0.5, 45);
        double *ra = malloc((size_t)n * sizeof *ra), *rb = malloc((size_t)n * sizeof *rb);
        double *ya = malloc((size_t)((steps + 1) * dim) * sizeof *ya);
        double *yb = malloc((size_t)((steps + 1) * dim) * sizeof *yb);
        cx_idx da = -1, db = -1;
        memcpy(ra, r0, (size_t)n * sizeof *ra);
        memcpy(rb, r0, (size_t)n * sizeof *rb);
        (void)cx_res_probe(ws, &res, wout, 0.02, steps, NULL, NULL, ra, ya, &da);
        (void)cx_res_probe(ws, &res, wout, 0.02, steps, NULL, NULL, rb, yb, &db);
        snprintf(what, sizeof what, "%s probe: two calls agree bit for bit", name);
        cx_test_true(what,
                     da == steps && db == steps &&
                         memcmp(ya, yb, (size_t)((steps + 1) * dim) * sizeof *ya) == 0 &&
                         memcmp(ra, rb, (size_t)n * sizeof *ra) == 0,
                     "", "determinism (no hidden state)");
        double yend[2];
        cx_res_readout(&res, wout, ra, yend);
        snprintf(what, sizeof what, "%s probe: last row == W_out q(end state) (bitwise)", name);
        cx_test_true(what, memcmp(yend, ya + steps * dim, sizeof yend) == 0, "",
                     "definition y = W_out q(r)");
        if (model == CX_MODEL_DISCRETE) {
            /* The autonomous map is the driven map fed its own output. */
            memcpy(rb, r0, (size_t)n * sizeof *rb);
            (void)cx_res_drive(ws, &res, ya, 1.0, steps, 0, 1, rb, NULL, NULL);
            cx_test_true("discrete: closed loop == open loop driven by its own output (bitwise)",
                         memcmp(ra, rb, (size_t)n * sizeof *ra) == 0, "",
                         "definition of the closed loop, Jaeger 2001, GMD Report 148");
        }
        /* Early stop: a readout that grows as r leaves 0 towards about tanh(b), bounds +-0.75:
         * y_j = (9.5 / n) sum_i (sign(b_i) r_i + r_i^2). */
        double *wbig = malloc((size_t)(nf * dim) * sizeof *wbig);
        for (cx_idx e = 0; e < nf * dim; e++) {
            cx_idx f = e / dim;
            double sgn = f < n ? (bias[f] > 0.0 ? 1.0 : -1.0) : 1.0;
            wbig[e] = 9.5 * sgn / (double)n;
        }
        const double lo[2] = {-0.75, -0.75}, hi[2] = {0.75, 0.75};
        for (cx_idx e = 0; e < (steps + 1) * dim; e++)
            ya[e] = 12345.0;
        memset(ra, 0, (size_t)n * sizeof *ra);
        (void)cx_res_probe(ws, &res, wbig, 0.02, steps, lo, hi, ra, ya, &da);
        int inside = 1, untouched = 1, out = 0;
        for (cx_idx i = 0; i < da && da < steps; i++)
            for (int j = 0; j < dim; j++)
                inside &= ya[i * dim + j] >= lo[j] && ya[i * dim + j] <= hi[j];
        for (int j = 0; j < dim && da < steps; j++)
            out |= ya[da * dim + j] < lo[j] || ya[da * dim + j] > hi[j];
        for (cx_idx e = (da + 1) * dim; e < (steps + 1) * dim; e++)
            untouched &= ya[e] == 12345.0;
        snprintf(what, sizeof what, "%s probe: early stop at the first output outside [lo, hi]",
                 name);
        snprintf(d, sizeof d, "stopped after %lld of %lld steps", (long long)da, (long long)steps);
        cx_test_true(what, da > 0 && da < steps && inside && out && untouched, d,
                     "specification of cx_res_probe");
        wbig[3] = NAN;
        memset(ra, 0, (size_t)n * sizeof *ra);
        (void)cx_res_probe(ws, &res, wbig, 0.02, steps, NULL, NULL, ra, ya, &da);
        snprintf(what, sizeof what, "%s probe: non-finite readout stops at step 0", name);
        cx_test_true(what, da == 0, "", "specification of cx_res_probe");
        free(wbig);
        free(ya);
        free(yb);
        free(ra);
        free(rb);
        free(r0);
        free(wout);
        cx_res_ws_free(&ws);
    }
    free(bias);
    free(win);
    free_csr(&m);
}

static void test_solve_status(void)
{
    const cx_idx n = 60, steps = 200;
    const int dim = 2;
    cx_csr m = make_er(n, 4.0, 0.5, 51);
    double *win = make_win(n, dim, 0, 52);
    cx_reservoir res = make_res(n, dim, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, &m, win, NULL);
    cx_idx nf = cx_features_count(res.features, n);
    cx_res_ws *ws = NULL;
    (void)cx_res_ws_alloc(&ws, n, dim, res.features);
    double *u = calloc((size_t)((2 * steps + 1) * dim), sizeof *u);
    double *r = calloc((size_t)n, sizeof *r);
    double *g = calloc((size_t)(nf * nf), sizeof *g), *c = calloc((size_t)(nf * dim), sizeof *c);
    double *work = malloc((size_t)(nf * nf + dim * nf) * sizeof *work);
    double *wout = malloc((size_t)(dim * nf) * sizeof *wout);
    for (cx_idx e = 0; e < dim * nf; e++)
        wout[e] = 2.385;
    (void)cx_res_drive(ws, &res, u, 0.02, 20, steps - 20, 1, r, g, c);
    const double *gc[1] = {g}, *cc[1] = {c};
    const double w[1] = {1.0};
    int status = -1;
    int rc = cx_readout_solve(nf, dim, 1, gc, cc, w, 0.0, work, wout, &status);
    cx_test_true("zero signal, b = 0, beta = 0: status NOT_PD, return CX_OK, W_out untouched",
                 rc == CX_OK && status == CX_SOLVE_NOT_PD && wout[5] == 2.385, "",
                 "G = 0 is singular (Cholesky needs positive pivots: Golub & Van Loan 2013, "
                 "Matrix Computations, sec. 4.2)");
    g[3 + 7 * nf] = NAN; /* upper triangle: row 3, column 7 */
    rc = cx_readout_solve(nf, dim, 1, gc, cc, w, 0.1, work, wout, &status);
    cx_test_true("NaN in G: status NONFINITE, return CX_OK",
                 rc == CX_OK && status == CX_SOLVE_NONFINITE, "",
                 "specification of cx_readout_solve");
    free(wout);
    free(work);
    free(g);
    free(c);
    free(r);
    free(u);
    cx_res_ws_free(&ws);
    free(win);
    free_csr(&m);
}

static void test_lyapunov(void)
{
    const cx_idx n = 100;
    const int dim = 2;
    double *win = make_win(n, dim, 0, 61);
    double *bias = make_vec(n, -0.3, 0.3, 62);
    cx_csr m0 = make_empty(n);
    cx_idx nf = 2 * n;
    double *wzero = calloc((size_t)(nf * dim), sizeof *wzero);
    double *r = malloc((size_t)n * sizeof *r);
    cx_res_ws *ws = NULL;
    (void)cx_res_ws_alloc(&ws, n, dim, CX_FEAT_LINEAR_SQUARES);
    cx_rng g = stream(63);
    double lam = 0.0;
    {
        cx_reservoir res =
            make_res(n, dim, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, &m0, win, bias);
        const double dt = 0.01, z = -res.rate * dt;
        for (cx_idx i = 0; i < n; i++)
            r[i] = 0.1 * (double)(i % 7) - 0.3;
        (void)cx_res_lyapunov(ws, &res, wzero, dt, 500, 1e-7, &g, r, &lam);
        double want = log(1.0 + z + z * z / 2.0 + z * z * z / 6.0 + z * z * z * z / 24.0) / dt;
        cx_test_rel("continuous, M = 0, W_out = 0: lambda == ln R(-gamma dt) / dt", lam, want, 1e-7,
                    SRC_RK4R);
        cx_test_rel("  ... and == -gamma (exact flow) to O(h^4)", lam, -res.rate, 1e-6, SRC_RK4R);
    }
    {
        cx_reservoir res =
            make_res(n, dim, CX_MODEL_DISCRETE, CX_FEAT_LINEAR_SQUARES, &m0, win, bias);
        const double dt = 0.25;
        for (cx_idx i = 0; i < n; i++)
            r[i] = 0.05 * (double)(i % 5);
        (void)cx_res_lyapunov(ws, &res, wzero, dt, 300, 1e-7, &g, r, &lam);
        cx_test_rel("discrete, M = 0, W_out = 0: lambda == ln(1 - a) / dt", lam,
                    log(1.0 - res.leak) / dt, 1e-7, SRC_GEOM);
    }
    {
        /* Fixed point r = 0 (b = 0): the exponent is the largest real part of the eigenvalues of
         * the Jacobian gamma (-I + M + sigma W_in W_lin). */
        cx_csr m = make_er(n, 4.0, 0.6, 64);
        cx_reservoir res =
            make_res(n, dim, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, &m, win, NULL);
        res.rate = 1.3;
        double *wout = make_vec(nf * dim, -0.08, 0.08, 65);
        double *jac = calloc((size_t)(n * n), sizeof *jac); /* column-major */
        for (cx_idx i = 0; i < n; i++) {
            for (cx_idx q = m.rowptr[i]; q < m.rowptr[i + 1]; q++)
                jac[i + m.col[q] * n] += m.val[q];
            for (cx_idx j = 0; j < n; j++)
                for (int k = 0; k < dim; k++)
                    jac[i + j * n] += res.input_scaling * win[i * dim + k] * wout[k + j * dim];
            jac[i + i * n] -= 1.0;
        }
        double *wr = malloc((size_t)n * sizeof *wr), *wi = malloc((size_t)n * sizeof *wi);
        lapack_int info = LAPACKE_dgeev(LAPACK_COL_MAJOR, 'N', 'N', (lapack_int)n, jac,
                                        (lapack_int)n, wr, wi, NULL, 1, NULL, 1);
        double mu = -INFINITY;
        for (cx_idx i = 0; i < n; i++)
            mu = fmax(mu, wr[i]);
        mu *= res.rate;
        memset(r, 0, (size_t)n * sizeof *r);
        const double dt = 0.02;
        (void)cx_res_lyapunov(ws, &res, wout, dt, 15000, 1e-9, &g, r, &lam);
        char d[120];
        snprintf(d, sizeof d, "dgeev info %d", (int)info);
        cx_test_true("dgeev of the Jacobian", info == 0, d, SRC_BEN);
        cx_test_abs("continuous, fixed point r = 0: lambda vs gamma max Re eig(-I + M + sigma "
                    "W_in W_lin), T = 300",
                    lam, mu, 0.02 * fmax(1.0, fabs(mu)), SRC_BEN);
        free(wr);
        free(wi);
        free(jac);
        free(wout);
        free_csr(&m);
    }
    cx_res_ws_free(&ws);
    free(r);
    free(wzero);
    free_csr(&m0);
    free(bias);
    free(win);
}

/* Timing at N = 1000, mean degree 3 (printed, not asserted). */
static void test_timing(void)
{
    const cx_idx n = 1000;
    const int dim = 3;
    const double dt = 0.02;
    cx_csr m = make_er(n, 3.0, 0.9, 71);
    double *win = make_win(n, dim, 0, 72);
    double *bias = make_vec(n, -0.2, 0.2, 73);
    cx_reservoir res = make_res(n, dim, CX_MODEL_CONTINUOUS, CX_FEAT_LINEAR_SQUARES, &m, win, bias);
    cx_idx nf = cx_features_count(res.features, n);
    cx_res_ws *ws = NULL;
    (void)cx_res_ws_alloc(&ws, n, dim, res.features);
    const cx_idx steps = 3000, train = 600;
    double *u = make_series(1, res.model, dt, steps, dim);
    double *r = calloc((size_t)n, sizeof *r);
    double *g = calloc((size_t)(nf * nf), sizeof *g), *c = calloc((size_t)(nf * dim), sizeof *c);
    double t0 = now();
    (void)cx_res_drive(ws, &res, u, dt, steps, 0, 1, r, NULL, NULL);
    double t1 = now();
    (void)cx_res_drive(ws, &res, u, dt, 0, train, 1, r, g, c);
    double t2 = now();
    double *wout = make_vec(nf * dim, -0.01, 0.01, 74);
    double *y = malloc((size_t)((steps + 1) * dim) * sizeof *y);
    cx_idx done = 0;
    (void)cx_res_probe(ws, &res, wout, dt, steps, NULL, NULL, r, y, &done);
    double t3 = now();
    double stages = 4.0 * (double)n;
    printf("  timing N = 1000, mean degree %.2f, dim 3, features [r; r^2]:\n",
           (double)m.nnz / (double)n);
    printf("    drive (no Gram):        %.2f ns per node per RK4 stage\n",
           1e9 * (t1 - t0) / ((double)steps * stages));
    printf("    drive + Gram, stride 1: %.2f ns per node per RK4 stage (%.1f us per step)\n",
           1e9 * (t2 - t1) / ((double)train * stages), 1e6 * (t2 - t1) / (double)train);
    printf("    probe (closed loop):    %.2f ns per node per RK4 stage\n",
           1e9 * (t3 - t2) / ((double)done * stages));
    cx_test_true("timing runs completed", done == steps, "", "");
    free(y);
    free(wout);
    free(g);
    free(c);
    free(r);
    free(u);
    cx_res_ws_free(&ws);
    free(bias);
    free(win);
    free_csr(&m);
}

int main(void)
{
    test_ridge_vs_dgels();
    test_mirror();
    test_blocking();
    test_analytic();
    test_probe();
    test_solve_status();
    test_lyapunov();
    test_timing();
    return cx_test_finish();
}
