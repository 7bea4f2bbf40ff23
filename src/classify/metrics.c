/* coexist classify: shape and time metrics of a run's tail.
 *
 * Roundness. The centre is the least-squares circle of I. Kasa, "A circle fitting procedure and
 * its error analysis", IEEE Trans. Instrum. Meas. 25 (1976) 8-14: minimise
 * sum_i (u_i^2 + v_i^2 + D u_i + E v_i + F)^2, which is linear in (D, E, F); on coordinates
 * centred at their mean (sum u = sum v = 0) the normal equations split into F = -mean(u^2 + v^2)
 * and a 2 x 2 system for (D, E); centre (-D/2, -E/2), radius sqrt(D^2/4 + E^2/4 - F). Roundness
 * is then the peak-to-valley deviation (largest minus smallest distance to the centre) in the
 * sense of ISO 12181-1:2011, which defines it about the minimum-zone reference; we measure it
 * about the least-squares centre instead, which is what the standard calls the LSCI reference
 * and is never smaller than the minimum-zone value.
 *
 * Period. Recurrence distance D(T)^2 = mean_t |y(t + T) - y(t)|^2 over t in the first half of
 * the tail (the close-return idea of D. P. Lathrop & E. J. Kostelich, "Characterization of an
 * experimental strange attractor by periodic orbits", Phys. Rev. A 40 (1989) 4028, applied to
 * the whole tail at once). The period is the first local minimum of D over the lag with
 * D < tol_abs. Cost: a coarse pass runs on the signal subsampled by s = ceil(n / 1000) (lags and
 * times), so it costs O((n / s)^2 dim) whatever n is; each coarse local minimum that could hide
 * a value below tol_abs is refined at full resolution over the lags within s samples. The
 * admission test for a coarse minimum uses the largest one-sample step L of the signal:
 * moving the lag by d samples changes D by at most L |d| (Minkowski's inequality), so a coarse
 * value above tol_abs + L s cannot come from a full-resolution value below tol_abs nearby (up
 * to the difference between the subsampled and the full time average, which the margin of one
 * whole s instead of s / 2 absorbs). The refined minimum is placed by a parabola through D^2 at
 * the three lags around it: near a true period D^2 grows quadratically in the lag offset, while
 * D itself has a corner there.
 *
 * Rotation. Sign of the mean angular momentum (x - xc) dy/dt - (y - yc) dx/dt about the tail
 * centroid, with central differences.
 */
#include <math.h>
#include <stddef.h>

#include "classify/classify_impl.h"

/* Subsampled length of the coarse period pass (common practice, no published source). */
#define COARSE_SAMPLES 1000
/* Smallest lag, in samples, at which a recurrence may count (common practice, no published
 * source): below it D grows from zero and has no minimum. */
#define MIN_LAG 4
/* A turn is reported only when the mean angular momentum is at least this fraction of
 * mean(|r| |v|), its value for pure circular motion (common practice, no published source). */
#define TURN_FRACTION 0.01

double cx_roundness(const double *x, cx_idx n, int dim, double *cx, double *cy, double *radius)
{
    double xc = NAN, yc = NAN, r = NAN, round = NAN;
    if (x == NULL || n < 3 || dim < 2)
        goto done;
    double mx = 0.0, my = 0.0;
    for (cx_idx i = 0; i < n; i++) {
        mx += x[i * dim];
        my += x[i * dim + 1];
    }
    mx /= (double)n;
    my /= (double)n;
    double suu = 0.0, suv = 0.0, svv = 0.0, suz = 0.0, svz = 0.0, sz = 0.0;
    for (cx_idx i = 0; i < n; i++) {
        double u = x[i * dim] - mx;
        double v = x[i * dim + 1] - my;
        double z = u * u + v * v;
        suu += u * u;
        suv += u * v;
        svv += v * v;
        suz += u * z;
        svz += v * z;
        sz += z;
    }
    double det = suu * svv - suv * suv;
    /* Collinear points have no circle: a determinant lost in rounding means no fit. */
    if (!(det > 1e-12 * (suu + svv) * (suu + svv)))
        goto done;
    double d = (-suz * svv + svz * suv) / det;
    double e = (-svz * suu + suz * suv) / det;
    double f = -sz / (double)n;
    double r2 = 0.25 * (d * d + e * e) - f;
    if (!(r2 > 0.0))
        goto done;
    xc = mx - 0.5 * d;
    yc = my - 0.5 * e;
    r = sqrt(r2);
    double rmin = INFINITY, rmax = 0.0;
    for (cx_idx i = 0; i < n; i++) {
        double ri = hypot(x[i * dim] - xc, x[i * dim + 1] - yc);
        if (ri < rmin)
            rmin = ri;
        if (ri > rmax)
            rmax = ri;
    }
    round = rmax - rmin;
done:
    if (cx != NULL)
        *cx = xc;
    if (cy != NULL)
        *cy = yc;
    if (radius != NULL)
        *radius = r;
    return round;
}

