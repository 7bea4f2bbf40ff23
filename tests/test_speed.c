/* coexist tests: the fast paths of the stepping kernels change no labels and stay within their
 * stated error: SLEEF's and our own tanh against the C library's tanh over the whole range, the
 * early stop on a fixed point on the demo cells, a small sweep with every fast path on and off,
 * and cells computed as a group against the same cells one at a time. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/cell.h"
#include "coexist/error.h"
#include "coexist/rng.h"
#include "coexist/study.h"
#include "reservoir/reservoir_impl.h"
#include "testlib.h"

#if defined(__x86_64__)
#include <emmintrin.h>
#include <sleef.h>
#endif

void openblas_set_num_threads(int num_threads);

#define SRC_SLEEF                                                                                  \
    "SLEEF 3.5 documentation, tanh 3.5-ULP variant (Shibata & Petrogalli 2020, IEEE TPDS 31, "     \
    "1316) + glibc manual, 'Errors in Math Functions', tanh <= 2 ULP on x86_64 (from memory)"
#define SRC_EXPM1                                                                                  \
    "tanh.c's stated bound (<= 4 ULP from glibc's tanh, <= 3 ULP from the correctly rounded "      \
    "value) "                                                                                      \
    "against glibc's tanh and its x87 extended tanhl, 64-bit significand (glibc manual, 'Errors "  \
    "in Math Functions', from memory)"
#define SRC_IEEE                                                                                   \
    "IEEE 754-2008 / C11 Annex F.10.2.6: tanh(+-0) = +-0, tanh(+-inf) = +-1, NaN propagates"
#define SRC_ODD "analytic: tanh is odd, tanh(-x) = -tanh(x) (Abramowitz & Stegun 1964, 4.5.19)"
#define SRC_OURS                                                                                   \
    "property of the design (no external reference): a fast path must not change a label"

/* Distance in units in the last place between two doubles (ordered integer images of their
 * bits; the difference is taken in integers, a double would round it to a multiple of 512). */
static double ulps(double a, double b)
{
    if (a == b)
        return 0.0;
    int64_t ia, ib;
    memcpy(&ia, &a, sizeof ia);
    memcpy(&ib, &b, sizeof ib);
    if (ia < 0)
        ia = INT64_MIN - ia;
    if (ib < 0)
        ib = INT64_MIN - ib;
    if ((ia < 0) != (ib < 0))
        return (double)(ia < 0 ? -ia : ia) + (double)(ib < 0 ? -ib : ib);
    return (double)(ia > ib ? ia - ib : ib - ia);
}

/* One tanh mode over the whole range: error against libm (and, for our own, against the x87
 * long double tanhl), special values, oddness, bits independent of position and length. */
