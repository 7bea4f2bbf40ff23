/* coexist tests: the task module (RK4, Lyapunov exponent, built-in flows, series, transforms,
 * families, trajectory files). Each check names the source of its reference value. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <hdf5.h>

#include "coexist/error.h"
#include "coexist/task.h"
#include "testlib.h"

static double pi_val(void)
{
    return acos(-1.0);
}

/* x' = A x with A = [[-g, -w], [w, -g]]: x(t) = exp(-g t) R(w t) x(0). */
typedef struct rot_ctx {
    double g, w;
} rot_ctx;

static void rot_field(void *ctx, double t, const double *x, double *dxdt)
{
    (void)t;
    const rot_ctx *c = ctx;
    dxdt[0] = -c->g * x[0] - c->w * x[1];
    dxdt[1] = c->w * x[0] - c->g * x[1];
}

static double rk4_error(const rot_ctx *c, double h, double tend)
{
    cx_rk4 *ws = NULL;
    if (cx_rk4_alloc(&ws, 2) != CX_OK)
        return NAN;
    double x[2] = {1.25, -0.6};
    const long steps = lround(tend / h);
    for (long s = 0; s < steps; s++)
        cx_rk4_step(ws, rot_field, (void *)c, (double)s * h, h, x);
    cx_rk4_free(&ws);
    const double e = exp(-c->g * tend), co = cos(c->w * tend), si = sin(c->w * tend);
    const double ex = e * (co * 1.25 - si * -0.6), ey = e * (si * 1.25 + co * -0.6);
    return hypot(x[0] - ex, x[1] - ey);
}

static void test_rk4(void)
{
    const rot_ctx c = {0.385, 2.385};
    const double e1 = rk4_error(&c, 0.02, 3.0), e2 = rk4_error(&c, 0.01, 3.0);
    const double order = log2(e1 / e2);
    char d[160];
    snprintf(d, sizeof d, "errors %.3e (h=0.02), %.3e (h=0.01), observed order %.4f", e1, e2,
             order);
    cx_test_true("RK4 observed order on a damped rotation is in [3.9, 4.1]",
                 order >= 3.9 && order <= 4.1, d,
                 "Hairer, Norsett & Wanner, Solving ODE I, 1993, Sec. II.1 (order 4); exact "
                 "solution exp(At) of a linear system");
}

/* x' = A x with a damped rotation block (real part -0.385) and a faster contracting direction;
 * the state decays, so an absolute separation d0 stays representable. */
static void linear3_field(void *ctx, double t, const double *x, double *dxdt)
{
    (void)ctx;
    (void)t;
    dxdt[0] = -0.385 * x[0] - 2.385 * x[1];
    dxdt[1] = 2.385 * x[0] - 0.385 * x[1];
    dxdt[2] = -1.27 * x[2];
}

static double lyap(cx_field_fn f, void *ctx, double *x, double h, double transient, double total,
                   uint64_t key)
{
    cx_rng rng;
    double lam = NAN;
    cx_rng_keyed(&rng, 2385u, CX_RNG_TEST, &key, 1);
    if (cx_lyapunov_max(f, ctx, 3, x, h, transient, total, 1.0, 1e-8, &rng, &lam) != CX_OK) {
        cx_err_print("test_task", 1);
        cx_err_clear();
        return NAN;
    }
    return lam;
}

static double flow_lyap(int flow, double total, uint64_t key)
{
    cx_flow_ctx c = {0};
    double x[3];
    c.flow = flow;
    cx_flow_defaults(flow, c.par, x);
    return lyap(cx_flow_field, &c, x, 0.01, 100.0, total, key);
}

