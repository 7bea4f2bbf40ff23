/* coexist tests: reservoir networks (src/net/): topologies, CSR kernels, W_in, spectral radius.
 *
 * References: the circular law for sparse random matrices, analytic spectra (cyclic permutation,
 * circulant, nilpotent shift), binomial degree statistics, and LAPACK dgeev called directly on
 * the full dense matrix.
 */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <lapacke.h>

#include "coexist/clock.h"
#include "coexist/error.h"
#include "coexist/net.h"
#include "testlib.h"

#define SRC_LAPACK                                                                                 \
    "LAPACK 3.11 dgeev (Anderson et al., LAPACK Users' Guide, SIAM 1999), called directly on the " \
    "full dense matrix"

static cx_net_params er(cx_idx n, double d, int law, double a)
{
    cx_net_params p;
    memset(&p, 0, sizeof p);
    p.nodes = n;
    p.topology = CX_TOPO_ERDOS_RENYI;
    p.mean_degree = d;
    p.weight_law = law;
    p.weight_scale = a;
    return p;
}

static void draw(const cx_net_params *p, uint64_t draw_id, cx_csr *m)
{
    cx_rng r;
    const uint64_t key[3] = {(uint64_t)p->nodes, (uint64_t)p->topology, draw_id};
    cx_rng_keyed(&r, 2385u, CX_RNG_TEST, key, 3);
    memset(m, 0, sizeof *m);
    if (cx_net_draw(p, &r, m) != CX_OK) {
        cx_err_print("test_net", 1);
        cx_err_clear();
    }
}

static double radius(const cx_csr *m, int method, double *seconds)
{
    cx_rng r;
    const uint64_t key[1] = {(uint64_t)m->nnz};
    cx_rng_keyed(&r, 2385u, CX_RNG_TEST, key, 1);
    double rho = NAN, t0 = cx_clock_mono();
    if (cx_net_spectral_radius(m, method, &r, &rho) != CX_OK) {
        cx_err_print("test_net", 1);
        cx_err_clear();
        rho = NAN;
    }
    if (seconds != NULL)
        *seconds = cx_clock_mono() - t0;
    return rho;
}

/* Reference: dgeev on the full dense matrix, no trimming. */
static double lapack_radius(const cx_csr *m)
{
    const int n = (int)m->n;
    double *a = calloc((size_t)n * (size_t)n, sizeof *a);
    double *wr = malloc((size_t)n * sizeof *wr), *wi = malloc((size_t)n * sizeof *wi);
    double rho = NAN;
    if (a != NULL && wr != NULL && wi != NULL) {
        for (cx_idx i = 0; i < m->n; i++)
            for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++)
                a[(size_t)i * (size_t)n + (size_t)m->col[k]] = m->val[k];
        if (LAPACKE_dgeev(LAPACK_ROW_MAJOR, 'N', 'N', n, a, n, wr, wi, NULL, 1, NULL, 1) == 0) {
            rho = 0.0;
            for (int i = 0; i < n; i++)
                rho = fmax(rho, hypot(wr[i], wi[i]));
        }
    }
    free(wi);
    free(wr);
    free(a);
    return rho;
}

static void check_invalid(void)
{
    struct {
        const char *what;
        cx_net_params p;
    } bad[6];
    bad[0].what = "N = 1";
    bad[0].p = er(1, 0.5, CX_WEIGHT_UNIFORM, 1.0);
    bad[1].what = "mean degree = N";
    bad[1].p = er(50, 50.0, CX_WEIGHT_UNIFORM, 1.0);
    bad[2].what = "mean degree 0";
    bad[2].p = er(50, 0.0, CX_WEIGHT_UNIFORM, 1.0);
    bad[3].what = "weight scale 0";
    bad[3].p = er(50, 3.0, CX_WEIGHT_UNIFORM, 0.0);
    bad[4].what = "rewire 1.5";
    bad[4].p = er(50, 4.0, CX_WEIGHT_UNIFORM, 1.0);
    bad[4].p.topology = CX_TOPO_SMALL_WORLD;
    bad[4].p.rewire = 1.5;
    bad[5].what = "odd small-world degree";
    bad[5].p = er(50, 5.0, CX_WEIGHT_UNIFORM, 1.0);
    bad[5].p.topology = CX_TOPO_SMALL_WORLD;
    for (int k = 0; k < 6; k++) {
        cx_rng r;
        cx_rng_seed(&r, 1u, 2u);
        cx_csr m;
        memset(&m, 0, sizeof m);
        int rc = cx_net_draw(&bad[k].p, &r, &m);
        char what[128], det[1100];
        snprintf(what, sizeof what, "%s is refused with CX_ERR_INVALID", bad[k].what);
        snprintf(det, sizeof det, "message: %s", cx_err_message());
        cx_test_true(what, rc == CX_ERR_INVALID && m.rowptr == NULL, det,
                     "net.h contract (no published source)");
        cx_err_clear();
    }
}

