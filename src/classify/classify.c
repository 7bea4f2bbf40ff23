/* coexist classify: the outcome of one closed-loop run, in the order of the criteria stated in
 * include/coexist/classify.h, and the defaults of its thresholds.
 *
 * Valid prediction time follows J. Pathak, B. Hunt, M. Girvan, Z. Lu & E. Ott, "Model-free
 * prediction of large spatiotemporally chaotic systems from data: a reservoir computing
 * approach", Phys. Rev. Lett. 120 (2018) 024102: the first time the error against the true
 * continuation, normalised here by the RMS radius of the run's own attractor, exceeds a
 * threshold. Distances use the k-d tree of kdtree.c, roundness, period and rotation metrics.c.
 */
#include <math.h>
#include <stdlib.h>

#include "coexist/error.h"
#include "classify/classify_impl.h"

/* Smallest half-width of the bound box, as a fraction of its widest half-width, so that a
 * coordinate that was constant in training does not make every deviation a divergence
 * (common practice, no published source). */
#define FLAT_FRACTION 1e-3

static const char *const names[CX_OUT_COUNT] = {
    "not-run",         "reconstructed",       "other-trained", "fixed-point",
    "untrained-cycle", "untrained-aperiodic", "diverged"};
static const char *const labels[CX_OUT_COUNT] = {"not run",
                                                 "reconstructed",
                                                 "other trained attractor",
                                                 "fixed point",
                                                 "untrained periodic orbit",
                                                 "untrained aperiodic",
                                                 "diverged"};

const char *cx_outcome_name(int outcome)
{
    return outcome >= 0 && outcome < CX_OUT_COUNT ? names[outcome] : "unknown";
}

const char *cx_outcome_label(int outcome)
{
    return outcome >= 0 && outcome < CX_OUT_COUNT ? labels[outcome] : "unknown outcome";
}

void cx_class_defaults(cx_class_params *p)
{
    /* All thresholds but valid_error are common practice, no published source. valid_error
     * 0.4: Pathak et al. 2018 (above) used a normalised error threshold of 0.4 (from memory). */
    p->bound = 4.0;
    p->fixed_tol = 1e-3;
    p->match_tol = 0.1;
    p->coverage_radius = 0.1;
    p->coverage_min = 0.5;
    p->period_tol = 0.02;
    p->valid_error = 0.4;
    p->cloud_points = 2000;
    p->tail_points = 2000;
}

void cx_class_box(const double *const *x, const cx_idx *n, int ntasks, int dim, double bound,
                  double *lo, double *hi)
{
    for (int c = 0; c < dim; c++) {
        lo[c] = INFINITY;
        hi[c] = -INFINITY;
    }
    for (int k = 0; k < ntasks; k++)
        for (cx_idx i = 0; i < n[k]; i++)
            for (int c = 0; c < dim; c++) {
                double v = x[k][i * dim + c];
                if (v < lo[c])
                    lo[c] = v;
                if (v > hi[c])
                    hi[c] = v;
            }
    double wmax = 0.0;
    for (int c = 0; c < dim; c++)
        if (0.5 * (hi[c] - lo[c]) > wmax)
            wmax = 0.5 * (hi[c] - lo[c]);
    for (int c = 0; c < dim; c++) {
        double mid = 0.5 * (lo[c] + hi[c]);
        double w = 0.5 * (hi[c] - lo[c]);
        if (w < FLAT_FRACTION * wmax)
            w = FLAT_FRACTION * wmax;
        lo[c] = mid - bound * w;
        hi[c] = mid + bound * w;
    }
}

int cx_class_ws_alloc(cx_class_ws **ws, cx_idx max_samples, int dim)
{
    int rc = CX_OK;
    cx_class_ws *w = NULL;
    CX_REQUIRE(ws != NULL, CX_ERR_INVALID, "classify workspace: NULL output");
    CX_REQUIRE(max_samples >= 1, CX_ERR_INVALID, "classify workspace: max_samples must be >= 1");
    CX_REQUIRE(dim >= 1 && dim <= CX_MAX_DIM, CX_ERR_INVALID,
               "classify workspace: dimension %d outside 1..%d", dim, CX_MAX_DIM);
    CX_CALLOC(w, 1);
    w->max_samples = max_samples;
    w->dim = dim;
    CX_ALLOC(w->tail, max_samples * dim);
    CX_ALLOC(w->split, max_samples);
    CX_ALLOC(w->box, max_samples * 2 * dim);
    CX_ALLOC(w->lagd, max_samples);
    *ws = w;
    w = NULL;
done:
    cx_class_ws_free(&w);
    return rc;
}