static void test_lyapunov(void)
{
    /* The random start direction has a component along the fast-decaying axis; projecting it
     * out costs an O(1) log-growth once, an O(1 / total) bias: hence total 1000 and 0.2 %. */
    double x[3] = {0.3, -0.2, 0.7};
    cx_test_rel("largest exponent of a linear flow = max Re(eigenvalue) = -0.385",
                lyap(linear3_field, NULL, x, 0.01, 0.0, 1000.0, 1), -0.385, 2e-3,
                "analytic: exponents of x' = Ax are the real parts of A's eigenvalues (Oseledets "
                "1968, Trans. Moscow Math. Soc. 19, 197)");
    cx_test_rel("Lorenz (10, 28, 8/3) largest exponent", flow_lyap(CX_FLOW_LORENZ, 10000.0, 2),
                0.9056, 0.02,
                "Sprott, Chaos and Time-Series Analysis, Oxford 2003, Appendix A; Viswanath "
                "1998 PhD thesis, Cornell (0.9056)");
    /* A small exponent converges slowly (the log-growth fluctuates by O(1) per orbit while the
     * mean is only 0.07 per time unit), hence 15 %. */
    cx_test_rel("Rossler (0.2, 0.2, 5.7) largest exponent", flow_lyap(CX_FLOW_ROSSLER, 20000.0, 3),
                0.0714, 0.15, "Sprott, Chaos and Time-Series Analysis, Oxford 2003, Appendix A");
}

static double field_norm(int flow, const double *par, double x, double y, double z)
{
    cx_flow_ctx c = {0};
    c.flow = flow;
    memcpy(c.par, par, sizeof c.par);
    const double p[3] = {x, y, z};
    double d[3];
    cx_flow_field(&c, 0.0, p, d);
    return fmax(fabs(d[0]), fmax(fabs(d[1]), fabs(d[2])));
}

static void test_fixed_points(void)
{
    double par[CX_MAX_FLOW_PAR], x0[3];
    cx_flow_defaults(CX_FLOW_LORENZ, par, x0);
    const double b = par[2], r = par[1], q = sqrt(b * (r - 1.0));
    const char *src = "Lorenz 1963, J. Atmos. Sci. 20, 130: fixed points 0 and "
                      "(+-sqrt(b(r-1)), +-sqrt(b(r-1)), r-1)";
    cx_test_abs("Lorenz field at the origin", field_norm(CX_FLOW_LORENZ, par, 0, 0, 0), 0.0, 1e-12,
                src);
    cx_test_abs("Lorenz field at C+", field_norm(CX_FLOW_LORENZ, par, q, q, r - 1.0), 0.0, 1e-12,
                src);
    cx_test_abs("Lorenz field at C-", field_norm(CX_FLOW_LORENZ, par, -q, -q, r - 1.0), 0.0, 1e-12,
                src);
    /* Sprott case B: x y = 1, x = y, y z = 0 -> (+-1, +-1, 0). */
    cx_test_abs("Sprott B field at (1, 1, 0)", field_norm(CX_FLOW_SPROTT_B, par, 1, 1, 0), 0.0,
                1e-15, "Sprott 1994, Phys. Rev. E 50, R647, case B: equilibria (+-1, +-1, 0)");
}

