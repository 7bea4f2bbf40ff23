/* coexist: the outcome of one closed-loop run and its metrics.
 *
 * A run's output y(t) is judged on its tail (the last `tail` time units) against the trained
 * attractors, each represented by a point cloud of its training signal. Criteria, in order:
 *  1. diverged: a non-finite value, or a coordinate outside the bound box (the training data's
 *     bounding box, grown about its centre by the factor `bound`), at any time of the run;
 *  2. fixed point: the tail's RMS deviation from its own mean is below fixed_tol * S, with S the
 *     mean RMS radius of the trained attractors;
 *  3. a trained attractor k: the tail's mean nearest-neighbour distance to cloud k is below
 *     match_tol * s_k (s_k the RMS radius of attractor k about its centroid), and at least
 *     coverage_min of cloud k's points have a tail point within coverage_radius * s_k; of the
 *     attractors that pass, the nearest (distance / s_k) wins. If it is the run's own task:
 *     reconstructed; else other trained attractor (index kept). Random starts have no own task
 *     (own = -1), so a random start that lands on any trained attractor k is reported as other
 *     trained attractor with attractor = k.
 *  4. otherwise periodic (untrained) when the tail recurs: the RMS of |y(t + T) - y(t)| over t
 *     in the first half of the tail drops below period_tol * S at some lag T <= half the tail
 *     (the first such local minimum is the period);
 *  5. otherwise aperiodic (untrained).
 * Metrics: distance to every trained attractor (mean nearest-neighbour distance of the tail to
 * its cloud, in signal units), coverage of the matched or own attractor, roundness of the tail in
 * the plane of the first two coordinates (ISO 12181-1 peak-to-valley roundness, circumscribed
 * minus inscribed radius, about the least-squares circle centre: Kasa 1976, IEEE Trans. Instrum.
 * Meas. 25, 8), rotation sense (sign of the mean angular momentum about the tail centroid),
 * period, valid prediction time (the first time the error against the true continuation, divided
 * by the RMS radius of the target, exceeds valid_error; Pathak, Hunt, Girvan, Lu & Ott 2018, Phys.
 * Rev. Lett. 120, 024102) and the largest Lyapunov exponent when the probe computed it.
 */
#ifndef COEXIST_CLASSIFY_H
#define COEXIST_CLASSIFY_H

#include "coexist/config.h"

/* Outcome labels. The values are stored in cubes and journals: never renumber, only append. */
enum cx_outcome {
    CX_OUT_NOT_RUN = 0,
    CX_OUT_RECONSTRUCTED = 1, /* stays on its own trained attractor */
    CX_OUT_OTHER_TRAINED = 2, /* lands on another trained attractor */
    CX_OUT_FIXED_POINT = 3,
    CX_OUT_UNTRAINED_CYCLE = 4,     /* periodic orbit that was not trained */
    CX_OUT_UNTRAINED_APERIODIC = 5, /* aperiodic motion that was not trained */
    CX_OUT_DIVERGED = 6,            /* non-finite or beyond the bound */
    CX_OUT_COUNT = 7
};

/* Short machine names ("reconstructed", "other-trained", "fixed-point", "untrained-cycle",
 * "untrained-aperiodic", "diverged", "not-run") and readable labels. */
const char *cx_outcome_name(int outcome);
const char *cx_outcome_label(int outcome);

typedef struct cx_class_params {
    double bound;           /* growth factor of the training bounding box (default 4) */
    double fixed_tol;       /* default 1e-3 */
    double match_tol;       /* default 0.1 */
    double coverage_radius; /* default 0.1 */
    double coverage_min;    /* default 0.5 */
    double period_tol;      /* default 0.02 */
    double valid_error;     /* default 0.4 */
    cx_idx cloud_points;    /* points kept per trained attractor cloud (default 2000) */
    cx_idx tail_points;     /* tail points used for distances (subsampled, default 2000) */
} cx_class_params;

/* Fill p with the defaults above. */
void cx_class_defaults(cx_class_params *p /* out */);

/* A trained attractor as a point cloud with a spatial index for nearest-neighbour queries. */
typedef struct cx_attractor cx_attractor;

/* Build from a signal (n samples x dim, row-major), keeping at most cloud_points points evenly
 * spaced in time. OUT: *a. */
int cx_attractor_create(const double *x, cx_idx n, int dim, cx_idx cloud_points,
                        cx_attractor **a /* out */);
void cx_attractor_destroy(cx_attractor **a);
/* RMS radius about the centroid, and the centroid. */
double cx_attractor_scale(const cx_attractor *a);
const double *cx_attractor_centre(const cx_attractor *a);

/* The bound box for the divergence test: the bounding box of all training signals x[k]
 * (n[k] samples x dim, row-major), grown about its centre by the factor `bound`. A coordinate
 * narrower than 1e-3 of the widest half-width gets that half-width before growing. OUT: lo, hi
 * (dim values each). */
void cx_class_box(const double *const *x, const cx_idx *n, int ntasks, int dim, double bound,
                  double *lo /* out */, double *hi /* out */);

/* Metrics of one run. Fields that do not apply are NaN. */
typedef struct cx_run_metrics {
    int outcome;   /* enum cx_outcome */
    int attractor; /* index of the trained attractor landed on, or -1 */
    int cluster;   /* the cell's distinct untrained attractor this run ended on, or -1 (set by the
                      cell pipeline, src/cell/untrained.c) */
    int spare;     /* always 0: keeps the struct free of padding, so results compare bytewise */
    double distance[CX_MAX_TASKS]; /* mean nearest-neighbour distance to each trained attractor */
    double coverage;               /* of the matched attractor, else of the own one, else NaN */
    double roundness;              /* signal units */
    double rotation;   /* +1 anticlockwise, -1 clockwise (first two coordinates), NaN if no turn */
    double period;     /* time units */
    double valid_time; /* time units, NaN without a true continuation */
    double lyapunov;   /* 1 / time unit, NaN unless computed */
    double stop_time;  /* time at which the run ended (horizon, or divergence) */
} cx_run_metrics;

/* Classify one run.
 * y: the run's outputs at spacing dt, n_total samples (the whole run, for the divergence check);
 * the tail is the last n_tail of them. lo/hi: the bound box (already grown). atts[0..natt-1]:
 * the trained attractors. own: the run's own task or -1. truth: the true continuation (n_total x
 * dim) for the valid time, or NULL. OUT: *m. Not collective; does not allocate when ws is used. */
typedef struct cx_class_ws cx_class_ws;
int cx_class_ws_alloc(cx_class_ws **ws /* out */, cx_idx max_samples, int dim);
void cx_class_ws_free(cx_class_ws **ws);
int cx_classify_run(cx_class_ws *ws, const cx_class_params *p, const cx_attractor *const *atts,
                    int natt, const double *lo, const double *hi, const double *y, cx_idx n_total,
                    cx_idx n_tail, int dim, double dt, int own, const double *truth,
                    cx_run_metrics *m /* out */);

/* Roundness (circumscribed minus inscribed radius about the least-squares circle centre) of
 * the first two coordinates of n points; also returns the fitted centre and radius. */
double cx_roundness(const double *x, cx_idx n, int dim, double *cx, double *cy, double *radius);

/* Period of a sampled signal by recurrence (see above); NaN when none is found, or when n
 * exceeds the workspace's max_samples or dim its dimension. */
double cx_period(cx_class_ws *ws, const double *x, cx_idx n, int dim, double dt, double tol_abs);

#endif