static void test_tanh_mode(int mode, const char *name, double bound, const char *source)
{
    /* Dense sweep of [-20, 20] (tanh rounds to +-1 beyond about 19.06), a log sweep of tiny
     * arguments, and the special values. */
    const cx_idx dense = 400001;
    const cx_idx tiny = 2 * 640;
    const cx_idx n = dense + tiny + 8;
    double *x = malloc((size_t)n * sizeof *x), *v = malloc((size_t)n * sizeof *v);
    if (x == NULL || v == NULL) {
        cx_test_true("allocation", 0, "", "");
        free(v);
        free(x);
        return;
    }
    for (cx_idx i = 0; i < dense; i++)
        x[i] = -20.0 + 40.0 * (double)i / (double)(dense - 1) + 1.37e-7;
    for (cx_idx i = 0; i < tiny / 2; i++) {
        x[dense + 2 * i] = pow(10.0, -320.0 + 0.5 * (double)i); /* 1e-320 (subnormal) .. 1e0 */
        x[dense + 2 * i + 1] = -x[dense + 2 * i];
    }
    const double special[8] = {0.0, -0.0, INFINITY, -INFINITY, NAN, 1e300, -1e300, 4.9e-324};
    memcpy(x + dense + tiny, special, sizeof special);
    memcpy(v, x, (size_t)n * sizeof *x);
    cx_res_tanh(mode, v, n);
    double worst = 0.0, at = 0.0, worst_l = 0.0;
    int odd = 1;
    for (cx_idx i = 0; i < dense + tiny; i++) {
        double e = ulps(v[i], tanh(x[i]));
        if (e > worst) {
            worst = e;
            at = x[i];
        }
        worst_l = fmax(worst_l, ulps(v[i], (double)tanhl((long double)x[i])));
    }
    /* odd symmetry: the mirror tests of the reservoir rely on it */
    double *w = malloc((size_t)n * sizeof *w);
    if (w != NULL) {
        for (cx_idx i = 0; i < n; i++)
            w[i] = -x[i];
        cx_res_tanh(mode, w, n);
        for (cx_idx i = 0; i < dense + tiny + 7; i++)
            if (!(w[i] == -v[i]) && !(isnan(w[i]) && isnan(v[i])))
                odd = 0;
    }
    char d[200], t[200];
    snprintf(d, sizeof d, "max %.1f ULP at x = %.6g over %lld arguments (%.1f from tanhl)", worst,
             at, (long long)(dense + tiny), worst_l);
    snprintf(t, sizeof t, "%s tanh vs libm tanh over [-20, 20] and 1e-320..1: <= %.1f ULP", name,
             bound);
    cx_test_true(t, worst <= bound, d, source);
    if (mode == CX_TANH_EXPM1)
        cx_test_true("expm1 tanh vs x87 tanhl over the same arguments: <= 3 ULP", worst_l <= 3.0, d,
                     SRC_EXPM1);
    const double *sv = v + dense + tiny;
    snprintf(t, sizeof t, "%s tanh(+0) = +0 and tanh(-0) = -0", name);
    cx_test_true(t, sv[0] == 0.0 && !signbit(sv[0]) && sv[1] == 0.0 && signbit(sv[1]), "",
                 SRC_IEEE);
    snprintf(t, sizeof t, "%s tanh(+inf) = 1, tanh(-inf) = -1", name);
    cx_test_true(t, sv[2] == 1.0 && sv[3] == -1.0, "", SRC_IEEE);
    snprintf(t, sizeof t, "%s tanh(NaN) is NaN", name);
    cx_test_true(t, isnan(sv[4]) != 0, "", SRC_IEEE);
    snprintf(t, sizeof t, "%s tanh(+-1e300) = +-1", name);
    cx_test_true(t, sv[5] == 1.0 && sv[6] == -1.0, "", SRC_IEEE);
    snprintf(d, sizeof d, "tanh(4.9e-324) = %g", sv[7]);
    snprintf(t, sizeof t, "%s tanh of the least subnormal = itself", name);
    cx_test_true(t, sv[7] == 4.9e-324, d, SRC_IEEE);
    snprintf(t, sizeof t, "%s tanh is exactly odd on every argument", name);
    cx_test_true(t, odd && w != NULL, "", SRC_ODD);

    /* The same value gives the same bits wherever it sits and whatever the array length (the
     * remainder of an array is padded, not computed another way). */
    int same = 1;
    for (cx_idx len = 1; len <= 9; len++) {
        double a[9];
        for (cx_idx i = 0; i < len; i++)
            a[i] = x[1000 + 7919 * i];
        cx_res_tanh(mode, a, len);
        for (cx_idx i = 0; i < len; i++)
            if (memcmp(&a[i], &v[1000 + 7919 * i], sizeof a[i]) != 0)
                same = 0;
    }
    snprintf(t, sizeof t, "%s tanh: bits independent of position and array length (1..9)", name);
    cx_test_true(t, same, "", SRC_OURS);
    if (mode == CX_TANH_EXPM1) {
        /* one value at a time takes the portable C path (an array shorter than a vector), the
         * dense array the AVX2 loop where the CPU has it: the same bits */
        int cross = 1;
        for (cx_idx i = 0; i < dense + tiny + 8; i++) {
            double one = x[i];
            cx_res_tanh(mode, &one, 1);
            if (memcmp(&one, &v[i], sizeof one) != 0)
                cross = 0;
        }
        cx_test_true("expm1 tanh: portable C == the vector loop, bit for bit", cross,
                     "every argument of the sweep", SRC_OURS);
        /* the whole array again at each narrower vector width: 4 lanes (AVX2) and none (the
         * portable C), against the widest the CPU has (v) */
        char dl[200];
        snprintf(dl, sizeof dl, "widest width here: %d lanes; every argument of the sweep",
                 cx_res_simd_lanes());
        for (int lim = 4; lim >= 1 && w != NULL; lim -= 3) {
            memcpy(w, x, (size_t)n * sizeof *x);
            const int old = cx_res_simd_limit(lim);
            cx_res_tanh(mode, w, n);
            cx_res_simd_limit(old);
            snprintf(t, sizeof t,
                     "expm1 tanh: the array at %d lane(s) == at the widest, bit for bit", lim);
            cx_test_true(t, memcmp(w, v, (size_t)n * sizeof *v) == 0, dl, SRC_OURS);
        }
        free(w);
        free(v);
        free(x);
        return;
    }
#if defined(__x86_64__)
    /* The SSE2/SSE4.1 functions that a CPU without AVX2 would use give the same bits here as the
     * path this CPU takes (AVX-512F or AVX2). */
    int cross = 1;
    for (cx_idx i = 0; i + 1 < dense; i += 2) {
        double b[2];
        _mm_storeu_pd(b, Sleef_tanhd2_u35(_mm_loadu_pd(x + i)));
        if (memcmp(b, v + i, sizeof b) != 0)
            cross = 0;
    }
    cx_test_true("vector tanh: 2-lane SSE functions == the dispatched wide path, bit for bit",
                 cross, "400001 arguments of the dense sweep", SRC_OURS);
#endif
    free(w);
    free(v);
    free(x);
}

