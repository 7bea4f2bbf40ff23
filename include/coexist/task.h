/* coexist: the attractors a reservoir is trained on (tasks), their time series, and the
 * integrators and Lyapunov estimator shared with the closed-loop probes.
 *
 * Integrator: classical fourth-order Runge-Kutta (e.g. Hairer, Norsett & Wanner, "Solving
 * Ordinary Differential Equations I", 1993, Sec. II.1). Largest Lyapunov exponent: two nearby
 * trajectories with periodic renormalisation (Benettin, Galgani, Giorgilli & Strelcyn 1980,
 * Meccanica 15, 9).
 */
#ifndef COEXIST_TASK_H
#define COEXIST_TASK_H

#include "coexist/config.h"
#include "coexist/rng.h"

/* A vector field dx/dt = f(t, x). `ctx` is borrowed. Must not allocate. */
typedef void (*cx_field_fn)(void *ctx, double t, const double *x, double *dxdt);

/* RK4 workspace for systems of dimension n (allocated once, reused for every step). */
typedef struct cx_rk4 cx_rk4;
int cx_rk4_alloc(cx_rk4 **ws /* out */, cx_idx n);
void cx_rk4_free(cx_rk4 **ws);
/* One step of size h from (t, x); x is overwritten with x(t + h). */
void cx_rk4_step(cx_rk4 *ws, cx_field_fn f, void *ctx, double t, double h, double *x);

/* Largest Lyapunov exponent of dx/dt = f by the two-trajectory method: integrate `transient`
 * time units, then `total` time units with the companion at distance d0, renormalising every
 * `renorm` time units. x (length n) is the start and is left at the end state. The initial
 * separation direction comes from `rng`. OUT: *lambda in 1 / time unit; NaN (with CX_OK) when the
 * trajectory leaves the finite range or the separation collapses below round-off (d0 is an
 * absolute distance: keep it well above |x| * 1e-16). Allocates once, not per step. */
int cx_lyapunov_max(cx_field_fn f, void *ctx, cx_idx n, double *x, double h, double transient,
                    double total, double renorm, double d0, cx_rng *rng, double *lambda /* out */);

/* Built-in three-dimensional flows with their standard parameters. */
enum cx_flow {
    CX_FLOW_LORENZ = 0,  /* Lorenz 1963, J. Atmos. Sci. 20, 130: sigma, rho, beta = 10, 28, 8/3 */
    CX_FLOW_ROSSLER = 1, /* Rossler 1976, Phys. Lett. A 57, 397: a, b, c = 0.2, 0.2, 5.7 */
    CX_FLOW_CHEN = 2,    /* Chen & Ueta 1999, Int. J. Bifurc. Chaos 9, 1465: a, b, c = 35, 3, 28 */
    CX_FLOW_THOMAS = 3,  /* Thomas 1999, Int. J. Bifurc. Chaos 9, 1889: b = 0.208186 (onset of
                            chaos: largest exponent ~ 0.005-0.01) */
    CX_FLOW_HALVORSEN = 4, /* Halvorsen, in Sprott 2010 "Elegant Chaos": a = 1.27 */
    CX_FLOW_AIZAWA = 5,    /* Aizawa, in Langford 1984: a..f = 0.95, 0.7, 0.6, 3.5, 0.25, 0.1 */
    CX_FLOW_SPROTT_B = 6,  /* Sprott 1994, Phys. Rev. E 50, R647, case B */
    /* Sprott 1997, Phys. Lett. A 228, 271: x''' + A x'' - x'^2 + x = 0, A = 2.017 */
    CX_FLOW_SPROTT_JERK = 7,
    /* Chua circuit, dimensionless (Matsumoto, Chua & Komuro 1985): alpha 15.6, beta 28,
     * m0 -8/7, m1 -5/7 */
    CX_FLOW_CHUA = 8,
    CX_FLOW_COUNT = 9
};

/* The flow's lower-case name ("lorenz", "rossler", "chen", "thomas", "halvorsen", "aizawa",
 * "sprott-b", "sprott-jerk", "chua"), or NULL. */
const char *cx_flow_name(int flow);
/* The flow id for a name, or -1. */
int cx_flow_lookup(const char *name);
/* Number of parameters, their names and standard values, and a start point on or near the
 * attractor's basin. */
int cx_flow_npar(int flow);
const char *cx_flow_par_name(int flow, int i);
void cx_flow_defaults(int flow, double *par /* out, CX_MAX_FLOW_PAR */, double *x0 /* out, 3 */);
/* dx/dt of a flow; ctx points to the flow's const parameter block (struct cx_flow_ctx). */
typedef struct cx_flow_ctx {
    int flow;
    double par[CX_MAX_FLOW_PAR];
} cx_flow_ctx;
void cx_flow_field(void *ctx, double t, const double *x, double *dxdt);

