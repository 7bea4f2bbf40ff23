/* coexist: the closed-loop (autonomous) reservoir and its largest Lyapunov exponent.
 *
 * Closed loop: the trained readout replaces the input, u = W_out q(r), so the reservoir runs as
 * an autonomous system (Jaeger 2001, GMD Report 148; Lu, Hunt & Ott 2018, Chaos 28, 061104).
 * Largest Lyapunov exponent by two nearby trajectories, renormalising their separation to d0
 * after every step (Benettin, Galgani, Giorgilli & Strelcyn 1980, Meccanica 15, 9):
 *     lambda = (1 / (K dt)) sum_{s=1..K} ln(d_s / d0),
 * the separation measured in the reservoir state space (Euclidean norm). For the discrete map
 * each step counts as dt of time as well, so lambda is per time unit for both models.
 * Early stop on a fixed point (cx_res_probe_settle): a run whose state and output have both stood
 * still, step after step, for a whole window is ended and the rest of its output is the settled
 * value. The test is ours (no published source): strict tolerances on every step of a long
 * window, so that only a run at rest to near rounding level passes.
 */
#include <math.h>
#include <string.h>

#include "coexist/error.h"
#include "reservoir/reservoir_impl.h"

static double max_change(const double *restrict a, double *restrict prev, cx_idx n)
{
    double d = 0.0;
    for (cx_idx i = 0; i < n; i++) {
        const double e = fabs(a[i] - prev[i]);
        d = e > d ? e : d;
        prev[i] = a[i];
    }
    return d;
}

int cx_res_probe_settle(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                        cx_idx nsteps, const double *lo, const double *hi,
                        const cx_res_settle *settle, double *r, double *y_out, cx_idx *steps_done,
                        cx_idx *settled_at)
{
    int rc = CX_OK;
    CX_TRY(cx_res_meet(ws, res));
    CX_REQUIRE(w_out != NULL && r != NULL && steps_done != NULL && settled_at != NULL &&
                   nsteps >= 0,
               CX_ERR_INVALID, "probe: NULL argument or %lld steps", (long long)nsteps);
    CX_REQUIRE(res->model == CX_MODEL_DISCRETE || dt > 0.0, CX_ERR_INVALID, "probe: time step %g",
               dt);
    CX_REQUIRE(settle == NULL ||
                   (settle->window >= 0 && settle->state_step >= 0.0 && settle->output_step >= 0.0),
               CX_ERR_INVALID, "probe: negative early-stop window or tolerance");
    const int dim = ws->dim;
    const cx_idx window = settle != NULL ? settle->window : 0;
    double y[CX_MAX_DIM], yprev[CX_MAX_DIM];
    *settled_at = -1;
    cx_res_readout(res, w_out, r, y);
    if (y_out != NULL)
        memcpy(y_out, y, (size_t)dim * sizeof *y);
    if (window > 0) {
        memcpy(ws->rprev, r, (size_t)ws->n * sizeof *r);
        memcpy(yprev, y, (size_t)dim * sizeof *y);
    }
    cx_idx i = 0, still = 0;
    if (!cx_res_outside(y, dim, lo, hi)) {
        for (i = 1; i <= nsteps; i++) {
            cx_res_closed_step(ws, res, w_out, dt, r, y);
            if (y_out != NULL)
                memcpy(y_out + i * dim, y, (size_t)dim * sizeof *y);
            if (cx_res_outside(y, dim, lo, hi))
                break;
            if (window == 0)
                continue;
            const double dr = max_change(r, ws->rprev, ws->n);
            const double dy = max_change(y, yprev, dim);
            still = dr <= settle->state_step && dy <= settle->output_step ? still + 1 : 0;
            if (still >= window && i < nsteps) {
                *settled_at = i;
                if (y_out != NULL)
                    for (cx_idx k = i + 1; k <= nsteps; k++)
                        memcpy(y_out + k * dim, y, (size_t)dim * sizeof *y);
                i = nsteps;
                break;
            }
        }
        if (i > nsteps)
            i = nsteps;
    }
    *steps_done = i;
done:
    return rc;
}

int cx_res_probe(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                 cx_idx nsteps, const double *lo, const double *hi, double *r, double *y_out,
                 cx_idx *steps_done)
{
    cx_idx settled_at;
    return cx_res_probe_settle(ws, res, w_out, dt, nsteps, lo, hi, NULL, r, y_out, steps_done,
                               &settled_at);
}

int cx_res_lyapunov(cx_res_ws *ws, const cx_reservoir *res, const double *w_out, double dt,
                    cx_idx steps, double d0, cx_rng *rng, double *r, double *lambda)
{
    int rc = CX_OK;
    CX_TRY(cx_res_meet(ws, res));
    CX_REQUIRE(w_out != NULL && rng != NULL && r != NULL && lambda != NULL, CX_ERR_INVALID,
               "Lyapunov: NULL argument");
    CX_REQUIRE(steps >= 1 && d0 > 0.0 && isfinite(d0) && dt > 0.0, CX_ERR_INVALID,
               "Lyapunov: %lld steps, separation %g, time step %g", (long long)steps, d0, dt);
    const cx_idx n = ws->n;
    double *restrict r2 = ws->r2;
    double norm = 0.0;
    while (norm == 0.0) {
        for (cx_idx i = 0; i < n; i++) {
            r2[i] = cx_rng_normal(rng);
            norm += r2[i] * r2[i];
        }
    }
    norm = sqrt(norm);
    for (cx_idx i = 0; i < n; i++)
        r2[i] = r[i] + (d0 / norm) * r2[i];
    double y1[CX_MAX_DIM], y2[CX_MAX_DIM];
    cx_res_readout(res, w_out, r, y1);
    cx_res_readout(res, w_out, r2, y2);
    double sum = 0.0;
    for (cx_idx s = 0; s < steps; s++) {
        cx_res_closed_step(ws, res, w_out, dt, r, y1);
        cx_res_closed_step(ws, res, w_out, dt, r2, y2);
        double d2 = 0.0;
        for (cx_idx i = 0; i < n; i++) {
            const double e = r2[i] - r[i];
            d2 += e * e;
        }
        const double d = sqrt(d2);
        if (!isfinite(d)) {
            /* A trajectory left every bound: there is no exponent to report. */
            sum = NAN;
            break;
        }
        if (d == 0.0) {
            /* The two trajectories merged to the last bit: contraction beyond resolution. */
            sum = -INFINITY;
            break;
        }
        sum += log(d / d0);
        const double back = d0 / d;
        for (cx_idx i = 0; i < n; i++)
            r2[i] = r[i] + back * (r2[i] - r[i]);
        cx_res_readout(res, w_out, r2, y2);
    }
    *lambda = sum / ((double)steps * dt);
done:
    return rc;
}