static cx_study *load_file(const char *path)
{
    cx_study *s = NULL;
    if (cx_study_load(path, &s) != CX_OK) {
        cx_err_print("test_speed", 1);
        return NULL;
    }
    return s;
}

/* Every cell of s computed with (tanh, early stop) = a and then = b in one workspace (with the
 * same tanh the drive is reused, the probes are not); counts
 * the cells whose labels (outcome and attractor of every run, cell status, multifunctional flag)
 * differ, and the runs the fast setting ended early. */
static int compare_paths(const cx_study *s, int tanh_a, int stop_a, int tanh_b, int stop_b,
                         cx_idx *cells, int64_t *settled, double *max_metric)
{
    cx_cell_ws *wa = NULL;
    int differ = 0;
    *cells = cx_study_cells(s);
    *max_metric = 0.0;
    if (cx_cell_ws_create(&wa) != CX_OK) {
        differ = -1;
        goto done;
    }
    for (cx_idx cell = 0; cell < *cells; cell++) {
        cx_cell_params p;
        cx_cell_result ra, rb;
        if (cx_study_bind(s, cell, &p) != CX_OK) {
            differ = -1;
            goto done;
        }
        p.res.tanh_mode = tanh_a;
        p.probe.early_stop = stop_a;
        if (cx_cell_compute(wa, &p, cell, &ra) != CX_OK) {
            differ = -1;
            goto done;
        }
        p.res.tanh_mode = tanh_b;
        p.probe.early_stop = stop_b;
        if (cx_cell_compute(wa, &p, cell, &rb) != CX_OK) {
            differ = -1;
            goto done;
        }
        int same = ra.status == rb.status && ra.multifunctional == rb.multifunctional &&
                   ra.untrained == rb.untrained && ra.nruns == rb.nruns;
        for (int j = 0; j < ra.nruns && same; j++) {
            same = ra.runs[j].outcome == rb.runs[j].outcome &&
                   ra.runs[j].attractor == rb.runs[j].attractor;
            for (int k = 0; k < ra.ntasks; k++)
                if (isfinite(ra.runs[j].distance[k]))
                    *max_metric =
                        fmax(*max_metric, fabs(ra.runs[j].distance[k] - rb.runs[j].distance[k]));
        }
        if (!same)
            differ++;
    }
    *settled = cx_cell_ws_settled(wa);
done:
    cx_cell_ws_destroy(&wa);
    return differ;
}

static void test_early_stop_demo(void)
{
    const char *src = getenv("CX_SOURCE_DIR");
    char path[1024];
    snprintf(path, sizeof path, "%s/jobs/demo-window.yaml", src != NULL ? src : "..");
    cx_study *s = load_file(path);
    if (s == NULL) {
        cx_test_true("load jobs/demo-window.yaml", 0, path, "");
        return;
    }
    cx_idx cells = 0;
    int64_t settled = 0;
    double dm = 0.0;
    int differ = compare_paths(s, CX_TANH_EXPM1, 0, CX_TANH_EXPM1, 1, &cells, &settled, &dm);
    char d[200];
    snprintf(d, sizeof d,
             "%d of %lld cells differ; %lld runs ended early; max |distance "
             "change| %.2g",
             differ, (long long)cells, (long long)settled, dm);
    cx_test_true("demo sweep: early stop on vs off, every run's label identical", differ == 0, d,
                 SRC_OURS);
    cx_test_true("demo sweep: the early stop was taken by some runs", settled > 0, d, SRC_OURS);
    cx_test_abs("demo sweep: early stop moves distances by at most 1e-6 signal units", dm, 0.0,
                1e-6, "bound of the settle test: n_tail steps x 1e-6 fixed_tol S (cell.c)");
    cx_study_destroy(&s);
}