static void test_flows(void)
{
    /* Published values of the largest exponent, all from memory, for the flows where we know
     * one; tolerance allows for our finite averaging time. 0 = none known to us. */
    static const double known[CX_FLOW_COUNT] = {[CX_FLOW_CHEN] = 2.0272,
                                                [CX_FLOW_HALVORSEN] = 0.7899,
                                                [CX_FLOW_SPROTT_B] = 0.2101,
                                                [CX_FLOW_SPROTT_JERK] = 0.0550};
    static const double tol[CX_FLOW_COUNT] = {[CX_FLOW_CHEN] = 0.03,
                                              [CX_FLOW_HALVORSEN] = 0.03,
                                              [CX_FLOW_SPROTT_B] = 0.05,
                                              [CX_FLOW_SPROTT_JERK] = 0.10};
    static const char *ksrc[CX_FLOW_COUNT] = {
        [CX_FLOW_CHEN] = "Chen & Ueta 1999 system, exponent as listed by Sprott (from memory)",
        [CX_FLOW_HALVORSEN] =
            "Sprott, Elegant Chaos, 2010 / Chaos and Time-Series Analysis, 2003 (a = 1.27; "
            "from memory, consistent with the divergence -3a)",
        [CX_FLOW_SPROTT_B] = "Sprott 1994, Phys. Rev. E 50, R647, Table I, case B (from memory)",
        [CX_FLOW_SPROTT_JERK] =
            "Sprott 1997, Phys. Lett. A 228, 271 (from memory; consistent with divergence -A)"};
    cx_rk4 *ws = NULL;
    if (cx_rk4_alloc(&ws, 3) != CX_OK)
        return;
    for (int f = 0; f < CX_FLOW_COUNT; f++) {
        const char *name = cx_flow_name(f);
        char what[160], d[160];
        cx_test_true("flow name looks up to its id", cx_flow_lookup(name) == f, name,
                     "header contract");
        cx_flow_ctx c = {0};
        double x[3];
        c.flow = f;
        cx_flow_defaults(f, c.par, x);
        double big = 0.0;
        for (int s = 0; s < 20000; s++) {
            cx_rk4_step(ws, cx_flow_field, &c, 0.01 * s, 0.01, x);
            big = fmax(big, fmax(fabs(x[0]), fmax(fabs(x[1]), fabs(x[2]))));
        }
        snprintf(what, sizeof what, "%s stays bounded for 200 time units from its start", name);
        snprintf(d, sizeof d, "max |x_i| = %.4g, bound 1000", big);
        cx_test_true(what, isfinite(big) && big < 1000.0, d,
                     "sanity property of a dissipative chaotic flow, no published value");
        if (f == CX_FLOW_THOMAS)
            continue; /* b = 0.208186 is at the onset of chaos: exponent ~ 0, no sign to test */
        const double total = f == CX_FLOW_SPROTT_JERK ? 20000.0 : 4000.0;
        const double lam = flow_lyap(f, total, (uint64_t)(10 + f));
        snprintf(what, sizeof what, "%s largest Lyapunov exponent is positive", name);
        snprintf(d, sizeof d, "lambda = %.4f over %g time units", lam, total);
        cx_test_true(what, lam > 0.01, d,
                     "sanity property of a chaotic attractor, no published value used");
        if (known[f] != 0.0) {
            snprintf(what, sizeof what, "%s largest Lyapunov exponent", name);
            cx_test_rel(what, lam, known[f], tol[f], ksrc[f]);
        }
    }
    cx_rk4_free(&ws);
    cx_test_true("unknown flow name gives -1", cx_flow_lookup("lorenz84") == -1, "",
                 "header contract");
}

static cx_task_spec cycle_spec(void)
{
    cx_task_spec t;
    memset(&t, 0, sizeof t);
    snprintf(t.name, sizeof t.name, "loop");
    t.kind = CX_TASK_CYCLE;
    t.dim = 2;
    t.centre[0] = 0.385;
    t.centre[1] = -1.27;
    t.radius = 1.75;
    t.speed = 2.385;
    t.ellipticity = 0.6;
    t.phase = 0.3;
    return t;
}

/* Signed area enclosed by a sampled closed curve (shoelace formula; Green's theorem). */
static double signed_area(const double *u, int dim, long n)
{
    double a = 0.0;
    for (long i = 0; i < n; i++) {
        const double *p = u + i * dim, *q = u + ((i + 1) % n) * dim;
        a += p[0] * q[1] - q[0] * p[1];
    }
    return 0.5 * a;
}

