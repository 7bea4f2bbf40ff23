/* Tests of the outcome classification (src/classify/) on signals whose answer is known in
 * closed form: circles, ellipses, spirals and a period-doubled orbit, plus trajectories of the
 * Lorenz (1963) and Rossler (1976) flows integrated here with the classical fourth-order
 * Runge-Kutta method (Kutta 1901, Z. Math. Phys. 46, 435). The k-d tree is checked against a
 * brute-force scan. Timings are printed, not asserted.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "coexist/classify.h"
#include "coexist/error.h"
#include "coexist/rng.h"
#include "classify/classify_impl.h"
#include "testlib.h"

#define PI 3.14159265358979323846

static const char *const ANALYTIC = "analytic, closed form of the test signal";
#define RULE "common practice, no published source (default thresholds)"

static double now(void)
{
    struct timespec ts;
    timespec_get(&ts, TIME_UTC);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void *xmalloc(size_t n)
{
    void *p = malloc(n);
    if (p == NULL) {
        fprintf(stderr, "out of memory\n");
        exit(2);
    }
    return p;
}

/* Circle of radius r about (cx, cy), angular speed w (negative: clockwise), phase 0 at t = 0,
 * optional N(0, sigma^2) noise on each coordinate. */
static void circle(double *y, cx_idx n, double dt, double cx, double cy, double r, double w,
                   double sigma, cx_rng *rng)
{
    for (cx_idx i = 0; i < n; i++) {
        double t = (double)i * dt;
        y[2 * i] = cx + r * cos(w * t);
        y[2 * i + 1] = cy + r * sin(w * t);
        if (sigma > 0.0) {
            y[2 * i] += sigma * cx_rng_normal(rng);
            y[2 * i + 1] += sigma * cx_rng_normal(rng);
        }
    }
}

typedef void (*flow_fn)(const double *x, double *f);

static void lorenz(const double *x, double *f)
{
    /* Lorenz 1963, J. Atmos. Sci. 20, 130: sigma 10, r 28, b 8/3. */
    f[0] = 10.0 * (x[1] - x[0]);
    f[1] = x[0] * (28.0 - x[2]) - x[1];
    f[2] = x[0] * x[1] - (8.0 / 3.0) * x[2];
}

static void rossler(const double *x, double *f)
{
    /* Rossler 1976, Phys. Lett. A 57, 397: a 0.2, b 0.2, c 5.7. */
    f[0] = -x[1] - x[2];
    f[1] = x[0] + 0.2 * x[1];
    f[2] = 0.2 + x[2] * (x[0] - 5.7);
}

/* RK4 with step h from x0: skip `transient` steps, then store n samples every `every` steps. */
static void integrate(flow_fn f, const double *x0, double h, cx_idx transient, cx_idx n, int every,
                      double *out)
{
    double x[3] = {x0[0], x0[1], x0[2]}, k1[3], k2[3], k3[3], k4[3], t[3];
    cx_idx total = transient + n * every;
    for (cx_idx s = 0; s < total; s++) {
        if (s >= transient && (s - transient) % every == 0) {
            cx_idx j = (s - transient) / every;
            for (int c = 0; c < 3; c++)
                out[3 * j + c] = x[c];
        }
        f(x, k1);
        for (int c = 0; c < 3; c++)
            t[c] = x[c] + 0.5 * h * k1[c];
        f(t, k2);
        for (int c = 0; c < 3; c++)
            t[c] = x[c] + 0.5 * h * k2[c];
        f(t, k3);
        for (int c = 0; c < 3; c++)
            t[c] = x[c] + h * k3[c];
        f(t, k4);
        for (int c = 0; c < 3; c++)
            x[c] += h / 6.0 * (k1[c] + 2.0 * k2[c] + 2.0 * k3[c] + k4[c]);
    }
}

