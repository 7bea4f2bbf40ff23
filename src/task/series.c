/* coexist: sampling a task into a time series, and the transforms applied to it.
 *
 * Cycles are sampled in closed form, x(t) = c + R (cos(w t + phase), e sin(w t + phase)), an
 * ellipse traversed at constant phase speed w (anticlockwise for w > 0). Flows are integrated with
 * classical RK4 (rk4.c) at an inner step that divides the sample spacing exactly, after a
 * transient; files are interpolated (trajfile.c). The transforms are affine maps applied to each
 * sample in a fixed order (scale, rotate, mirror, shift); time reversal traverses the same point
 * set backwards: for a cycle w -> -w, otherwise the forward samples in reverse order.
 *
 * Conventions for unset fields (a zero-initialised spec must mean "no change"): scale 0 means 1,
 * ellipticity 0 means 1 (a circle), inner_dt 0 means 0.001 time units, dim 0 means 2 for cycles
 * and 3 for flows.
 */
#include <math.h>
#include <stdlib.h>

#include "coexist/error.h"
#include "coexist/task.h"
#include "task_impl.h"

#define CX_TASK_INNER_DT 0.001
/* Relative slack when a ratio of times should be a whole number but carries round-off. */
#define CX_TASK_TIME_FUZZ 1e-9
#define CX_TASK_MAX_STEPS 1000000000.0

static int task_dim(const cx_task_spec *t)
{
    if (t->dim != 0)
        return t->dim;
    return t->kind == CX_TASK_CYCLE ? 2 : (t->kind == CX_TASK_FLOW ? 3 : 0);
}

static int cycle_series(const cx_task_spec *t, int dim, double h, cx_idx n, double *out)
{
    int rc = CX_OK;
    CX_REQUIRE(dim >= 2, CX_ERR_INVALID, "task %s: a cycle needs dimension >= 2, not %d", t->name,
               dim);
    CX_REQUIRE(isfinite(t->radius) && t->radius > 0.0, CX_ERR_INVALID,
               "task %s: cycle radius %g must be > 0", t->name, t->radius);
    CX_REQUIRE(isfinite(t->speed) && t->speed != 0.0, CX_ERR_INVALID,
               "task %s: cycle speed %g must be non-zero (its sign is the rotation sense)", t->name,
               t->speed);
    CX_REQUIRE(isfinite(t->ellipticity) && t->ellipticity >= 0.0, CX_ERR_INVALID,
               "task %s: ellipticity %g must be >= 0 (0 means a circle)", t->name, t->ellipticity);
    CX_REQUIRE(isfinite(t->phase), CX_ERR_INVALID, "task %s: phase %g is not finite", t->name,
               t->phase);
    for (int j = 0; j < dim; j++)
        CX_REQUIRE(isfinite(t->centre[j]), CX_ERR_INVALID, "task %s: centre[%d] is not finite",
                   t->name, j);
    const double e = t->ellipticity == 0.0 ? 1.0 : t->ellipticity;
    const double w = t->reverse ? -t->speed : t->speed;
    for (cx_idx i = 0; i < n; i++) {
        const double a = w * ((double)i * h) + t->phase;
        double *u = out + i * dim;
        u[0] = t->centre[0] + t->radius * cos(a);
        u[1] = t->centre[1] + t->radius * e * sin(a);
        for (int j = 2; j < dim; j++)
            u[j] = t->centre[j];
    }
done:
    return rc;
}