static void check_erdos_renyi_structure(void)
{
    const cx_idx n = 20000;
    const double d = 7.385;
    cx_net_params p = er(n, d, CX_WEIGHT_UNIFORM, 0.6);
    cx_csr m;
    draw(&p, 1u, &m);
    cx_test_true("ER N = 20000 passes cx_csr_check", cx_csr_check(&m) == CX_OK, "sorted, unique",
                 "CSR definition, Saad, Iterative Methods for Sparse Linear Systems 2003, 3.4");
    cx_err_clear();
    int loops = 0, inrange = 1;
    for (cx_idx i = 0; i < m.n; i++)
        for (cx_idx k = m.rowptr[i]; k < m.rowptr[i + 1]; k++) {
            loops += m.col[k] == i;
            inrange &= fabs(m.val[k]) < 0.6;
        }
    cx_test_true("ER without self loops has no i <- i entry", loops == 0, "", "net.h contract");
    cx_test_true("ER U(-a, a) weights lie in (-a, a)", inrange, "a = 0.6", "net.h contract");
    /* nnz ~ Binomial(N (N-1), d/(N-1)): mean N d, variance N d (1 - d/(N-1)). */
    double mean = (double)n * d, sd = sqrt(mean * (1.0 - d / (double)(n - 1)));
    cx_test_abs("ER N = 20000, d = 7.385: mean in-degree (5 sigma binomial)",
                (double)m.nnz / (double)n, d, 5.0 * sd / (double)n,
                "Erdos & Renyi 1959 model: nnz ~ Binomial(N(N-1), d/(N-1))");
    /* Weight variance a^2/3 for U(-a, a); sd of the estimate sqrt((a^4/5 - a^4/9) / nnz). */
    double s2 = 0.0;
    for (cx_idx k = 0; k < m.nnz; k++)
        s2 += m.val[k] * m.val[k];
    double a4 = 0.6 * 0.6 * 0.6 * 0.6;
    cx_test_abs("ER U(-0.6, 0.6) weights: E w^2 = a^2/3 (5 sigma)", s2 / (double)m.nnz, 0.36 / 3.0,
                5.0 * sqrt((a4 / 5.0 - a4 / 9.0) / (double)m.nnz),
                "moments of U(-a, a), Abramowitz & Stegun 1964, 26.1");
    /* In-degrees are Binomial(N-1, p): fraction of rows with no input ~ (1 - p)^(N-1). */
    cx_idx empty = 0;
    for (cx_idx i = 0; i < m.n; i++)
        empty += m.rowptr[i + 1] == m.rowptr[i];
    double q0 = pow(1.0 - d / (double)(n - 1), (double)(n - 1));
    cx_test_abs("ER: fraction of nodes without inputs = (1 - p)^(N-1) (5 sigma)",
                (double)empty / (double)n, q0, 5.0 * sqrt(q0 * (1.0 - q0) / (double)n),
                "binomial in-degree law of the directed Erdos-Renyi graph");
    cx_csr_free(&m);
    cx_test_true("cx_csr_free leaves the struct zeroed",
                 m.n == 0 && m.nnz == 0 && m.rowptr == NULL && m.col == NULL && m.val == NULL, "",
                 "net.h contract");
    cx_csr_free(NULL);

    p.self_loops = 1;
    p.nodes = 3000;
    p.mean_degree = 2500.0;
    draw(&p, 2u, &m);
    loops = 0;
    for (cx_idx i = 0; i < m.n; i++)
        for (cx_idx k = m.rowptr[i]; k < m.rowptr[i + 1]; k++)
            loops += m.col[k] == i;
    double ml = 3000.0 * 2500.0 / 3000.0;
    cx_test_abs("ER with self loops, N = 3000, d = 2500: self loops ~ Binomial(N, d/N)",
                (double)loops, ml, 5.0 * sqrt(ml * (1.0 - 2500.0 / 3000.0)),
                "Erdos-Renyi model with loops, p = d/N");
    cx_test_true("dense ER passes cx_csr_check", cx_csr_check(&m) == CX_OK, "", "CSR definition");
    cx_csr_free(&m);
}