void cx_class_ws_free(cx_class_ws **ws)
{
    if (ws == NULL || *ws == NULL)
        return;
    free((*ws)->lagd);
    free((*ws)->box);
    free((*ws)->split);
    free((*ws)->tail);
    free(*ws);
    *ws = NULL;
}

/* Index of the first sample that is non-finite or outside [lo, hi], or -1. */
static cx_idx first_escape(const double *y, cx_idx n, int dim, const double *lo, const double *hi)
{
    for (cx_idx i = 0; i < n; i++)
        for (int c = 0; c < dim; c++) {
            double v = y[i * dim + c];
            if (!(v >= lo[c] && v <= hi[c])) /* false for NaN as well */
                return i;
        }
    return -1;
}

static double valid_time(const double *y, const double *truth, cx_idx n, int dim, double dt,
                         double limit)
{
    double lim2 = limit * limit;
    for (cx_idx i = 0; i < n; i++) {
        double e2 = 0.0;
        for (int c = 0; c < dim; c++) {
            double d = y[i * dim + c] - truth[i * dim + c];
            e2 += d * d;
        }
        if (!(e2 <= lim2))
            return (double)i * dt;
    }
    return (double)(n - 1) * dt;
}

/* Fraction of the cloud's points that have a tail point within radius r. */
static double coverage(const cx_attractor *a, const cx_kd *tail, double r)
{
    const cx_kd *cloud = &a->tree;
    cx_idx hit = 0;
    for (cx_idx j = 0; j < cloud->n; j++)
        hit += cx_kd_any_within(tail, cloud->pts + j * cloud->dim, r * r);
    return cloud->n > 0 ? (double)hit / (double)cloud->n : NAN;
}

/* RMS deviation of n samples from their mean. */
static double spread(const double *x, cx_idx n, int dim)
{
    double mean[CX_MAX_DIM];
    for (int c = 0; c < dim; c++) {
        double s = 0.0;
        for (cx_idx i = 0; i < n; i++)
            s += x[i * dim + c];
        mean[c] = s / (double)n;
    }
    double dev = 0.0;
    for (cx_idx i = 0; i < n; i++)
        for (int c = 0; c < dim; c++) {
            double d = x[i * dim + c] - mean[c];
            dev += d * d;
        }
    return sqrt(dev / (double)n);
}

/* Copy at most `points` samples of the tail, evenly spaced in time, into the workspace and
 * build the tail's tree over them (for the coverage queries; the distance queries use the same
 * points, whose order does not matter to a mean). */
static void index_tail(cx_class_ws *ws, const double *tail, cx_idx n_tail, cx_idx points, int dim,
                       cx_kd *tree /* out */)
{
    cx_idx nt = n_tail < points ? n_tail : points;
    if (nt < 1)
        nt = 1;
    for (cx_idx j = 0; j < nt; j++) {
        cx_idx i = nt > 1 ? (j * (n_tail - 1)) / (nt - 1) : n_tail - 1;
        for (int c = 0; c < dim; c++)
            ws->tail[j * dim + c] = tail[i * dim + c];
    }
    cx_kd_build(tree, ws->tail, ws->split, ws->box, nt, dim);
}

/* Criterion 3: the trained attractor the tail matches, or -1; its coverage in *cov. */
static int best_match(const cx_class_params *p, const cx_attractor *const *atts, int natt,
                      const double *distance, const cx_kd *tree, double *cov /* out */)
{
    int match = -1;
    for (int k = 0; k < natt; k++) {
        double sk = atts[k]->scale;
        if (!(distance[k] < p->match_tol * sk))
            continue;
        double c = coverage(atts[k], tree, p->coverage_radius * sk);
        if (!(c >= p->coverage_min))
            continue;
        /* Nearest in units of each attractor's own scale, the unit of the match test. */
        if (match < 0 || distance[k] / sk < distance[match] / atts[match]->scale) {
            match = k;
            *cov = c;
        }
    }
    return match;
}