/* mean over t = 0, step, 2 step, ... < half of |x(t + lag) - x(t)|^2. */
static double lag_dist2(const double *x, int dim, cx_idx half, cx_idx lag, cx_idx step)
{
    double s = 0.0;
    cx_idx cnt = 0;
    for (cx_idx t = 0; t < half; t += step) {
        const double *a = x + t * dim;
        const double *b = x + (t + lag) * dim;
        for (int c = 0; c < dim; c++) {
            double d = b[c] - a[c];
            s += d * d;
        }
        cnt++;
    }
    return s / (double)cnt;
}

/* Full-resolution refinement around lag `centre`: the local minimum of D^2 reached from the
 * window [centre - s, centre + s] by walking downhill, within [lmin, lmax]. Returns the period
 * in samples (parabolic) when D there is below tol, else -1. */
static double refine(double *buf, const double *x, int dim, cx_idx half, cx_idx centre, cx_idx s,
                     cx_idx lmin, cx_idx lmax, double tol)
{
    cx_idx a = centre - s < lmin ? lmin : centre - s;
    cx_idx b = centre + s > lmax ? lmax : centre + s;
    cx_idx best = a;
    for (cx_idx l = a; l <= b; l++) {
        buf[l - a] = lag_dist2(x, dim, half, l, 1);
        if (buf[l - a] < buf[best - a])
            best = l;
    }
    double dm = buf[best - a];
    double left = best > a ? buf[best - a - 1] : NAN;
    double right = best < b ? buf[best - a + 1] : NAN;
    while (best == a && best > lmin) {
        left = lag_dist2(x, dim, half, best - 1, 1);
        if (!(left < dm))
            break;
        right = dm;
        dm = left;
        a = --best;
    }
    while (best == b && best < lmax) {
        right = lag_dist2(x, dim, half, best + 1, 1);
        if (!(right < dm))
            break;
        left = dm;
        dm = right;
        b = ++best;
    }
    if (!(sqrt(dm) < tol))
        return -1.0;
    double shift = 0.0;
    double curv = left - 2.0 * dm + right;
    if (isfinite(curv) && curv > 0.0) {
        shift = 0.5 * (left - right) / curv;
        if (shift > 0.5)
            shift = 0.5;
        if (shift < -0.5)
            shift = -0.5;
    }
    return (double)best + shift;
}

double cx_period(cx_class_ws *ws, const double *x, cx_idx n, int dim, double dt, double tol_abs)
{
    if (ws == NULL || x == NULL || dim < 1 || dim > ws->dim || n > ws->max_samples ||
        n < 4 * MIN_LAG || !(dt > 0.0) || !(tol_abs > 0.0))
        return NAN;
    cx_idx half = n / 2;
    cx_idx lmax = n - half; /* t + lag <= n - 1 for every t < half */
    cx_idx s = (n + COARSE_SAMPLES - 1) / COARSE_SAMPLES;
    double step_max = 0.0;
    for (cx_idx i = 0; i + 1 < n; i++) {
        double d2 = 0.0;
        for (int c = 0; c < dim; c++) {
            double d = x[(i + 1) * dim + c] - x[i * dim + c];
            d2 += d * d;
        }
        if (d2 > step_max)
            step_max = d2;
    }
    double admit = tol_abs + sqrt(step_max) * (double)s;
    cx_idx k0 = (MIN_LAG + s - 1) / s;
    double d_prev2 = lag_dist2(x, dim, half, k0 * s, s);
    double d_prev = lag_dist2(x, dim, half, (k0 + 1) * s, s);
    for (cx_idx k = k0 + 2; k * s <= lmax; k++) {
        double d_cur = lag_dist2(x, dim, half, k * s, s);
        if (d_prev2 > d_prev && d_prev <= d_cur && sqrt(d_prev) < admit) {
            double t = refine(ws->lagd, x, dim, half, (k - 1) * s, s, MIN_LAG, lmax, tol_abs);
            if (t > 0.0)
                return t * dt;
        }
        d_prev2 = d_prev;
        d_prev = d_cur;
    }
    return NAN;
}

double cx_class_rotation(const double *x, cx_idx n, int dim, double dt)
{
    (void)dt; /* the sign and the ratio below do not depend on the time unit */
    if (x == NULL || n < 3 || dim < 2)
        return NAN;
    double xc = 0.0, yc = 0.0;
    for (cx_idx i = 0; i < n; i++) {
        xc += x[i * dim];
        yc += x[i * dim + 1];
    }
    xc /= (double)n;
    yc /= (double)n;
    double lsum = 0.0, msum = 0.0;
    for (cx_idx i = 1; i + 1 < n; i++) {
        double rx = x[i * dim] - xc;
        double ry = x[i * dim + 1] - yc;
        double vx = x[(i + 1) * dim] - x[(i - 1) * dim];
        double vy = x[(i + 1) * dim + 1] - x[(i - 1) * dim + 1];
        lsum += rx * vy - ry * vx;
        msum += hypot(rx, ry) * hypot(vx, vy);
    }
    if (!(msum > 0.0) || !(fabs(lsum) >= TURN_FRACTION * msum))
        return NAN;
    return lsum > 0.0 ? 1.0 : -1.0;
}