static void test_cycles(void)
{
    const double pi = pi_val();
    cx_task_spec t = cycle_spec();
    const double h = 0.001;
    const long n = (long)floor(2.0 * pi / t.speed / h); /* one period, not closed */
    double *u = malloc((size_t)n * 4 * sizeof *u), *v = malloc((size_t)n * 4 * sizeof *v);
    if (u == NULL || v == NULL)
        goto out;
    int rc = cx_task_series(&t, h, n, u);
    double err = 0.0, xmin = 1e300, xmax = -1e300, ymin = 1e300, ymax = -1e300;
    for (long i = 0; i < n; i++) {
        const double a = t.speed * (double)i * h + t.phase;
        err = fmax(err, fabs(u[2 * i] - (t.centre[0] + t.radius * cos(a))));
        err = fmax(err, fabs(u[2 * i + 1] - (t.centre[1] + t.radius * t.ellipticity * sin(a))));
        xmin = fmin(xmin, u[2 * i]);
        xmax = fmax(xmax, u[2 * i]);
        ymin = fmin(ymin, u[2 * i + 1]);
        ymax = fmax(ymax, u[2 * i + 1]);
    }
    cx_test_abs("cycle samples equal c + R(cos(wt+p), e sin(wt+p))", rc == CX_OK ? err : NAN, 0.0,
                1e-14, "analytic (parametric ellipse)");
    cx_test_abs("cycle x extent = 2R", xmax - xmin, 2.0 * t.radius, 1e-5,
                "analytic: axis of an ellipse; tolerance R (w h)^2 / 8 from the sampling");
    cx_test_abs("cycle y extent = 2Re", ymax - ymin, 2.0 * t.radius * t.ellipticity, 1e-5,
                "analytic: minor axis of an ellipse");
    const double area = pi * t.radius * t.radius * t.ellipticity;
    cx_test_rel("anticlockwise cycle (w > 0) encloses +pi R^2 e", signed_area(u, 2, n), area, 1e-4,
                "shoelace formula / Green's theorem; ellipse area pi a b");
    t.reverse = 1;
    rc = cx_task_series(&t, h, n, v);
    cx_test_rel("reversed cycle encloses -pi R^2 e (sense flips)",
                rc == CX_OK ? signed_area(v, 2, n) : NAN, -area, 1e-4,
                "shoelace formula / Green's theorem");
    cx_test_abs("reversed cycle starts at the same point", fabs(v[0] - u[0]) + fabs(v[1] - u[1]),
                0.0, 1e-15, "analytic: w -> -w at t = 0");

    /* Ellipticity 0 means a circle; dimension 4 carries the centre in coordinates 3 and 4. */
    t = cycle_spec();
    t.ellipticity = 0.0;
    t.dim = 4;
    t.centre[2] = 2.385;
    t.centre[3] = -0.77;
    rc = cx_task_series(&t, 0.05, 40, u);
    double rerr = 0.0, cerr = 0.0;
    for (long i = 0; i < 40; i++) {
        rerr =
            fmax(rerr, fabs(hypot(u[4 * i] - t.centre[0], u[4 * i + 1] - t.centre[1]) - t.radius));
        cerr = fmax(cerr, fabs(u[4 * i + 2] - 2.385) + fabs(u[4 * i + 3] + 0.77));
    }
    cx_test_abs("ellipticity 0 is a circle of radius R", rc == CX_OK ? rerr : NAN, 0.0, 1e-14,
                "analytic; header convention (0 = not set = 1)");
    cx_test_abs("extra coordinates of a 4-D cycle are the centre's", cerr, 0.0, 0.0,
                "header contract");

    /* Transforms: expected = m * Rot(theta) * (s * raw) + shift, in that order. */
    t = cycle_spec();
    rc = cx_task_series(&t, 0.05, 60, u);
    t.scale = 1.9;
    t.rotate = 0.7;
    t.mirror = 1;
    t.shift[0] = -3.1;
    t.shift[1] = 0.45;
    rc |= cx_task_series(&t, 0.05, 60, v);
    err = 0.0;
    for (long i = 0; i < 60; i++) {
        const double a = 1.9 * u[2 * i], b = 1.9 * u[2 * i + 1];
        const double ra = cos(0.7) * a - sin(0.7) * b, rb = sin(0.7) * a + cos(0.7) * b;
        err = fmax(err, fabs(v[2 * i] - (-ra - 3.1)) + fabs(v[2 * i + 1] - (-rb + 0.45)));
    }
    cx_test_abs("scale, rotate, mirror, shift applied in the header's order",
                rc == CX_OK ? err : NAN, 0.0, 1e-13, "analytic affine maps; header contract");
    t = cycle_spec();
    t.scale = 0.0;
    rc = cx_task_series(&t, 0.05, 60, v);
    cx_test_abs("scale 0 means no scaling", rc == CX_OK ? fabs(v[77] - u[77]) : NAN, 0.0, 0.0,
                "header convention (0 = not set = 1)");
out:
    free(u);
    free(v);
}