static const char *small_yaml =
    "study: {name: speed-test, seed: 6607}\n"
    "reservoir: {nodes: 120, mean_degree: 3, rate: 5.0, input_scaling: 0.13}\n"
    "training: {dt: 0.02, washout: 10, length: 40, ridge: 0.7}\n"
    "probe: {horizon: 60, tail: 15, random_starts: 3}\n"
    "tasks:\n"
    "  - {kind: cycle, name: near, centre: [-1.1, 0.15], radius: 0.95, speed: 2.3}\n"
    "  - {kind: cycle, name: far, centre: [1.2, -0.25], radius: 1.75, ellipticity: 0.8, speed: "
    "-1.35}\n"
    "axes:\n"
    "  reservoir.spectral_radius: [0.15, 0.45, 0.85, 1.25, 1.65, 2.2]\n"
    "  training.blend: [0.4, 0.6]\n"
    "  seed: {count: 2}\n";

static void test_small_sweep(void)
{
    cx_study *s = NULL;
    if (cx_study_load_buffer(small_yaml, strlen(small_yaml), "speed.yaml", &s) != CX_OK) {
        cx_err_print("test_speed", 1);
        cx_test_true("load the small sweep", 0, "", "");
        return;
    }
    cx_idx cells = 0;
    int64_t settled = 0;
    double dm = 0.0;
    char d[200];
    const int fast[2] = {CX_TANH_EXPM1, CX_TANH_VECTOR};
    const char *names[2] = {"expm1", "vector"};
    for (int f = 0; f < 2; f++) {
        char t[200];
        int differ = compare_paths(s, CX_TANH_LIBM, 0, fast[f], 1, &cells, &settled, &dm);
        snprintf(d, sizeof d, "%d of %lld cells differ; %lld runs ended early", differ,
                 (long long)cells, (long long)settled);
        snprintf(t, sizeof t,
                 "small sweep: labels identical with every fast path on (%s tanh, early stop) vs "
                 "off",
                 names[f]);
        cx_test_true(t, differ == 0 && cells >= 20, d, SRC_OURS);
    }
    cx_test_true("small sweep: the early stop was taken by some runs", settled > 0, d, SRC_OURS);
    cx_study_destroy(&s);
}

/* A random reservoir for the kernel checks: n nodes, 3 links per node, one input per node. */
typedef struct toy {
    cx_csr m;
    cx_idx *rowptr, *col;
    double *val, *win, *wout;
    double *wout2; /* a second readout (W_out scaled by 0.93): runs of another cell */
} toy;

/* dense_in: every entry of W_in non-zero (else one per node) */
static int toy_make(toy *t, cx_idx n, int dim, double scale, uint64_t seed, int dense_in)
{
    const int deg = 3;
    cx_rng rng;
    cx_rng_seed(&rng, seed, 17);
    t->rowptr = malloc((size_t)(n + 1) * sizeof *t->rowptr);
    t->col = malloc((size_t)(n * deg) * sizeof *t->col);
    t->val = malloc((size_t)(n * deg) * sizeof *t->val);
    t->win = calloc((size_t)(n * dim), sizeof *t->win);
    t->wout = malloc((size_t)((2 * n + 1) * dim) * sizeof *t->wout);
    t->wout2 = malloc((size_t)((2 * n + 1) * dim) * sizeof *t->wout2);
    if (!t->rowptr || !t->col || !t->val || !t->win || !t->wout || !t->wout2)
        return 0;
    for (cx_idx i = 0; i <= n; i++)
        t->rowptr[i] = i * deg;
    for (cx_idx p = 0; p < n * deg; p++) {
        t->col[p] = (cx_idx)cx_rng_range(&rng, 0.0, (double)n - 1e-9);
        t->val[p] = cx_rng_range(&rng, -scale, scale);
    }
    for (cx_idx i = 0; i < n; i++)
        for (int j = 0; j < dim; j++)
            if (dense_in || j == i % dim)
                t->win[i * dim + j] = cx_rng_range(&rng, -1.0, 1.0);
    for (cx_idx i = 0; i < (2 * n + 1) * dim; i++)
        t->wout[i] = cx_rng_range(&rng, -2.0, 2.0) / (double)n;
    for (cx_idx i = 0; i < (2 * n + 1) * dim; i++)
        t->wout2[i] = 0.93 * t->wout[i];
    t->m.n = n;
    t->m.nnz = n * deg;
    t->m.rowptr = t->rowptr;
    t->m.col = t->col;
    t->m.val = t->val;
    return 1;
}

static void toy_free(toy *t)
{
    free(t->wout2);
    free(t->wout);
    free(t->win);
    free(t->val);
    free(t->col);
    free(t->rowptr);
}