/* Expected range of n standard normal deviates, E = int [1 - P(x)^n - (1 - P(x))^n] dx
 * (L. H. C. Tippett, "On the extreme individuals and the range of samples taken from a normal
 * population", Biometrika 17 (1925) 364), by the trapezoidal rule on [-10, 10]. */
static double normal_range_mean(double n)
{
    double s = 0.0, h = 1e-3;
    for (int i = 0; i <= 20000; i++) {
        double x = -10.0 + h * i;
        double p = 0.5 * erfc(-x / sqrt(2.0));
        double g = 1.0 - pow(p, n) - pow(1.0 - p, n);
        s += (i == 0 || i == 20000 ? 0.5 : 1.0) * g;
    }
    return s * h;
}

static int classify(cx_class_ws *ws, const cx_attractor *const *atts, int natt, const double *lo,
                    const double *hi, const double *y, cx_idx n_total, cx_idx n_tail, int dim,
                    double dt, int own, const double *truth, cx_run_metrics *m)
{
    cx_class_params p;
    cx_class_defaults(&p);
    int rc =
        cx_classify_run(ws, &p, atts, natt, lo, hi, y, n_total, n_tail, dim, dt, own, truth, m);
    if (rc != CX_OK) {
        cx_err_print("test_classify", 1);
        exit(2);
    }
    return m->outcome;
}

static void outcome_is(const char *what, int got, int want, const char *source)
{
    char d[128];
    snprintf(d, sizeof d, "got %s, want %s", cx_outcome_name(got), cx_outcome_name(want));
    cx_test_true(what, got == want, d, source);
}

static void test_kd(void)
{
    cx_rng rng;
    cx_rng_keyed(&rng, 2385, CX_RNG_TEST, NULL, 0);
    const int dims[4] = {1, 3, 5, 8};
    const cx_idx n = 3000, nq = 400;
    double *pts = xmalloc((size_t)(n * CX_MAX_DIM) * sizeof(double));
    double *orig = xmalloc((size_t)(n * CX_MAX_DIM) * sizeof(double));
    unsigned char *split = xmalloc((size_t)n);
    double *box = xmalloc((size_t)(n * 2 * CX_MAX_DIM) * sizeof(double));
    for (int id = 0; id < 4; id++) {
        int dim = dims[id];
        for (cx_idx i = 0; i < n * dim; i++) {
            /* Half the points on a coarse lattice so that ties and equal coordinates occur. */
            double v = cx_rng_range(&rng, -3.7, 5.1);
            orig[i] = (i % 2 == 0) ? floor(v * 4.0) / 4.0 : v;
            pts[i] = orig[i];
        }
        cx_kd t;
        cx_kd_build(&t, pts, split, box, n, dim);
        int nn_equal = 1, within_equal = 1;
        cx_idx hint = -1;
        for (cx_idx q = 0; q < nq; q++) {
            double x[CX_MAX_DIM];
            for (int c = 0; c < dim; c++)
                x[c] = cx_rng_range(&rng, -4.3, 5.9);
            if (q % 10 == 0)
                for (int c = 0; c < dim; c++)
                    x[c] = orig[(q * 7 % n) * dim + c]; /* a query exactly on a point */
            double best = INFINITY;
            for (cx_idx i = 0; i < n; i++) {
                double s = 0.0;
                for (int c = 0; c < dim; c++) {
                    double d = orig[i * dim + c] - x[c];
                    s += d * d;
                }
                if (s < best)
                    best = s;
            }
            double got = cx_kd_nearest2(&t, x, q % 2 == 0 ? NULL : &hint);
            if (sqrt(got) != sqrt(best))
                nn_equal = 0;
            double r2 = best * (q % 3 == 0 ? 1.0 : (q % 3 == 1 ? 0.999 : 1.7));
            if (cx_kd_any_within(&t, x, r2) != (best <= r2))
                within_equal = 0;
        }
        char what[128];
        snprintf(what, sizeof what, "k-d nearest distance == brute force, dim %d, %lld queries",
                 dim, (long long)nq);
        cx_test_true(what, nn_equal, "exact equality",
                     "brute-force scan over all points (definition of the nearest neighbour)");
        snprintf(what, sizeof what, "k-d radius query == brute force, dim %d", dim);
        cx_test_true(what, within_equal, "radius = 0.999, 1, 1.7 x nearest distance",
                     "brute-force scan over all points");
    }
    free(box);
    free(split);
    free(orig);
    free(pts);
}