int cx_classify_run(cx_class_ws *ws, const cx_class_params *p, const cx_attractor *const *atts,
                    int natt, const double *lo, const double *hi, const double *y, cx_idx n_total,
                    cx_idx n_tail, int dim, double dt, int own, const double *truth,
                    cx_run_metrics *m)
{
    int rc = CX_OK;
    CX_REQUIRE(ws != NULL && p != NULL && atts != NULL && lo != NULL && hi != NULL && y != NULL &&
                   m != NULL,
               CX_ERR_INVALID, "classify: NULL argument");
    CX_REQUIRE(natt >= 1 && natt <= CX_MAX_TASKS, CX_ERR_INVALID,
               "classify: %d trained attractors, need 1..%d", natt, CX_MAX_TASKS);
    CX_REQUIRE(dim >= 1 && dim <= ws->dim, CX_ERR_INVALID,
               "classify: dimension %d outside 1..%d of the workspace", dim, ws->dim);
    CX_REQUIRE(n_tail >= 1 && n_tail <= n_total && n_tail <= ws->max_samples, CX_ERR_INVALID,
               "classify: tail of %lld samples (run %lld, workspace %lld)", (long long)n_tail,
               (long long)n_total, (long long)ws->max_samples);
    CX_REQUIRE(dt > 0.0, CX_ERR_INVALID, "classify: time step must be positive");
    CX_REQUIRE(own >= -1 && own < natt, CX_ERR_INVALID, "classify: own task %d of %d", own, natt);
    for (int k = 0; k < natt; k++)
        CX_REQUIRE(atts[k] != NULL && atts[k]->dim == dim, CX_ERR_INVALID,
                   "classify: attractor %d missing or of another dimension", k);

    cx_run_metrics r;
    r.outcome = CX_OUT_NOT_RUN;
    r.attractor = -1;
    r.cluster = -1;
    r.spare = 0;
    for (int k = 0; k < CX_MAX_TASKS; k++)
        r.distance[k] = NAN;
    r.coverage = r.roundness = r.rotation = r.period = r.valid_time = r.lyapunov = NAN;

    cx_idx esc = first_escape(y, n_total, dim, lo, hi);
    r.stop_time = (double)(esc >= 0 ? esc : n_total - 1) * dt;
    if (truth != NULL && own >= 0) {
        r.valid_time = valid_time(y, truth, n_total, dim, dt, p->valid_error * atts[own]->scale);
        if (r.valid_time > r.stop_time)
            r.valid_time = r.stop_time;
    }
    if (esc >= 0) {
        r.outcome = CX_OUT_DIVERGED;
        *m = r;
        goto done;
    }

    const double *tail = y + (n_total - n_tail) * dim;
    double big_s = 0.0;
    for (int k = 0; k < natt; k++)
        big_s += atts[k]->scale;
    big_s /= (double)natt;

    cx_kd tree;
    index_tail(ws, tail, n_tail, p->tail_points, dim, &tree);
    for (int k = 0; k < natt; k++) {
        double s = 0.0;
        cx_idx hint = -1;
        for (cx_idx j = 0; j < tree.n; j++)
            s += sqrt(cx_kd_nearest2(&atts[k]->tree, tree.pts + j * dim, &hint));
        r.distance[k] = s / (double)tree.n;
    }
    double match_cov = NAN;
    int match = best_match(p, atts, natt, r.distance, &tree, &match_cov);
    if (match >= 0)
        r.coverage = match_cov;
    else if (own >= 0)
        r.coverage = coverage(atts[own], &tree, p->coverage_radius * atts[own]->scale);

    if (spread(tail, n_tail, dim) < p->fixed_tol * big_s) {
        r.outcome = CX_OUT_FIXED_POINT;
        *m = r;
        goto done;
    }
    r.roundness = cx_roundness(tail, n_tail, dim, NULL, NULL, NULL);
    r.rotation = cx_class_rotation(tail, n_tail, dim, dt);
    r.period = cx_period(ws, tail, n_tail, dim, dt, p->period_tol * big_s);
    if (match >= 0) {
        r.attractor = match;
        r.outcome = match == own ? CX_OUT_RECONSTRUCTED : CX_OUT_OTHER_TRAINED;
    } else {
        r.outcome = isfinite(r.period) ? CX_OUT_UNTRAINED_CYCLE : CX_OUT_UNTRAINED_APERIODIC;
    }
    *m = r;
done:
    return rc;
}