/* The vector passes over the row layout (rows.c: the pre-activations of one closed-loop run, and
 * the whole open-loop stage of the drive in position order) on rows of irregular length: a drive
 * and a closed-loop run of one reservoir give the same bits with vectors of 8, 4 and 1 lanes (1:
 * the scalar passes of model.c alone). Rows of 0 to 9 entries, n not a multiple of 8, one-per-node
 * and dense W_in, both models, and a strong network whose runs saturate. */
static void test_rows(void)
{
    const cx_idx n = 103, steps = 300;
    int same = 1, cases = 0;
    for (int variant = 0; variant < 4; variant++) {
        const int model = variant & 1, dense = variant >> 1, dim = dense ? 3 : 2;
        cx_rng rng;
        cx_rng_seed(&rng, 5501 + (uint64_t)variant, 3);
        cx_idx rowptr[104], col[104 * 9];
        double val[104 * 9], win[103 * 3], bias[103], wout[(2 * 103 + 1) * 3];
        rowptr[0] = 0;
        for (cx_idx i = 0; i < n; i++) {
            const cx_idx len = (cx_idx)cx_rng_range(&rng, 0.0, 9.999);
            for (cx_idx k = 0; k < len; k++) {
                col[rowptr[i] + k] = (cx_idx)cx_rng_range(&rng, 0.0, (double)n - 1e-9);
                val[rowptr[i] + k] = cx_rng_range(&rng, -0.9, 0.9);
            }
            rowptr[i + 1] = rowptr[i] + len;
            bias[i] = cx_rng_range(&rng, -0.2, 0.2);
            for (int j = 0; j < dim; j++)
                win[i * dim + j] = dense || j == i % dim ? cx_rng_range(&rng, -1.0, 1.0) : 0.0;
        }
        for (cx_idx i = 0; i < (2 * n + 1) * dim; i++)
            wout[i] = cx_rng_range(&rng, -3.0, 3.0) / (double)n;
        cx_csr m = {n, rowptr[n], rowptr, col, val};
        cx_reservoir res = {0};
        res.n = n;
        res.dim = dim;
        res.model = model;
        res.features = CX_FEAT_LINEAR_SQUARES;
        res.rate = 4.0;
        res.leak = 0.5;
        res.input_scaling = 0.7;
        res.tanh_mode = CX_TANH_EXPM1;
        res.m = &m;
        res.w_in = win;
        res.bias = bias;
        double u[(2 * 300 + 1) * 3];
        for (cx_idx t = 0; t <= 2 * steps; t++)
            for (int j = 0; j < dim; j++)
                u[t * dim + j] = sin(0.03 * (double)t + (double)j);
        double rd[4][103], rp[4][103], yp[4][(300 + 1) * 3];
        cx_res_ws *ws = NULL;
        if (cx_res_ws_alloc(&ws, n, dim, CX_FEAT_LINEAR_SQUARES) != CX_OK) {
            same = 0;
            continue;
        }
        /* 8 lanes with either gather (the gather instruction, then scalar loads), 4, none */
        const int lims[4] = {8, 8, 4, 1}, hw[4] = {1, 0, 0, 0};
        for (int w = 0; w < 4; w++) {
            const int old = cx_res_simd_limit(lims[w]);
            const int old_gather = cx_res_gather_force(hw[w]);
            cx_idx done_steps = 0;
            memset(rd[w], 0, sizeof rd[w]);
            if (cx_res_drive(ws, &res, u, 0.02, steps, 0, 1, rd[w], NULL, NULL) != CX_OK)
                same = 0;
            memcpy(rp[w], rd[w], sizeof rp[w]);
            memset(yp[w], 0, sizeof yp[w]);
            if (cx_res_probe(ws, &res, wout, 0.02, steps, NULL, NULL, rp[w], yp[w], &done_steps) !=
                CX_OK)
                same = 0;
            cx_res_gather_force(old_gather);
            cx_res_simd_limit(old);
        }
        for (int w = 1; w < 4; w++)
            same &= memcmp(rd[w], rd[0], sizeof rd[0]) == 0 &&
                    memcmp(rp[w], rp[0], sizeof rp[0]) == 0 &&
                    memcmp(yp[w], yp[0], sizeof yp[0]) == 0;
        cases++;
        cx_res_ws_free(&ws);
    }
    char d[120];
    snprintf(d, sizeof d, "%d cases, widest vector here %d lanes", cases, cx_res_simd_lanes());
    cx_test_true("vector pre-activations on rows of 0..9 entries: drive and closed loop at 8 "
                 "lanes (gather instruction or scalar loads), 4 and 1 lane give the same bits "
                 "(both models, one-per-node and dense W_in)",
                 same && cases == 4, d, SRC_OURS);
}