static void test_box(void)
{
    const double sq[8] = {1.0, -2.0, 3.0, -2.0, 3.0, 5.0, 1.0, 5.0};
    const double *xs[1] = {sq};
    cx_idx ns[1] = {4};
    double lo[2], hi[2];
    cx_class_box(xs, ns, 1, 2, 4.0, lo, hi);
    cx_test_abs("bound box x low (box [1,3] grown x4 about 2)", lo[0], -2.0, 1e-12, ANALYTIC);
    cx_test_abs("bound box x high", hi[0], 6.0, 1e-12, ANALYTIC);
    cx_test_abs("bound box y low (box [-2,5] grown x4 about 1.5)", lo[1], -12.5, 1e-12, ANALYTIC);
    cx_test_abs("bound box y high", hi[1], 15.5, 1e-12, ANALYTIC);
}

#define C_DT    0.01
#define C_R     2.385
#define C_W     1.37
#define C_XC    1.3
#define C_YC    (-0.7)
#define C_SIGMA 0.01
#define C_N     8000
#define C_NTAIL 5000

/* One trained circle (radius C_R about (C_XC, C_YC), anticlockwise at C_W) and run buffers. */
typedef struct circle_case {
    cx_class_ws *ws;
    const cx_attractor *atts[1];
    double lo[2], hi[2];
    double *y, *truth;
    cx_rng rng;
} circle_case;

static void circle_noisy(circle_case *cc)
{
    cx_run_metrics m;
    const double eps = 0.005;
    /* Noisy circle turning slightly faster than the truth: reconstructed, valid time from
     * |error| = 2 r sin(eps w t / 2) reaching 0.4 r. */
    circle(cc->y, C_N, C_DT, C_XC, C_YC, C_R, C_W * (1.0 + eps), C_SIGMA, &cc->rng);
    circle(cc->truth, C_N, C_DT, C_XC, C_YC, C_R, C_W, 0.0, NULL);
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, cc->truth, &m);
    outcome_is("noisy circle on its trained circle", m.outcome, CX_OUT_RECONSTRUCTED, RULE);
    cx_test_true("noisy circle: attractor index 0", m.attractor == 0, "", ANALYTIC);
    cx_test_rel("noisy circle period 2 pi / (w (1 + eps))", m.period,
                2.0 * PI / (C_W * (1.0 + eps)), 0.01, ANALYTIC);
    cx_test_abs("noisy circle rotation (anticlockwise)", m.rotation, 1.0, 0.0, ANALYTIC);
    double er = normal_range_mean((double)C_NTAIL) * C_SIGMA;
    cx_test_abs("noisy circle roundness = expected range of the radial noise", m.roundness, er,
                2.0 * C_SIGMA,
                "Tippett 1925, Biometrika 17, 364: mean range of n normal deviates (integrated "
                "here); tolerance 2 sigma for the spread of one sample");
    double tv = 2.0 * asin(0.2) / (eps * C_W);
    /* Noise makes the error cross early by up to ~4 sigma over the slope of the error. */
    double slope = C_R * eps * C_W * cos(asin(0.2));
    cx_test_abs("noisy circle valid time (0.4 r error threshold)", m.valid_time, tv,
                4.0 * C_SIGMA / slope + C_DT,
                "analytic: 2 r sin(eps w t / 2) = 0.4 r; threshold 0.4 from Pathak et al. 2018, "
                "Phys. Rev. Lett. 120, 024102 (from memory)");
    cx_test_true("noisy circle coverage >= 0.95", m.coverage >= 0.95, "",
                 "analytic: the tail goes round the whole circle several times");
    cx_test_abs("noisy circle stop time = horizon", m.stop_time, (double)(C_N - 1) * C_DT, 1e-9,
                ANALYTIC);
    cx_test_true("noisy circle: Lyapunov exponent left NaN", isnan(m.lyapunov), "",
                 "header contract: filled by the probe");
}