static void check_reproducible(void)
{
    cx_net_params p = er(3000, 4.5, CX_WEIGHT_NORMAL, 0.9);
    for (int t = 0; t < 2; t++) {
        if (t == 1) {
            p.topology = CX_TOPO_SMALL_WORLD;
            p.mean_degree = 6.0;
            p.rewire = 0.3;
        }
        cx_csr a, b;
        draw(&p, 40u, &a);
        draw(&p, 40u, &b);
        int same = a.nnz == b.nnz &&
                   memcmp(a.rowptr, b.rowptr, (size_t)(a.n + 1) * sizeof *a.rowptr) == 0 &&
                   memcmp(a.col, b.col, (size_t)a.nnz * sizeof *a.col) == 0 &&
                   memcmp(a.val, b.val, (size_t)a.nnz * sizeof *a.val) == 0;
        cx_csr c;
        draw(&p, 41u, &c);
        int differ = c.nnz != a.nnz || memcmp(a.col, c.col, (size_t)a.nnz * sizeof *a.col) != 0;
        cx_test_true(t == 0
                         ? "ER: same key gives a bit-identical matrix, other key another"
                         : "small world: same key gives a bit-identical matrix, other key another",
                     same && differ, "", "reproducibility contract, DESIGN.md 'Randomness'");
        cx_csr_free(&c);
        cx_csr_free(&b);
        cx_csr_free(&a);
    }
}

static void check_kernels(void)
{
    cx_net_params p = er(300, 9.0, CX_WEIGHT_NORMAL, 1.7);
    cx_csr m;
    draw(&p, 3u, &m);
    const cx_idx n = m.n, b = 5;
    double *dense = calloc((size_t)(n * n), sizeof *dense);
    double *x = malloc((size_t)(n * b) * sizeof *x), *y = malloc((size_t)(n * b) * sizeof *y);
    double *want = malloc((size_t)(n * b) * sizeof *want);
    for (cx_idx i = 0; i < n; i++)
        for (cx_idx k = m.rowptr[i]; k < m.rowptr[i + 1]; k++)
            dense[i * n + m.col[k]] = m.val[k];
    cx_rng r;
    cx_rng_seed(&r, 77u, 5u);
    for (cx_idx k = 0; k < n * b; k++)
        x[k] = cx_rng_range(&r, -2.385, 2.385);
    for (cx_idx k = 0; k < n; k++)
        y[k] = cx_rng_normal(&r);
    for (cx_idx i = 0; i < n; i++) {
        double s = 0;
        for (cx_idx j = 0; j < n; j++)
            s += dense[i * n + j] * x[j];
        want[i] = 0.715 * s - 1.25 * y[i];
    }
    cx_csr_gemv(&m, 0.715, x, -1.25, y);
    double err = 0;
    for (cx_idx i = 0; i < n; i++)
        err = fmax(err, fabs(y[i] - want[i]));
    cx_test_abs("gemv y = 0.715 M x - 1.25 y vs dense product", err, 0.0, 1e-12,
                "dense reference product (definition)");
    for (cx_idx i = 0; i < n; i++)
        y[i] = NAN;
    cx_csr_gemv(&m, 1.0, x, 0.0, y);
    err = 0;
    for (cx_idx i = 0; i < n; i++) {
        double s = 0;
        for (cx_idx j = 0; j < n; j++)
            s += dense[i * n + j] * x[j];
        err = fmax(err, fabs(y[i] - s));
    }
    cx_test_abs("gemv with beta = 0 ignores NaN in y", err, 0.0, 1e-12,
                "BLAS dgemv convention (Dongarra et al. 1988, ACM TOMS 14, 1)");
    for (cx_idx i = 0; i < n; i++)
        for (cx_idx c = 0; c < b; c++) {
            double s = 0;
            for (cx_idx j = 0; j < n; j++)
                s += dense[i * n + j] * x[j * b + c];
            want[i * b + c] = s;
        }
    cx_csr_gemm(&m, x, b, y);
    err = 0;
    for (cx_idx k = 0; k < n * b; k++)
        err = fmax(err, fabs(y[k] - want[k]));
    cx_test_abs("gemm Y = M X (X 300 x 5 row-major) vs dense product", err, 0.0, 1e-12,
                "dense reference product (definition)");
    double v0 = m.val[0];
    cx_csr_scale(&m, -0.4125);
    cx_test_abs("scale multiplies every value", m.val[0], -0.4125 * v0, 1e-15 * fabs(v0),
                "definition");
    free(want);
    free(y);
    free(x);
    free(dense);
    cx_csr_free(&m);

    cx_csr broken;
    cx_idx rp[3] = {0, 2, 3}, cl[3] = {1, 0, 1};
    double vl[3] = {1.0, 2.0, 3.0};
    broken.n = 2;
    broken.nnz = 3;
    broken.rowptr = rp;
    broken.col = cl;
    broken.val = vl;
    cx_test_true("cx_csr_check rejects unsorted columns", cx_csr_check(&broken) != CX_OK, "",
                 "CSR definition");
    cx_err_clear();
}