/* cx_res_probe_batch against cx_res_probe_settle run by run, bit for bit, for B = 1..16, both
 * models, runs that leave the box, settle, or run the whole horizon; every other run has a second
 * readout, as the runs of two cells of a blend axis sharing one block, and every other pair of
 * runs a wider box and a longer early-stop window, as the runs of two cells of a task or
 * classifier axis, and every third run (shifted from case to case, so that single runs, pairs
 * and wider blocks all have some) M scaled by 0.85, as the runs of two cells of a
 * spectral-radius axis. The batches run at each vector width (8 lanes where the CPU has
 * AVX-512F, 4, none), the single runs at the widest. */
static void test_batch(void)
{
    /* n = 91 is odd: the last nodes of every kernel (the pair kernel's partial register) run */
    const cx_idx n = 91, steps = 700;
    const int maxb = 16;
    int same = 1, cases = 0;
    int64_t left = 0, settled = 0, full = 0;
    const int widest = cx_res_simd_lanes();
    for (int model = 0; model < 2; model++) {
        for (int active = 0; active < 4; active++) {
            /* active & 1: a strong network (runs leave the box) or a weak one (runs settle);
             * active & 2: our own tanh, which takes the fused kernel (fused.c) where the CPU has
             * AVX2, against the scalar kernels of one run at a time; then also the other feature
             * maps, and with active = 3 a dense W_in and three outputs */
            const int dim = active == 3 ? 3 : 2;
            const int feat = active & 2 ? (model ? CX_FEAT_LINEAR : CX_FEAT_LINEAR_SQUARES_CONSTANT)
                                        : CX_FEAT_LINEAR_SQUARES;
            toy t;
            cx_res_ws *ws = NULL;
            double *r1 = malloc((size_t)(n * maxb) * sizeof *r1);
            double *r2 = malloc((size_t)(n * maxb) * sizeof *r2);
            double *y1 = malloc((size_t)((steps + 1) * dim * maxb) * sizeof *y1);
            double *y2 = malloc((size_t)((steps + 1) * dim * maxb) * sizeof *y2);
            double *val2 = NULL;
            if (!toy_make(&t, n, dim, active & 1 ? 1.4 : 0.25,
                          3301 + (uint64_t)(2 * model + (active & 1)), active == 3) ||
                (val2 = malloc((size_t)t.m.nnz * sizeof *val2)) == NULL || !r1 || !r2 || !y1 ||
                !y2 || cx_res_ws_alloc(&ws, n, dim, feat) != CX_OK ||
                cx_res_ws_set_batch(ws, maxb) != CX_OK) {
                same = 0;
                goto next;
            }
            cx_reservoir res = {0};
            res.n = n;
            res.dim = dim;
            res.model = model;
            res.features = feat;
            res.rate = 4.3;
            res.leak = 0.37;
            res.input_scaling = 0.6;
            res.tanh_mode =
                active & 2 ? CX_TANH_EXPM1 : (active & 1 ? CX_TANH_VECTOR : CX_TANH_LIBM);
            res.m = &t.m;
            res.w_in = t.win;
            /* the same reservoir with M scaled by 0.85, as stage_input of cell.c scales it */
            for (cx_idx e = 0; e < t.m.nnz; e++)
                val2[e] = t.m.val[e] * 0.85;
            cx_csr m2 = t.m;
            m2.val = val2;
            cx_reservoir res2 = res;
            res2.m = &m2;
            /* runs 2-3, 6-7, ... have limits of their own: a wider box and a longer early-stop
             * window */
            const double lo[3] = {-0.16, -0.16, -0.16}, hi[3] = {0.16, 0.16, 0.16};
            const double lo2[3] = {-0.2, -0.2, -0.2}, hi2[3] = {0.2, 0.2, 0.2};
            const cx_res_limits lims[2] = {{lo, hi, {25, 1e-11, 1e-12}},
                                           {lo2, hi2, {40, 1e-11, 1e-12}}};
            for (int nbw = 0; nbw < 3 * maxb; nbw++) {
                const int nb = nbw % maxb + 1, lim = nbw < maxb ? 8 : nbw < 2 * maxb ? 4 : 1;
                cx_rng rng;
                cx_rng_seed(&rng, 77 + (uint64_t)nb, 5);
                double *rs[16], *ys[16];
                const double *wo[16], *mv[16];
                const cx_res_limits *lp[16];
                cx_idx sd1[16], sa1[16], sd2[16], sa2[16];
                memset(y1, 0, (size_t)((steps + 1) * dim * maxb) * sizeof *y1);
                memset(y2, 0, (size_t)((steps + 1) * dim * maxb) * sizeof *y2);
                for (int b = 0; b < nb; b++) {
                    const double a = 0.2 + 0.35 * (double)b;
                    for (cx_idx i = 0; i < n; i++)
                        r1[b * n + i] = r2[b * n + i] = cx_rng_range(&rng, -a, a);
                    wo[b] = b % 2 ? t.wout2 : t.wout;
                    lp[b] = &lims[(b / 2) % 2];
                    const int scaled = (b + nbw) % 3 == 1;
                    mv[b] = scaled ? val2 : NULL;
                    if (cx_res_probe_settle(ws, scaled ? &res2 : &res, wo[b], 0.02, steps,
                                            lp[b]->lo, lp[b]->hi, &lp[b]->settle, r1 + b * n,
                                            y1 + b * (steps + 1) * dim, &sd1[b], &sa1[b]) != CX_OK)
                        same = 0;
                    rs[b] = r2 + b * n;
                    ys[b] = y2 + b * (steps + 1) * dim;
                }
                const int old = cx_res_simd_limit(lim);
                if (cx_res_probe_batch(ws, &res, wo, mv, 0.02, steps, lp, nb, rs, ys, sd2, sa2) !=
                    CX_OK)
                    same = 0;
                cx_res_simd_limit(old);
                for (int b = 0; b < nb; b++) {
                    same &= sd1[b] == sd2[b] && sa1[b] == sa2[b];
                    if (sa1[b] >= 0)
                        settled++;
                    else if (sd1[b] < steps)
                        left++;
                    else
                        full++;
                }
                same &= memcmp(r1, r2, (size_t)(n * nb) * sizeof *r1) == 0;
                same &= memcmp(y1, y2, (size_t)((steps + 1) * dim * nb) * sizeof *y1) == 0;
                cases++;
            }
        next:
            cx_res_ws_free(&ws);
            free(val2);
            free(y2);
            free(y1);
            free(r2);
            free(r1);
            toy_free(&t);
        }
    }
    char d[200];
    snprintf(d, sizeof d,
             "%d cases; runs: %lld left the box, %lld settled, %lld full horizon; widest vector "
             "here %d lanes",
             cases, (long long)left, (long long)settled, (long long)full, widest);
    cx_test_true("batched probe == one run at a time, bit for bit (outputs, states, stop steps), "
                 "B = 1..16, both models, three tanh, three feature maps, one-per-node and dense "
                 "W_in, 2 and 3 outputs, two readouts, two box sizes and two scalings of M in one "
                 "block, vectors of 8, 4 and 1 lanes",
                 same && cases == 384, d, SRC_OURS);
    cx_test_true("batched probe check covers runs that leave, settle and run the whole horizon",
                 left > 0 && settled > 0 && full > 0, d, SRC_OURS);
}

