/* coexist: the largest Lyapunov exponent of a flow by two nearby trajectories.
 *
 * Method of Benettin, Galgani, Giorgilli & Strelcyn (1980), "Lyapunov characteristic exponents
 * for smooth dynamical systems and for Hamiltonian systems; a method for computing all of them",
 * Meccanica 15, 9-20 (Part 1, the largest exponent): a companion trajectory starts at distance
 * d0 from the reference one; every `renorm` time units the separation d is measured, log(d / d0)
 * is accumulated, and the companion is pulled back along the separation to distance d0. The
 * exponent is the accumulated log-growth divided by the elapsed time,
 *   lambda = (1 / (m tau)) sum_{j=1..m} log(d_j / d0).
 * Both trajectories are advanced with the same RK4 step (rk4.c). d0 must be small enough for the
 * linearisation to hold and large enough to stay above round-off: about 1e-8 relative to the
 * attractor's size is common practice, no published source.
 */
#include <math.h>
#include <stdlib.h>

#include "coexist/error.h"
#include "coexist/task.h"

static double distance(cx_idx n, const double *a, const double *b)
{
    double s = 0.0;
    for (cx_idx i = 0; i < n; i++) {
        double d = a[i] - b[i];
        s += d * d;
    }
    return sqrt(s);
}

static int all_finite(cx_idx n, const double *x)
{
    for (cx_idx i = 0; i < n; i++)
        if (!isfinite(x[i]))
            return 0;
    return 1;
}

/* Steps of size h closest to a duration, at least `lo`. */
static cx_idx steps_for(double duration, double h, cx_idx lo)
{
    double s = floor(duration / h + 0.5);
    cx_idx k = (cx_idx)s;
    return k < lo ? lo : k;
}

/* A trajectory that leaves the finite range gives *lambda = NaN and CX_OK: divergence is an
 * outcome of the flow, not an error of the caller. */
int cx_lyapunov_max(cx_field_fn f, void *ctx, cx_idx n, double *x, double h, double transient,
                    double total, double renorm, double d0, cx_rng *rng, double *lambda)
{
    int rc = CX_OK;
    cx_rk4 *ws = NULL;
    double *y = NULL;
    CX_REQUIRE(f != NULL && x != NULL && rng != NULL && lambda != NULL, CX_ERR_INTERNAL,
               "cx_lyapunov_max: NULL argument");
    CX_REQUIRE(n > 0 && n <= 1000000, CX_ERR_INVALID, "Lyapunov exponent: bad dimension %lld",
               (long long)n);
    CX_REQUIRE(isfinite(h) && h > 0.0, CX_ERR_INVALID, "Lyapunov exponent: step %g must be > 0", h);
    CX_REQUIRE(isfinite(transient) && transient >= 0.0, CX_ERR_INVALID,
               "Lyapunov exponent: transient %g must be >= 0", transient);
    CX_REQUIRE(isfinite(renorm) && renorm >= h, CX_ERR_INVALID,
               "Lyapunov exponent: renormalisation interval %g must be at least the step %g",
               renorm, h);
    CX_REQUIRE(isfinite(total) && total >= renorm, CX_ERR_INVALID,
               "Lyapunov exponent: total time %g must be at least the renormalisation interval %g",
               total, renorm);
    CX_REQUIRE(isfinite(d0) && d0 > 0.0, CX_ERR_INVALID,
               "Lyapunov exponent: initial separation %g must be > 0", d0);

    CX_TRY(cx_rk4_alloc(&ws, n));
    CX_ALLOC(y, n);

    const cx_idx ntrans = steps_for(transient, h, 0);
    const cx_idx nstep = steps_for(renorm, h, 1);
    const cx_idx nint = steps_for(total, (double)nstep * h, 1);
    double t = 0.0;
    for (cx_idx s = 0; s < ntrans; s++) {
        cx_rk4_step(ws, f, ctx, t, h, x);
        t += h;
    }
    if (!all_finite(n, x)) {
        *lambda = NAN;
        goto done;
    }

    /* A direction uniform on the sphere: normalised Gaussian deviates (Muller 1959, Commun. ACM
     * 2(4), 19). */
    double norm = 0.0;
    while (norm == 0.0) {
        for (cx_idx i = 0; i < n; i++) {
            y[i] = cx_rng_normal(rng);
            norm += y[i] * y[i];
        }
        norm = sqrt(norm);
    }
    for (cx_idx i = 0; i < n; i++)
        y[i] = x[i] + d0 * y[i] / norm;

    double sum = 0.0;
    for (cx_idx j = 0; j < nint; j++) {
        double tc = t;
        for (cx_idx s = 0; s < nstep; s++) {
            cx_rk4_step(ws, f, ctx, t, h, x);
            t += h;
        }
        for (cx_idx s = 0; s < nstep; s++) {
            cx_rk4_step(ws, f, ctx, tc, h, y);
            tc += h;
        }
        double d = distance(n, x, y);
        if (!isfinite(d) || d == 0.0 || !all_finite(n, x)) {
            *lambda = NAN;
            goto done;
        }
        sum += log(d / d0);
        for (cx_idx i = 0; i < n; i++)
            y[i] = x[i] + (y[i] - x[i]) * (d0 / d);
    }
    *lambda = sum / ((double)nint * (double)nstep * h);
done:
    free(y);
    cx_rk4_free(&ws);
    return rc;
}