static void check_input(void)
{
    const cx_idx n = 4000;
    const int dim = 3;
    double *w = malloc((size_t)(n * dim) * sizeof *w);
    cx_rng r;
    cx_rng_seed(&r, 5u, 9u);
    int ok = cx_net_input(n, dim, CX_INPUT_ONE_PER_NODE, &r, w) == CX_OK;
    int one = 1;
    cx_idx per[3] = {0, 0, 0};
    for (cx_idx i = 0; i < n; i++) {
        int nz = 0;
        for (int c = 0; c < dim; c++)
            if (w[i * dim + c] != 0.0) {
                nz++;
                per[c]++;
                one &= fabs(w[i * dim + c]) <= 1.0;
            }
        one &= nz == 1;
    }
    cx_test_true("one-per-node W_in: exactly one nonzero in U(-1, 1) per row", ok && one,
                 "4000 x 3", "Lu, Hunt & Ott, Chaos 28, 061104, 2018");
    double pc = 1.0 / 3.0, sd = sqrt((double)n * pc * (1.0 - pc));
    cx_test_abs("one-per-node W_in: column 0 chosen ~ Binomial(N, 1/3) (5 sigma)", (double)per[0],
                (double)n * pc, 5.0 * sd, "uniform choice of the coordinate, Lu, Hunt & Ott 2018");
    ok = cx_net_input(n, dim, CX_INPUT_DENSE, &r, w) == CX_OK;
    double s = 0, s2 = 0;
    int inr = 1;
    for (cx_idx k = 0; k < n * dim; k++) {
        s += w[k];
        s2 += w[k] * w[k];
        inr &= fabs(w[k]) <= 1.0 && w[k] != 0.0;
    }
    cx_test_true("dense W_in: every entry nonzero in [-1, 1)", ok && inr, "", "net.h contract");
    cx_test_abs("dense W_in: E w^2 = 1/3 (5 sigma)", s2 / (double)(n * dim), 1.0 / 3.0,
                5.0 * sqrt((1.0 / 5.0 - 1.0 / 9.0) / (double)(n * dim)),
                "moments of U(-1, 1), Abramowitz & Stegun 1964, 26.1");
    free(w);
}