/* Cells computed as groups (cx_cell_compute_group, the engine's way) against the same cells one
 * at a time in a fresh workspace: every result bit for bit, timings apart. */
static const char *group_yaml =
    "study: {name: group-test, seed: 8819}\n"
    "reservoir: {nodes: 110, mean_degree: 3, rate: 5.0, input_scaling: 0.13}\n"
    "training: {dt: 0.02, washout: 10, length: 40, ridge: 0.7}\n"
    "probe: {horizon: 60, tail: 15, random_starts: 2, early_stop: true}\n"
    "tasks:\n"
    "  - {kind: cycle, name: near, centre: [-1.1, 0.15], radius: 0.95, speed: 2.3}\n"
    "  - {kind: cycle, name: far, centre: [1.2, -0.25], radius: 1.75, ellipticity: 0.8, speed: "
    "-1.35}\n"
    "axes:\n"
    "  seed: {count: 2}\n"
    "  reservoir.spectral_radius: [0.3, 1.0, 2.4]\n"
    "  training.ridge: [1.0e-3, 1.0e-20]\n"
    "  training.blend: {from: 0.0, to: 1.0, count: 5}\n";

/* Cells that share the network but not the spectral radius, the tasks, the washout or the
 * classifier's bound: each cell's runs keep their own M, starts (drive-point starts depend on the
 * training signals), box and early-stop test inside the shared block. The spectral radius is the
 * last axis, so that every group holds both values; Lyapunov exponents are on, since they are
 * computed after the block, on each cell's own M. */