static void circle_shapes(circle_case *cc)
{
    cx_run_metrics m;
    /* Concentric circle of radius r + 0.0731: the distance to the dense cloud is the radial gap
     * (points 2 pi / 2000 apart in angle add r (r + gap) <phi^2> / (2 gap), under 1e-3 of it). */
    circle(cc->y, C_N, C_DT, C_XC, C_YC, C_R + 0.0731, C_W, 0.0, NULL);
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    cx_test_rel("distance of a concentric circle = radial gap", m.distance[0], 0.0731, 1e-3,
                "analytic: nearest point of a circle lies on the same ray");
    outcome_is("... within match_tol of the circle", m.outcome, CX_OUT_RECONSTRUCTED, RULE);
    cx_test_abs("... coverage 1 (every cloud point within 0.1 r of the run)", m.coverage, 1.0, 0.0,
                "analytic: gap 0.0731 < 0.1 r, the tail goes round the circle");

    /* Ellipse with semi-axes ea > eb, clockwise: roundness ea - eb about the centre. */
    const double ea = 3.71, eb = 1.93;
    for (cx_idx i = 0; i < C_N; i++) {
        double t = (double)i * C_DT;
        cc->y[2 * i] = C_XC + ea * cos(C_W * t);
        cc->y[2 * i + 1] = C_YC - eb * sin(C_W * t);
    }
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("ellipse against a trained circle", m.outcome, CX_OUT_UNTRAINED_CYCLE, RULE);
    cx_test_rel("ellipse roundness = a - b", m.roundness, ea - eb, 0.01,
                "analytic: largest minus smallest distance to the centre of an ellipse");
    cx_test_rel("ellipse period 2 pi / w", m.period, 2.0 * PI / C_W, 0.01, ANALYTIC);
    cx_test_abs("ellipse rotation (clockwise)", m.rotation, -1.0, 0.0, ANALYTIC);
    cx_test_true("ellipse valid time NaN without truth", isnan(m.valid_time), "",
                 "header contract");
    double fx, fy, fr;
    double rd = cx_roundness(cc->y + 2 * (C_N - C_NTAIL), C_NTAIL, 2, &fx, &fy, &fr);
    cx_test_rel("cx_roundness agrees with the run metric", rd, m.roundness, 1e-12, "same input");
    cx_test_abs("least-squares centre of the ellipse, x", fx, C_XC, 0.01 * (ea - eb),
                "analytic: symmetric point set (Kasa 1976, IEEE Trans. Instrum. Meas. 25, 8)");
    cx_test_abs("least-squares centre of the ellipse, y", fy, C_YC, 0.01 * (ea - eb),
                "analytic: symmetric point set (Kasa 1976)");

    /* Exact circle of radius r through three points: Kasa's fit is exact on a circle. */
    double tri[6] = {C_XC + C_R, C_YC, C_XC, C_YC + C_R, C_XC - C_R * 0.6, C_YC - C_R * 0.8};
    cx_roundness(tri, 3, 2, &fx, &fy, &fr);
    cx_test_rel("circle through 3 points: fitted radius", fr, C_R, 1e-12,
                "analytic: the algebraic fit is exact for points on one circle (Kasa 1976)");
}