static void test_flow_series(void)
{
    cx_task_spec t;
    memset(&t, 0, sizeof t);
    snprintf(t.name, sizeof t.name, "butterfly");
    t.kind = CX_TASK_FLOW;
    t.dim = 3;
    t.flow = CX_FLOW_LORENZ;
    cx_flow_defaults(t.flow, t.par, t.x0);
    t.transient = 1.0;
    t.inner_dt = 0.003; /* h = 0.01 -> 4 inner steps of 0.0025 */
    enum { N = 300 };
    static double a[N * 3], b[N * 3], ref[N * 3];
    int rc = cx_task_series(&t, 0.01, N, a);
    cx_rk4 *ws = NULL;
    double err = NAN;
    if (rc == CX_OK && cx_rk4_alloc(&ws, 3) == CX_OK) {
        cx_flow_ctx c = {0};
        c.flow = t.flow;
        memcpy(c.par, t.par, sizeof c.par);
        double x[3] = {t.x0[0], t.x0[1], t.x0[2]};
        long step = 0;
        for (; step < 400; step++)
            cx_rk4_step(ws, cx_flow_field, &c, (double)step * 0.0025, 0.0025, x);
        for (int i = 0; i < N; i++) {
            if (i > 0)
                for (int k = 0; k < 4; k++, step++)
                    cx_rk4_step(ws, cx_flow_field, &c, (double)step * 0.0025, 0.0025, x);
            memcpy(ref + 3 * i, x, sizeof x);
        }
        err = 0.0;
        for (int i = 0; i < 3 * N; i++)
            err = fmax(err, fabs(a[i] - ref[i]));
        cx_rk4_free(&ws);
    }
    cx_test_abs("flow series = RK4 at inner step h / ceil(h / inner_dt) after the transient", err,
                0.0, 0.0, "header contract");
    t.reverse = 1;
    rc = cx_task_series(&t, 0.01, N, b);
    err = 0.0;
    for (int i = 0; i < N; i++)
        for (int j = 0; j < 3; j++)
            err = fmax(err, fabs(b[3 * i + j] - a[3 * (N - 1 - i) + j]));
    cx_test_abs("reversed flow = forward samples in reverse order", rc == CX_OK ? err : NAN, 0.0,
                0.0, "header contract");
    t.reverse = 0;
    t.mirror = 1;
    rc = cx_task_series(&t, 0.01, N, b);
    err = 0.0;
    for (int i = 0; i < 3 * N; i++)
        err = fmax(err, fabs(b[i] + a[i]));
    cx_test_abs("mirrored flow = -u", rc == CX_OK ? err : NAN, 0.0, 0.0, "header contract");
}