enum cx_task_kind {
    CX_TASK_CYCLE = 0, /* a limit cycle in the plane (dimension 2) */
    CX_TASK_FLOW = 1,  /* a built-in flow (dimension 3) */
    CX_TASK_FILE = 2   /* a trajectory read from an HDF5 dataset or a CSV file */
};

/* One task, fully bound (no axis references left). Zero-initialise before filling. Transforms
 * are applied to the raw signal in this order: scale (about the origin), rotate (about the
 * origin, in the plane of the first two coordinates), mirror (u -> -u), shift; time reversal
 * traverses the same set backwards (cycles: w -> -w; flows and files: the forward samples in
 * reverse order).
 * Zero means "not set": scale 0 = 1, ellipticity 0 = 1 (a circle), inner_dt 0 = 0.001, dim 0 =
 * 2 for a cycle and 3 for a flow. A file task's dim must equal the file's width
 * (cx_task_file_shape); files start at their first row (transient is not used for them). */
typedef struct cx_task_spec {
    char name[CX_NAME_LEN];
    int kind; /* enum cx_task_kind */
    int dim;  /* 2 for cycles, 3 for flows, the file's width for files */
    /* cycle: x = c + R (cos(w t + phase), e sin(w t + phase)); w's sign is the rotation sense
     * (positive = anticlockwise in the first two coordinates), e = ellipticity (minor/major). */
    double centre[CX_MAX_DIM]; /* coordinates 3.. of a cycle with dim > 2 stay at the centre's */
    double radius;
    double speed;
    double ellipticity;
    double phase;
    /* flow */
    int flow;
    double par[CX_MAX_FLOW_PAR];
    double x0[3];
    double transient; /* time units discarded before the series starts */
    double inner_dt;  /* RK4 step used to integrate the flow; the series is sampled from it */
    /* file */
    char path[CX_PATH_LEN];
    char dataset[CX_NAME_LEN]; /* HDF5 dataset path; empty for CSV */
    double file_dt;            /* sample interval of the file; 0 for HDF5 = the dataset's
                                  "sample_interval" attribute */
    /* transforms */
    double scale;  /* 1 = none */
    double rotate; /* radians */
    int mirror;    /* 1 = u -> -u */
    double shift[CX_MAX_DIM];
    int reverse; /* 1 = time reversal */
} cx_task_spec;

/* Sample a task: out[i*dim + j] = u_j(t0 + i*h), i = 0..n-1, with t0 the start of the series
 * (after the flow transient). Samples come from the fine integration (flows: h must be a whole
 * multiple of inner_dt, or inner_dt is reduced to h / ceil(h / inner_dt)); files are linearly
 * interpolated and fail with CX_ERR_INVALID when too short or holding NaN/Inf.
 * OUT: out (caller allocates n * dim). Not collective. */
int cx_task_series(const cx_task_spec *t, double h, cx_idx n, double *out /* out */);

/* Read a trajectory file's shape without loading it (for validation). OUT: *rows, *dim. */
int cx_task_file_shape(const cx_task_spec *t, cx_idx *rows /* out */, int *dim /* out */);

enum cx_family_kind {
    CX_FAMILY_CYCLES_LINE = 0,  /* k cycles, centres spaced `spacing` apart along x, centred on 0 */
    CX_FAMILY_CYCLES_RING = 1,  /* k cycles, centres on a circle of radius `spacing` */
    CX_FAMILY_FLOW_SHIFTED = 2, /* k copies of a flow, shifted `spacing` apart along x */
    CX_FAMILY_FLOW_MIRRORED = 3 /* copies alternate u and -u, each pair shifted `spacing` apart */
};

/* A family for capacity studies: it expands into `count` tasks. `spacing` is what the overlap
 * axis binds to. Rotation: senses[i] = +1 or -1 per cycle (0 = +1); alternate = 1 fills +1, -1,
 * +1, ...; a copy's speed is sense * |base.speed|. Senses do not apply to flow families. Only the
 * coordinates a kind places are overwritten (centre x, or centre x and y on the ring, or shift x);
 * the template's other centre/shift coordinates are kept. A flow family's template may also be a
 * file task. */
typedef struct cx_family_spec {
    int kind;
    int count;
    double spacing;
    int alternate;
    int senses[CX_MAX_TASKS];
    cx_task_spec base; /* cycle or flow template; see above for what is overwritten per copy */
} cx_family_spec;

/* Expand a family into tasks named "<base.name>-<i>". OUT: tasks[0..count-1]. */
int cx_family_expand(const cx_family_spec *f, cx_task_spec *tasks /* out */);

#endif