static void circle_fixed_and_diverged(circle_case *cc)
{
    cx_run_metrics m;
    /* Decaying spiral and a constant: fixed points. */
    for (cx_idx i = 0; i < C_N; i++) {
        double t = (double)i * C_DT, e = exp(-0.5 * t);
        cc->y[2 * i] = C_XC + C_R * e * cos(C_W * t);
        cc->y[2 * i + 1] = C_YC + C_R * e * sin(C_W * t);
    }
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("spiral decaying at rate 0.5", m.outcome, CX_OUT_FIXED_POINT,
               "analytic: tail amplitude r exp(-15) far below 1e-3 r (threshold: " RULE ")");
    cx_test_true("fixed point: period and roundness NaN", isnan(m.period) && isnan(m.roundness), "",
                 "header contract");
    for (cx_idx i = 0; i < C_N; i++) {
        double t = (double)i * C_DT, e = exp(-0.01 * t);
        cc->y[2 * i] = C_XC + C_R * e * cos(C_W * t);
        cc->y[2 * i + 1] = C_YC + C_R * e * sin(C_W * t);
    }
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    cx_test_true("slowly decaying spiral (rate 0.01) is not a fixed point",
                 m.outcome != CX_OUT_FIXED_POINT, cx_outcome_name(m.outcome),
                 "analytic: tail amplitude about 0.55 r");
    for (cx_idx i = 0; i < C_N; i++) {
        cc->y[2 * i] = 0.83;
        cc->y[2 * i + 1] = -1.21;
    }
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("constant signal", m.outcome, CX_OUT_FIXED_POINT, ANALYTIC);

    /* Divergence: a NaN at sample 1234; a drift that leaves the box at an analytic sample. */
    circle(cc->y, C_N, C_DT, C_XC, C_YC, C_R, C_W, 0.0, NULL);
    cc->y[2 * 1234 + 1] = NAN;
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("run with a NaN", m.outcome, CX_OUT_DIVERGED, "definition (header criterion 1)");
    cx_test_abs("NaN run stop time = 1234 dt", m.stop_time, 1234 * C_DT, 1e-12, ANALYTIC);
    double blo[2] = {-9.54, -9.54}, bhi[2] = {9.54, 9.54};
    for (cx_idx i = 0; i < C_N; i++) {
        cc->y[2 * i] = 0.3 + 0.0271 * (double)i;
        cc->y[2 * i + 1] = 0.0;
    }
    classify(cc->ws, cc->atts, 1, blo, bhi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("run leaving the bound box", m.outcome, CX_OUT_DIVERGED, "definition");
    cx_test_abs("escape stop time: first i with 0.3 + 0.0271 i > 9.54 is 341", m.stop_time,
                341 * C_DT, 1e-12, ANALYTIC);
}

static void circle_period_two(circle_case *cc)
{
    cx_run_metrics m;
    /* Period-doubled orbit: fast turn at 2 rad per unit plus a subharmonic of amplitude 0.15;
     * the near return at pi misses by 2 x 0.15, far above the tolerance. */
    for (cx_idx i = 0; i < C_N; i++) {
        double t = (double)i * C_DT;
        cc->y[2 * i] = 4.1 + cos(2.0 * t) + 0.15 * cos(t);
        cc->y[2 * i + 1] = sin(2.0 * t) + 0.15 * sin(t);
    }
    double tol = 0.02 * sqrt(1.0 + 0.15 * 0.15);
    double per = cx_period(cc->ws, cc->y + 2 * (C_N - C_NTAIL), C_NTAIL, 2, C_DT, tol);
    cx_test_rel("period-2 orbit: full period 2 pi, not pi", per, 2.0 * PI, 0.01, ANALYTIC);
    classify(cc->ws, cc->atts, 1, cc->lo, cc->hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("period-2 orbit against a trained circle", m.outcome, CX_OUT_UNTRAINED_CYCLE, RULE);
    cx_test_rel("period-2 orbit: run period 2 pi", m.period, 2.0 * PI, 0.01, ANALYTIC);
    double t0 = now();
    for (int k = 0; k < 20; k++)
        per = cx_period(cc->ws, cc->y + 2 * (C_N - C_NTAIL), C_NTAIL, 2, C_DT, tol);
    printf("timing: cx_period on %lld samples (periodic, dim 2): %.3f ms\n", (long long)C_NTAIL,
           (now() - t0) / 20 * 1e3);
}

static void circle_pair(circle_case *cc)
{
    cx_run_metrics m;
    const cx_idx ntrain = 3000;
    double *train = xmalloc((size_t)(2 * ntrain) * sizeof(double));
    /* Two counter-rotating trained circles far apart. */
    const double r2 = 1.74, x2 = 15.2, y2 = 3.1;
    double *train2 = xmalloc((size_t)(2 * ntrain) * sizeof(double));
    circle(train, ntrain, C_DT, 0.0, 0.0, C_R, C_W, 0.0, NULL);
    circle(train2, ntrain, C_DT, x2, y2, r2, -C_W, 0.0, NULL);
    cx_attractor *a0 = NULL, *a1 = NULL;
    if (cx_attractor_create(train, ntrain, 2, 2000, &a0) != CX_OK ||
        cx_attractor_create(train2, ntrain, 2, 2000, &a1) != CX_OK)
        exit(2);
    const cx_attractor *two[2] = {a0, a1};
    const double *xs2[2] = {train, train2};
    cx_idx ns2[2] = {ntrain, ntrain};
    double lo[2], hi[2];
    cx_class_box(xs2, ns2, 2, 2, 4.0, lo, hi);
    circle(cc->y, C_N, C_DT, x2, y2, r2, -C_W, C_SIGMA, &cc->rng);
    classify(cc->ws, two, 2, lo, hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("run on circle 1 with own task 0", m.outcome, CX_OUT_OTHER_TRAINED, ANALYTIC);
    cx_test_true("... lands on attractor 1", m.attractor == 1, "", ANALYTIC);
    cx_test_abs("... rotation clockwise", m.rotation, -1.0, 0.0, ANALYTIC);
    circle(cc->y, C_N, C_DT, 0.0, 0.0, C_R, C_W, C_SIGMA, &cc->rng);
    classify(cc->ws, two, 2, lo, hi, cc->y, C_N, C_NTAIL, 2, C_DT, -1, NULL, &m);
    outcome_is("random start landing on circle 0", m.outcome, CX_OUT_OTHER_TRAINED,
               "header contract: random starts have no own task");
    cx_test_true("... attractor 0", m.attractor == 0, "", ANALYTIC);
    cx_test_true("... valid time NaN without own task", isnan(m.valid_time), "", "header contract");
    classify(cc->ws, two, 2, lo, hi, cc->y, C_N, C_NTAIL, 2, C_DT, 0, NULL, &m);
    outcome_is("run on circle 0 with own task 0", m.outcome, CX_OUT_RECONSTRUCTED, ANALYTIC);
    cx_test_true("... distance to circle 1 at least the gap between the circles",
                 m.distance[1] > hypot(x2, y2) - C_R - r2 - 0.1, "",
                 "analytic: |c1| - r0 - r1, less 0.1 for the noise");

    cx_class_params p;
    cx_class_defaults(&p);
    int rc = cx_classify_run(cc->ws, &p, two, 2, lo, hi, cc->y, C_N, 6000, 2, C_DT, 0, NULL, &m);
    cx_test_true("tail longer than the workspace is refused", rc == CX_ERR_INVALID,
                 cx_status_name(rc), "header contract");
    rc = cx_classify_run(cc->ws, &p, two, 2, lo, hi, cc->y, C_N, C_NTAIL, 2, C_DT, 2, NULL, &m);
    cx_test_true("own task out of range is refused", rc == CX_ERR_INVALID, cx_status_name(rc),
                 "header contract");
    cx_err_clear();
    cx_attractor_destroy(&a1);
    cx_attractor_destroy(&a0);
    free(train2);
    free(train);
}

static void test_circles(cx_class_ws *ws)
{
    circle_case cc;
    cc.ws = ws;
    cc.y = xmalloc((size_t)(2 * C_N) * sizeof(double));
    cc.truth = xmalloc((size_t)(2 * C_N) * sizeof(double));
    cx_rng_keyed(&cc.rng, 2385, CX_RNG_TEST, (const uint64_t[]){1}, 1);
    /* Training over exactly one turn of 2000 samples: the sample centroid is the centre and the
     * cloud is 2000 evenly spaced points. */
    const cx_idx ntrain = 2000;
    double *train = xmalloc((size_t)(2 * ntrain) * sizeof(double));
    circle(train, ntrain, 2.0 * PI / (C_W * (double)ntrain), C_XC, C_YC, C_R, C_W, 0.0, NULL);
    cx_attractor *a = NULL;
    if (cx_attractor_create(train, ntrain, 2, 2000, &a) != CX_OK)
        exit(2);
    cc.atts[0] = a;
    cx_test_rel("attractor scale of a circle = its radius", cx_attractor_scale(a), C_R, 1e-12,
                "analytic: RMS distance of a circle's points to its centre");
    cx_test_abs("attractor centroid of whole turns = circle centre, x", cx_attractor_centre(a)[0],
                C_XC, 1e-12, "analytic: sum of cos over whole turns is 0");
    const double *xs[1] = {train};
    cx_class_box(xs, &ntrain, 1, 2, 4.0, cc.lo, cc.hi);

    circle_noisy(&cc);
    circle_shapes(&cc);
    circle_fixed_and_diverged(&cc);
    circle_period_two(&cc);
    circle_pair(&cc);

    cx_attractor_destroy(&a);
    cx_test_true("destroy sets the handle to NULL", a == NULL, "", "house style");
    free(train);
    free(cc.truth);
    free(cc.y);
}

static void test_flows(void)
{
    const double h = 0.01;
    const cx_idx ntrain = 40000, n = 12000, ntail = 10000;
    double *train = xmalloc((size_t)(3 * ntrain) * sizeof(double));
    double *y = xmalloc((size_t)(3 * n) * sizeof(double));
    cx_class_ws *ws = NULL;
    if (cx_class_ws_alloc(&ws, ntail, 3) != CX_OK)
        exit(2);
    const double xa[3] = {1.0, 1.0, 1.0}, xb[3] = {-3.1, 2.7, 18.4};
    integrate(lorenz, xa, h, 5000, ntrain, 1, train);
    cx_attractor *lz = NULL;
    if (cx_attractor_create(train, ntrain, 3, 2000, &lz) != CX_OK)
        exit(2);
    const cx_attractor *atts[1] = {lz};
    double lo[3], hi[3];
    const double *xs[1] = {train};
    cx_class_box(xs, &ntrain, 1, 3, 4.0, lo, hi);
    printf("Lorenz cloud scale %.4f\n", cx_attractor_scale(lz));

    integrate(lorenz, xb, h, 7300, n, 1, y);
    cx_run_metrics m;
    classify(ws, atts, 1, lo, hi, y, n, ntail, 3, h, 0, NULL, &m);
    printf("Lorenz run: distance %.4f coverage %.4f\n", m.distance[0], m.coverage);
    outcome_is("Lorenz trajectory from another start", m.outcome, CX_OUT_RECONSTRUCTED,
               "Lorenz 1963, J. Atmos. Sci. 20, 130 (one attractor at 10, 28, 8/3); thresholds: "
               "common practice, no published source");

    /* Rossler sampled every 5 steps (0.05 time units) for about 40 turns. */
    const double xr[3] = {1.2, -0.7, 0.1};
    integrate(rossler, xr, h, 10000, n, 5, y);
    classify(ws, atts, 1, lo, hi, y, n, 5000, 3, 5 * h, 0, NULL, &m);
    printf("Rossler run: distance %.4f\n", m.distance[0]);
    outcome_is("Rossler run against the Lorenz cloud", m.outcome, CX_OUT_UNTRAINED_APERIODIC,
               "Rossler 1976, Phys. Lett. A 57, 397: chaotic at (0.2, 0.2, 5.7)");
    cx_test_true("... no period", isnan(m.period), "", "Rossler 1976: aperiodic");

    /* Timing: 5000 tail samples against 3 clouds of 2000 points (the Lorenz cloud and two
     * shifted copies). */
    double *shift = xmalloc((size_t)(3 * ntrain) * sizeof(double));
    cx_attractor *s1 = NULL, *s2 = NULL;
    for (cx_idx i = 0; i < 3 * ntrain; i++)
        shift[i] = train[i] + (i % 3 == 0 ? 61.0 : 0.0);
    if (cx_attractor_create(shift, ntrain, 3, 2000, &s1) != CX_OK)
        exit(2);
    for (cx_idx i = 0; i < 3 * ntrain; i++)
        shift[i] = train[i] - (i % 3 == 1 ? 73.0 : 0.0);
    if (cx_attractor_create(shift, ntrain, 3, 2000, &s2) != CX_OK)
        exit(2);
    const cx_attractor *three[3] = {lz, s1, s2};
    double wide_lo[3] = {-1e3, -1e3, -1e3}, wide_hi[3] = {1e3, 1e3, 1e3};
    integrate(lorenz, xb, h, 7300, n, 1, y);
    const int reps = 20;
    double t0 = now();
    for (int k = 0; k < reps; k++)
        classify(ws, three, 3, wide_lo, wide_hi, y, 5000, 5000, 3, h, 0, NULL, &m);
    printf("timing: cx_classify_run, 5000 tail samples, 3 attractors x 2000 points, Lorenz "
           "(%s): %.3f ms per run\n",
           cx_outcome_name(m.outcome), (now() - t0) / reps * 1e3);
    integrate(rossler, xr, h, 10000, n, 5, y);
    t0 = now();
    for (int k = 0; k < reps; k++)
        classify(ws, three, 3, wide_lo, wide_hi, y, 5000, 5000, 3, 5 * h, 0, NULL, &m);
    printf("timing: cx_classify_run, same, Rossler (%s, full period scan): %.3f ms per run\n",
           cx_outcome_name(m.outcome), (now() - t0) / reps * 1e3);
    t0 = now();
    for (int k = 0; k < reps; k++)
        cx_period(ws, y, 5000, 3, 5 * h, 0.02 * cx_attractor_scale(lz));
    printf("timing: cx_period on 5000 aperiodic samples (dim 3): %.3f ms\n",
           (now() - t0) / reps * 1e3);

    cx_attractor_destroy(&s2);
    cx_attractor_destroy(&s1);
    cx_attractor_destroy(&lz);
    cx_class_ws_free(&ws);
    free(shift);
    free(y);
    free(train);
}

static void test_names(void)
{
    int ok = 1;
    for (int i = 0; i < CX_OUT_COUNT; i++)
        for (int j = 0; j < i; j++)
            if (strcmp(cx_outcome_name(i), cx_outcome_name(j)) == 0 ||
                strcmp(cx_outcome_label(i), cx_outcome_label(j)) == 0)
                ok = 0;
    cx_test_true("outcome names and labels are distinct", ok, "", "property");
    cx_test_true("out-of-range outcome has a name", strcmp(cx_outcome_name(99), "unknown") == 0, "",
                 "property");
}

int main(void)
{
    cx_class_ws *ws = NULL;
    if (cx_class_ws_alloc(&ws, 5000, 2) != CX_OK)
        return 2;
    test_kd();
    test_box();
    test_circles(ws);
    test_flows();
    test_names();
    cx_class_ws_free(&ws);
    return cx_test_finish();
}