static int flow_series(const cx_task_spec *t, int dim, double h, cx_idx n, double *out)
{
    int rc = CX_OK;
    cx_rk4 *ws = NULL;
    cx_flow_ctx ctx = {0};
    CX_REQUIRE(t->flow >= 0 && t->flow < CX_FLOW_COUNT, CX_ERR_INVALID,
               "task %s: unknown flow id %d", t->name, t->flow);
    CX_REQUIRE(dim == 3, CX_ERR_INVALID, "task %s: flow %s has dimension 3, not %d", t->name,
               cx_flow_name(t->flow), dim);
    const double dt = t->inner_dt == 0.0 ? CX_TASK_INNER_DT : t->inner_dt;
    CX_REQUIRE(isfinite(dt) && dt > 0.0, CX_ERR_INVALID, "task %s: inner step %g must be > 0",
               t->name, dt);
    CX_REQUIRE(isfinite(t->transient) && t->transient >= 0.0, CX_ERR_INVALID,
               "task %s: transient %g must be >= 0", t->name, t->transient);
    const double ratio = ceil(h / dt * (1.0 - CX_TASK_TIME_FUZZ));
    CX_REQUIRE(ratio <= CX_TASK_MAX_STEPS, CX_ERR_INVALID,
               "task %s: sample spacing %g over inner step %g needs too many steps", t->name, h,
               dt);
    const cx_idx per = ratio < 1.0 ? 1 : (cx_idx)ratio;
    const double inner = h / (double)per;
    const double tsteps = ceil(t->transient / inner * (1.0 - CX_TASK_TIME_FUZZ));
    CX_REQUIRE(tsteps <= CX_TASK_MAX_STEPS * 100.0, CX_ERR_INVALID,
               "task %s: transient %g needs too many steps of %g", t->name, t->transient, inner);
    const cx_idx ntrans = (cx_idx)tsteps;

    ctx.flow = t->flow;
    for (int j = 0; j < CX_MAX_FLOW_PAR; j++)
        ctx.par[j] = t->par[j];
    double x[3] = {t->x0[0], t->x0[1], t->x0[2]};
    CX_TRY(cx_rk4_alloc(&ws, 3));
    cx_idx step = 0;
    for (; step < ntrans; step++)
        cx_rk4_step(ws, cx_flow_field, &ctx, (double)step * inner, inner, x);
    for (cx_idx i = 0; i < n; i++) {
        if (i > 0)
            for (cx_idx k = 0; k < per; k++, step++)
                cx_rk4_step(ws, cx_flow_field, &ctx, (double)step * inner, inner, x);
        if (!(isfinite(x[0]) && isfinite(x[1]) && isfinite(x[2])))
            CX_RAISE(CX_ERR_NUMERIC,
                     "task %s: flow %s left the finite range %g time units into the series "
                     "(check its parameters and start point)",
                     t->name, cx_flow_name(t->flow), (double)i * h);
        out[i * 3 + 0] = x[0];
        out[i * 3 + 1] = x[1];
        out[i * 3 + 2] = x[2];
    }
done:
    cx_rk4_free(&ws);
    return rc;
}

/* Scale, rotate (first two coordinates), mirror, shift: in this order, sample by sample. */
static void transform(const cx_task_spec *t, int dim, cx_idx n, double *out)
{
    const double s = t->scale == 0.0 ? 1.0 : t->scale;
    const double c = cos(t->rotate), sn = sin(t->rotate);
    const double m = t->mirror ? -1.0 : 1.0;
    for (cx_idx i = 0; i < n; i++) {
        double *u = out + i * dim;
        for (int j = 0; j < dim; j++)
            u[j] *= s;
        if (dim >= 2 && t->rotate != 0.0) {
            const double a = u[0], b = u[1];
            u[0] = c * a - sn * b;
            u[1] = sn * a + c * b;
        }
        for (int j = 0; j < dim; j++)
            u[j] = m * u[j] + t->shift[j];
    }
}

static void reverse_rows(int dim, cx_idx n, double *out)
{
    for (cx_idx i = 0, k = n - 1; i < k; i++, k--)
        for (int j = 0; j < dim; j++) {
            const double a = out[i * dim + j];
            out[i * dim + j] = out[k * dim + j];
            out[k * dim + j] = a;
        }
}

int cx_task_series(const cx_task_spec *t, double h, cx_idx n, double *out)
{
    int rc = CX_OK;
    CX_REQUIRE(t != NULL && (out != NULL || n == 0), CX_ERR_INTERNAL,
               "cx_task_series: NULL argument");
    CX_REQUIRE(n >= 0, CX_ERR_INVALID, "task %s: sample count %lld is negative", t->name,
               (long long)n);
    CX_REQUIRE(isfinite(h) && h > 0.0, CX_ERR_INVALID, "task %s: sample spacing %g must be > 0",
               t->name, h);
    const int dim = task_dim(t);
    CX_REQUIRE(dim >= 1 && dim <= CX_MAX_DIM, CX_ERR_INVALID,
               "task %s: dimension %d is outside 1..%d", t->name, dim, CX_MAX_DIM);
    CX_REQUIRE(isfinite(t->scale) && isfinite(t->rotate), CX_ERR_INVALID,
               "task %s: scale and rotation must be finite", t->name);
    for (int j = 0; j < dim; j++)
        CX_REQUIRE(isfinite(t->shift[j]), CX_ERR_INVALID, "task %s: shift[%d] is not finite",
                   t->name, j);
    if (n == 0)
        goto done;
    switch (t->kind) {
    case CX_TASK_CYCLE:
        CX_TRY(cycle_series(t, dim, h, n, out));
        break;
    case CX_TASK_FLOW:
        CX_TRY(flow_series(t, dim, h, n, out));
        if (t->reverse)
            reverse_rows(dim, n, out);
        break;
    case CX_TASK_FILE:
        CX_TRY(cx_task_file_series(t, h, n, out));
        if (t->reverse)
            reverse_rows(dim, n, out);
        break;
    default:
        CX_RAISE(CX_ERR_INVALID, "task %s: unknown kind %d", t->name, t->kind);
    }
    transform(t, dim, n, out);
done:
    return rc;
}