static void check_analytic_spectra(void)
{
    cx_net_params p = er(777, 0.0, CX_WEIGHT_UNIFORM, 0.8375);
    p.topology = CX_TOPO_RING;
    cx_csr m;
    draw(&p, 4u, &m);
    for (int method = 0; method <= 2; method++) {
        char what[96];
        snprintf(what, sizeof what, "ring N = 777, a = 0.8375: spectral radius (method %d)",
                 method);
        cx_test_rel(what, radius(&m, method, NULL), 0.8375, 1e-13,
                    "a times a cyclic permutation: eigenvalues a exp(2 pi i k/N), Rodan & Tino, "
                    "IEEE Trans. Neural Netw. 22, 131, 2011");
    }
    cx_test_rel("ring N = 777: LAPACK on the full matrix agrees", lapack_radius(&m), 0.8375, 1e-12,
                SRC_LAPACK);
    cx_csr_free(&m);

    p.topology = CX_TOPO_DELAY_LINE;
    p.nodes = 2500;
    draw(&p, 5u, &m);
    for (int method = 0; method <= 2; method++) {
        char what[96];
        snprintf(what, sizeof what, "delay line N = 2500: spectral radius 0 (method %d)", method);
        cx_test_abs(what, radius(&m, method, NULL), 0.0, 0.0,
                    "strictly lower triangular, nilpotent (analytic)");
    }
    cx_csr_free(&m);

    p = er(600, 6.0, CX_WEIGHT_UNIFORM, 1.0);
    p.topology = CX_TOPO_SMALL_WORLD;
    p.rewire = 0.0;
    draw(&p, 6u, &m);
    cx_test_true("small world p = 0 passes cx_csr_check and has N d entries",
                 cx_csr_check(&m) == CX_OK && m.nnz == 600 * 6, "", "Watts & Strogatz 1998");
    for (cx_idx k = 0; k < m.nnz; k++)
        m.val[k] = 1.0;
    for (int method = 1; method <= 2; method++) {
        char what[96];
        snprintf(what, sizeof what,
                 "small world p = 0, N = 600, d = 6, unit weights: radius = d (method %d)", method);
        cx_test_rel(what, radius(&m, method, NULL), 6.0, 1e-10,
                    "symmetric circulant: eigenvalue sum of the first row = degree (Davis, "
                    "Circulant Matrices, Wiley 1979)");
    }
    cx_csr_free(&m);

    p.rewire = 0.2385;
    p.nodes = 5000;
    p.mean_degree = 8.0;
    draw(&p, 7u, &m);
    int sym = cx_csr_check(&m) == CX_OK && m.nnz == 5000 * 8;
    int loops = 0;
    for (cx_idx i = 0; i < m.n && sym; i++)
        for (cx_idx k = m.rowptr[i]; k < m.rowptr[i + 1]; k++) {
            cx_idx j = m.col[k];
            loops += j == i;
            int found = 0;
            for (cx_idx q = m.rowptr[j]; q < m.rowptr[j + 1]; q++)
                found |= m.col[q] == i;
            sym &= found;
        }
    cx_test_true("small world p = 0.2385: N d entries, pattern symmetric, no self loops",
                 sym && loops == 0, "rewiring keeps the edge count",
                 "Watts & Strogatz, Nature 393, 440, 1998");
    /* Each lattice edge survives with probability 1 - p; a rewired edge lands on a lattice
     * neighbour only with probability ~ d/N, ignored in the tolerance below. */
    cx_idx kept = 0;
    for (cx_idx i = 0; i < m.n; i++)
        for (cx_idx k = m.rowptr[i]; k < m.rowptr[i + 1]; k++) {
            cx_idx dist = labs(m.col[k] - i);
            dist = dist < m.n - dist ? dist : m.n - dist;
            kept += dist <= 4;
        }
    double ne = 5000.0 * 4.0, fk = (double)kept / 2.0 / ne;
    cx_test_abs("small world: fraction of lattice edges kept = 1 - p (5 sigma + d/N)", fk,
                1.0 - 0.2385, 5.0 * sqrt(0.2385 * 0.7615 / ne) + 8.0 / 5000.0,
                "Watts & Strogatz 1998 rewiring, Binomial(N d/2, 1 - p)");
    cx_csr_free(&m);
}