static const char *group_tasks_yaml =
    "study: {name: group-tasks-test, seed: 4127}\n"
    "reservoir: {nodes: 96, mean_degree: 3, rate: 5.0, input_scaling: 0.13}\n"
    "training: {dt: 0.02, washout: 10, length: 40, ridge: 1.0e-4}\n"
    "probe: {horizon: 60, tail: 15, random_starts: 1, early_stop: true, start_mode: drive-point, "
    "drive_time: 2, lyapunov: true, lyapunov_time: 5}\n"
    "tasks:\n"
    "  - {kind: cycle, name: near, centre: [-1.1, 0.15], radius: 0.95, speed: 2.3}\n"
    "  - {kind: cycle, name: far, centre: [1.2, -0.25], radius: 1.75, ellipticity: 0.8, speed: "
    "-1.35}\n"
    "axes:\n"
    "  tasks.near.radius: [0.6, 0.95, 1.3]\n"
    "  training.washout: [10, 14]\n"
    "  classify.bound: [4, 1.001]\n"
    "  training.blend: [0.3, 0.5]\n"
    "  reservoir.spectral_radius: [0.4, 1.3]\n";

static void test_group(const char *yaml, const char *name, const char *what, int want_largest)
{
    cx_study *s = NULL;
    cx_cell_ws *wa = NULL, *wb = NULL;
    cx_cell_params *p = NULL;
    cx_cell_result *ra = NULL, *rb = NULL;
    if (cx_study_load_buffer(yaml, strlen(yaml), name, &s) != CX_OK ||
        cx_cell_ws_create(&wa) != CX_OK || cx_cell_ws_create(&wb) != CX_OK) {
        cx_err_print("test_speed", 1);
        cx_test_true("load the group sweep", 0, "", "");
        goto done;
    }
    const cx_idx cells = cx_study_cells(s);
    p = calloc((size_t)cells, sizeof *p);
    ra = calloc((size_t)cells, sizeof *ra);
    rb = calloc((size_t)cells, sizeof *rb);
    int ok = p != NULL && ra != NULL && rb != NULL;
    for (cx_idx c = 0; ok && c < cells; c++)
        ok = cx_study_bind(s, c, &p[c]) == CX_OK && cx_cell_compute(wa, &p[c], c, &ra[c]) == CX_OK;
    int groups = 0, largest = 0;
    for (cx_idx c = 0; ok && c < cells;) {
        const cx_cell_params *pp[CX_CELL_GROUP];
        cx_idx ids[CX_CELL_GROUP];
        int k = 0, used = 0;
        for (; k < CX_CELL_GROUP && c + k < cells; k++) {
            pp[k] = &p[c + k];
            ids[k] = c + k;
        }
        ok = cx_cell_compute_group(wb, pp, ids, k, rb + c, &used) == CX_OK && used >= 1;
        groups++;
        largest = used > largest ? used : largest;
        c += used;
    }
    int same = ok, failed = 0;
    for (cx_idx c = 0; ok && c < cells; c++) {
        memset(&ra[c].time, 0, sizeof ra[c].time);
        memset(&rb[c].time, 0, sizeof rb[c].time);
        same &= memcmp(&ra[c], &rb[c], sizeof ra[c]) == 0;
        failed += ra[c].status != CX_CELL_COMPUTED;
    }
    char d[200], t[300];
    snprintf(d, sizeof d, "%s: %lld cells in %d groups of up to %d; %d cells not computed", name,
             (long long)cells, groups, largest, failed);
    snprintf(t, sizeof t,
             "cells computed as groups == one at a time, bit for bit (every field but the "
             "timings): %s",
             what);
    cx_test_true(t, same, d, SRC_OURS);
    snprintf(t, sizeof t, "the group sweep forms groups of %d cells: %s", want_largest, what);
    cx_test_true(t, ok && largest == want_largest, d, SRC_OURS);
done:
    free(rb);
    free(ra);
    free(p);
    cx_cell_ws_destroy(&wb);
    cx_cell_ws_destroy(&wa);
    cx_study_destroy(&s);
}

int main(void)
{
    openblas_set_num_threads(1);
    test_tanh_mode(CX_TANH_VECTOR, "vector", 5.5, SRC_SLEEF); /* 3.5 + glibc's 2 */
    test_tanh_mode(CX_TANH_EXPM1, "expm1", 4.0, SRC_EXPM1);
    test_rows();
    test_batch();
    test_group(group_yaml, "group.yaml", "blend and ridge axes", CX_CELL_GROUP);
    test_group(group_tasks_yaml, "group-tasks.yaml",
               "task radius, washout, classifier bound, blend and spectral-radius axes",
               CX_CELL_GROUP);
    test_early_stop_demo();
    test_small_sweep();
    return cx_test_finish();
}