static void test_families(void)
{
    cx_family_spec f;
    memset(&f, 0, sizeof f);
    cx_task_spec tasks[CX_MAX_TASKS];
    f.base = cycle_spec();
    f.kind = CX_FAMILY_CYCLES_LINE;
    f.count = 4;
    f.spacing = 2.385;
    f.alternate = 1;
    int rc = cx_family_expand(&f, tasks);
    const double want[4] = {-1.5 * 2.385, -0.5 * 2.385, 0.5 * 2.385, 1.5 * 2.385};
    double err = 0.0;
    int senses_ok = 1, names_ok = 1;
    for (int i = 0; i < 4 && rc == CX_OK; i++) {
        err = fmax(err, fabs(tasks[i].centre[0] - want[i]) + fabs(tasks[i].centre[1] + 1.27));
        senses_ok &= tasks[i].speed == (i % 2 == 0 ? 2.385 : -2.385);
        char nm[32];
        snprintf(nm, sizeof nm, "loop-%d", i + 1);
        names_ok &= strcmp(tasks[i].name, nm) == 0;
    }
    cx_test_abs("cycles-line centres at (i - (k-1)/2) spacing", rc == CX_OK ? err : NAN, 0.0, 1e-15,
                "analytic; header contract");
    cx_test_true("cycles-line alternate senses +1, -1, +1, -1", rc == CX_OK && senses_ok, "",
                 "header contract");
    cx_test_true("family copies named <base>-<i>", rc == CX_OK && names_ok, tasks[3].name,
                 "header contract");

    f.kind = CX_FAMILY_CYCLES_RING;
    f.count = 3;
    f.alternate = 0;
    f.senses[0] = -1;
    f.senses[1] = 0;
    f.senses[2] = 1;
    rc = cx_family_expand(&f, tasks);
    err = 0.0;
    for (int i = 0; i < 3 && rc == CX_OK; i++) {
        const double a = 2.0 * pi_val() * i / 3.0;
        err = fmax(err, fabs(tasks[i].centre[0] - 2.385 * cos(a)) +
                            fabs(tasks[i].centre[1] - 2.385 * sin(a)));
    }
    cx_test_abs("cycles-ring centres on a circle of radius spacing", rc == CX_OK ? err : NAN, 0.0,
                1e-15, "analytic; header contract");
    cx_test_true("senses[] used, 0 meaning +1",
                 rc == CX_OK && tasks[0].speed == -2.385 && tasks[1].speed == 2.385 &&
                     tasks[2].speed == 2.385,
                 "", "header contract");

    memset(&f, 0, sizeof f);
    snprintf(f.base.name, sizeof f.base.name, "wing");
    f.base.kind = CX_TASK_FLOW;
    f.base.dim = 3;
    f.base.flow = CX_FLOW_LORENZ;
    f.base.shift[2] = 0.5;
    f.kind = CX_FAMILY_FLOW_SHIFTED;
    f.count = 3;
    f.spacing = 31.7;
    rc = cx_family_expand(&f, tasks);
    cx_test_true("flow-shifted copies at -s, 0, +s on x, other shifts kept",
                 rc == CX_OK && tasks[0].shift[0] == -31.7 && tasks[1].shift[0] == 0.0 &&
                     tasks[2].shift[0] == 31.7 && tasks[2].shift[2] == 0.5,
                 "", "analytic; header contract");
    f.kind = CX_FAMILY_FLOW_MIRRORED;
    f.count = 5;
    rc = cx_family_expand(&f, tasks);
    const double sh[5] = {-31.7, -31.7, 0.0, 0.0, 31.7};
    int ok = rc == CX_OK;
    for (int i = 0; i < 5 && ok; i++)
        ok = tasks[i].mirror == (i % 2) && fabs(tasks[i].shift[0] - sh[i]) < 1e-13;
    cx_test_true("flow-mirrored: odd copies mirrored, pairs shifted (j - (p-1)/2) s", ok, "",
                 "analytic; header contract");
    f.count = 0;
    rc = cx_family_expand(&f, tasks);
    cx_test_true("family count 0 rejected", rc == CX_ERR_INVALID, cx_err_message(),
                 "header contract");
    cx_err_clear();
    f.count = CX_MAX_TASKS + 1;
    rc = cx_family_expand(&f, tasks);
    cx_test_true("family count above CX_MAX_TASKS rejected", rc == CX_ERR_INVALID, cx_err_message(),
                 "header contract");
    cx_err_clear();
}

static cx_task_spec file_spec(const char *path, const char *dataset, int dim, double dt)
{
    cx_task_spec t;
    memset(&t, 0, sizeof t);
    snprintf(t.name, sizeof t.name, "recorded");
    t.kind = CX_TASK_FILE;
    t.dim = dim;
    snprintf(t.path, sizeof t.path, "%s", path);
    snprintf(t.dataset, sizeof t.dataset, "%s", dataset);
    t.file_dt = dt;
    return t;
}