static void check_methods_agree(void)
{
    struct {
        cx_idx n;
        double d;
        int law;
        double a;
    } cases[] = {{500, 3.0, CX_WEIGHT_UNIFORM, 1.0},
                 {800, 6.5, CX_WEIGHT_NORMAL, 0.385},
                 {1200, 3.0, CX_WEIGHT_UNIFORM, 2.385}};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        cx_net_params p = er(cases[c].n, cases[c].d, cases[c].law, cases[c].a);
        cx_csr m;
        draw(&p, 10u + c, &m);
        double t1, t2;
        double r1 = radius(&m, 1, &t1), r2 = radius(&m, 2, &t2);
        char what[160];
        snprintf(what, sizeof what,
                 "ER N = %lld, d = %g: Arnoldi (%.2f s) vs dgeev (%.2f s) on the core",
                 (long long)cases[c].n, cases[c].d, t2, t1);
        cx_test_rel(what, r2, r1, 1e-10, "LAPACK dgeev through cx_net_spectral_radius");
        if (c == 0) {
            cx_test_rel("ER N = 500: trimmed dgeev vs LAPACK dgeev on the full matrix", r1,
                        lapack_radius(&m), 1e-12, SRC_LAPACK);
        }
        cx_csr_free(&m);
    }
    {
        /* Sparse ER with self loops: many nodes are peeled off, each adding its self loop. */
        cx_net_params q = er(400, 1.6, CX_WEIGHT_NORMAL, 1.3);
        q.self_loops = 1;
        cx_csr s;
        draw(&q, 30u, &s);
        cx_test_rel("ER N = 400, d = 1.6, self loops: trimmed dgeev vs LAPACK on the full matrix",
                    radius(&s, 1, NULL), lapack_radius(&s), 1e-12, SRC_LAPACK);
        cx_csr_free(&s);
    }
    cx_net_params p = er(900, 6.0, CX_WEIGHT_NORMAL, 0.5);
    p.topology = CX_TOPO_SMALL_WORLD;
    p.rewire = 0.1;
    cx_csr m;
    draw(&p, 20u, &m);
    double r1 = radius(&m, 1, NULL);
    cx_test_rel("small world N = 900, d = 6, p = 0.1, normal weights: Arnoldi vs dgeev",
                radius(&m, 2, NULL), r1, 1e-10, "LAPACK dgeev through cx_net_spectral_radius");
    cx_test_rel("small world N = 900: dgeev vs LAPACK on the full matrix", r1, lapack_radius(&m),
                1e-12, SRC_LAPACK);
    double n1 = NAN, n2 = NAN;
    int rc1 = cx_net_spectral_radius(&m, 2, NULL, &n1),
        rc2 = cx_net_spectral_radius(&m, 2, NULL, &n2);
    cx_test_true("Arnoldi without a caller stream is reproducible and agrees with dgeev",
                 rc1 == CX_OK && rc2 == CX_OK && n1 == n2 && fabs(n1 - r1) <= 1e-10 * r1, "",
                 "reproducibility contract, net.h; LAPACK dgeev");
    cx_csr_free(&m);
}

static void check_circular_law(void)
{
    /* Sparse directed ER with centred weights: eigenvalues fill the disc of radius
     * sqrt(d E w^2) (circular law; Girko 1984, Theory Probab. Appl. 29, 694; Rajan & Abbott,
     * Phys. Rev. Lett. 97, 188104, 2006). U(-1, 1): E w^2 = 1/3, d = 3 -> radius 1. */
    const int draws = 4;
    double sum = 0, t = 0;
    for (int k = 0; k < draws; k++) {
        cx_net_params p = er(2000, 3.0, CX_WEIGHT_UNIFORM, 1.0);
        cx_csr m;
        draw(&p, 100u + (uint64_t)k, &m);
        double dt;
        sum += radius(&m, 2, &dt);
        t += dt;
        cx_csr_free(&m);
    }
    char what[128];
    snprintf(what, sizeof what,
             "ER N = 2000, d = 3, U(-1,1): mean radius over %d draws (Arnoldi, %.2f s each)", draws,
             t / draws);
    cx_test_rel(what, sum / draws, 1.0, 0.05,
                "circular law radius sqrt(d E w^2): Rajan & Abbott, PRL 97, 188104, 2006; "
                "Girko 1984");
}

int main(void)
{
    check_invalid();
    check_erdos_renyi_structure();
    check_reproducible();
    check_kernels();
    check_input();
    check_analytic_spectra();
    check_methods_agree();
    check_circular_law();
    return cx_test_finish();
}