/* A failure that must be CX_ERR_INVALID with a message holding `needle`. */
static void expect_invalid(const char *what, int rc, const char *needle)
{
    char d[512];
    const char *m = cx_err_message();
    snprintf(d, sizeof d, "rc %d, message \"%s\"", rc, m);
    cx_test_true(what, rc == CX_ERR_INVALID && strstr(m, needle) != NULL, d, "header contract");
    cx_err_clear();
}

static void test_csv(void)
{
    const char *path = "test_task_linear.csv";
    FILE *fp = fopen(path, "w");
    if (fp == NULL) {
        cx_test_true("write CSV file", 0, path, "");
        return;
    }
    /* u(t) = (0.385 + 1.27 t, 0.6 - 2.1 t) at 0.05 time units, 201 rows. */
    fprintf(fp, "first,second\n# a comment line\n");
    for (int k = 0; k <= 200; k++) {
        const double tk = 0.05 * k;
        fprintf(fp, k % 2 ? "%.17g, %.17g\n" : "%.17g\t%.17g\n", 0.385 + 1.27 * tk, 0.6 - 2.1 * tk);
    }
    fclose(fp);
    cx_task_spec t = file_spec(path, "", 2, 0.05);
    cx_idx rows = 0;
    int dim = 0;
    int rc = cx_task_file_shape(&t, &rows, &dim);
    cx_test_true("CSV shape 201 x 2 (header and comment skipped)",
                 rc == CX_OK && rows == 201 && dim == 2, "", "the file written by this test");
    enum { N = 259 }; /* 258 * 0.0385 = 9.933 <= 10 */
    static double u[N * 2];
    rc = cx_task_series(&t, 0.0385, N, u);
    double err = 0.0;
    for (int i = 0; i < N; i++) {
        const double ti = 0.0385 * i;
        err =
            fmax(err, fabs(u[2 * i] - (0.385 + 1.27 * ti)) + fabs(u[2 * i + 1] - (0.6 - 2.1 * ti)));
    }
    cx_test_abs("CSV linear interpolation exact on a linear signal", rc == CX_OK ? err : NAN, 0.0,
                1e-12, "analytic: linear interpolation reproduces linear functions");
    rc = cx_task_series(&t, 0.0385, 300, u);
    expect_invalid("CSV too short for the series is rejected, naming the path", rc, path);

    const char *nanpath = "test_task_nan.csv";
    fp = fopen(nanpath, "w");
    if (fp != NULL) {
        fprintf(fp, "1.5 2.5\n2.5 3.5\nnan 4.5\n4.5 5.5\n");
        fclose(fp);
    }
    t = file_spec(nanpath, "", 2, 0.1);
    rc = cx_task_series(&t, 0.1, 3, u);
    expect_invalid("CSV with NaN is rejected, naming path and line", rc, "test_task_nan.csv:3:");
    const char *rpath = "test_task_ragged.csv";
    fp = fopen(rpath, "w");
    if (fp != NULL) {
        fprintf(fp, "1.5,2.5\n2.5,3.5\n\n3.5,4.5,9\n");
        fclose(fp);
    }
    t = file_spec(rpath, "", 2, 0.1);
    rc = cx_task_file_shape(&t, &rows, &dim);
    expect_invalid("CSV with ragged rows is rejected, naming path and line", rc,
                   "test_task_ragged.csv:4:");
    t = file_spec("no_such_dir/missing.csv", "", 2, 0.1);
    rc = cx_task_series(&t, 0.1, 3, u);
    expect_invalid("missing CSV file is rejected, naming the path", rc, "no_such_dir/missing.csv");
}

static int write_h5(const char *path, const double *data, hsize_t rows, hsize_t cols,
                    double interval)
{
    hid_t f = H5Fcreate(path, H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
    if (f < 0)
        return -1;
    hid_t g = H5Gcreate2(f, "runs", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    hsize_t dims[2] = {rows, cols};
    hid_t s = H5Screate_simple(2, dims, NULL);
    hid_t d = H5Dcreate2(g, "orbit", H5T_IEEE_F64LE, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    herr_t e = H5Dwrite(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, data);
    if (interval > 0.0) {
        hid_t as = H5Screate(H5S_SCALAR);
        hid_t a = H5Acreate2(d, "sample_interval", H5T_IEEE_F64LE, as, H5P_DEFAULT, H5P_DEFAULT);
        e |= H5Awrite(a, H5T_NATIVE_DOUBLE, &interval);
        H5Aclose(a);
        H5Sclose(as);
    }
    H5Dclose(d);
    H5Sclose(s);
    H5Gclose(g);
    H5Fclose(f);
    return e < 0 ? -1 : 0;
}

static void test_hdf5(void)
{
    enum { R = 101, C = 3 };
    static double data[R * C], u[200 * C];
    for (int k = 0; k < R; k++) {
        const double tk = 0.1 * k;
        data[k * C + 0] = sin(1.3 * tk) + 0.385;
        data[k * C + 1] = -2.1 * tk + 0.6;
        data[k * C + 2] = exp(-0.2 * tk);
    }
    const char *path = "test_task_orbit.h5";
    if (write_h5(path, data, R, C, 0.1) != 0) {
        cx_test_true("write HDF5 file", 0, path, "");
        return;
    }
    cx_task_spec t = file_spec(path, "/runs/orbit", 3, 0.0);
    cx_idx rows = 0;
    int dim = 0;
    int rc = cx_task_file_shape(&t, &rows, &dim);
    cx_test_true("HDF5 shape 101 x 3", rc == CX_OK && rows == R && dim == C, "",
                 "the file written by this test (HDF5 C API)");
    rc = cx_task_series(&t, 0.1, R, u);
    double err = 0.0;
    for (int i = 0; i < R * C; i++)
        err = fmax(err, fabs(u[i] - data[i]));
    cx_test_abs("HDF5 round trip at the file's interval (from its sample_interval attribute)",
                rc == CX_OK ? err : NAN, 0.0, 1e-15, "the file written by this test");
    rc = cx_task_series(&t, 0.07, 140, u);
    err = 0.0;
    for (int i = 0; i < 140; i++)
        err = fmax(err, fabs(u[i * C + 1] - (-2.1 * 0.07 * i + 0.6)));
    cx_test_abs("HDF5 interpolation exact on the linear column", rc == CX_OK ? err : NAN, 0.0,
                1e-12, "analytic: linear interpolation reproduces linear functions");
    rc = cx_task_series(&t, 0.1, R + 1, u);
    expect_invalid("HDF5 file too short is rejected, naming the path", rc, path);
    t = file_spec(path, "/runs/nothing", 3, 0.0);
    rc = cx_task_series(&t, 0.1, 5, u);
    expect_invalid("missing HDF5 dataset is rejected, naming the path", rc, path);

    const char *p2 = "test_task_bad.h5";
    data[37 * C + 2] = NAN;
    if (write_h5(p2, data, R, C, 0.0) == 0) {
        t = file_spec(p2, "runs/orbit", 3, 0.0);
        rc = cx_task_series(&t, 0.1, 5, u);
        expect_invalid("HDF5 dataset without sample_interval and file_dt 0 is rejected", rc, p2);
        t.file_dt = 0.1;
        rc = cx_task_series(&t, 0.1, 5, u);
        expect_invalid("HDF5 dataset holding NaN is rejected, naming the path", rc, p2);
    }
    t = file_spec("absent.h5", "/runs/orbit", 3, 0.1);
    rc = cx_task_series(&t, 0.1, 5, u);
    expect_invalid("missing HDF5 file is rejected, naming the path", rc, "absent.h5");
}

int main(void)
{
    test_rk4();
    test_lyapunov();
    test_fixed_points();
    test_flows();
    test_cycles();
    test_flow_series();
    test_families();
    test_csv();
    test_hdf5();
    return cx_test_finish();
}
