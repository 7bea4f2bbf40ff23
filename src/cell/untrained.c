/* coexist: group the runs of one cell that ended on untrained attractors into distinct
 * attractors.
 *
 * Each run that ended on a fixed point, an untrained periodic orbit or untrained aperiodic
 * motion is described by its class, the centre of its tail (mean), its amplitude (RMS distance
 * of the tail from that centre) and, for periodic orbits, its period. Two runs are the same
 * attractor when the classes agree, the centres are within tol * S of each other, the amplitudes
 * differ by at most tol * S (S: mean RMS radius of the trained attractors) and, for periodic
 * orbits, the periods differ by at most `period_rel` relative. Runs are visited in index order
 * and each joins the first group whose first member it matches (leader clustering, Hartigan
 * 1975, "Clustering Algorithms", Wiley, ch. 3), so the grouping is deterministic. Tolerances:
 * common practice, no published source. */
#include <math.h>

#include "coexist/classify.h"
#include "cell_impl.h"

void cx_cell_tail_shape(const double *y, cx_idx n_total, cx_idx n_tail, int dim, double *centre,
                        double *amplitude)
{
    const double *t = y + (n_total - n_tail) * dim;
    for (int d = 0; d < dim; d++) {
        double s = 0.0;
        for (cx_idx i = 0; i < n_tail; i++)
            s += t[i * dim + d];
        centre[d] = n_tail > 0 ? s / (double)n_tail : NAN;
    }
    double r2 = 0.0;
    for (cx_idx i = 0; i < n_tail; i++)
        for (int d = 0; d < dim; d++) {
            double e = t[i * dim + d] - centre[d];
            r2 += e * e;
        }
    *amplitude = n_tail > 0 ? sqrt(r2 / (double)n_tail) : NAN;
}

static int kind_of(int outcome)
{
    switch (outcome) {
    case CX_OUT_FIXED_POINT:
        return 0;
    case CX_OUT_UNTRAINED_CYCLE:
        return 1;
    case CX_OUT_UNTRAINED_APERIODIC:
        return 2;
    default:
        return -1;
    }
}

void cx_cell_cluster_untrained(cx_cell_result *r, const double (*centre)[CX_MAX_DIM],
                               const double *amplitude, int dim, double scale, double tol,
                               double period_rel)
{
    int leader[CX_MAX_RUNS];
    int ngroups = 0;
    r->untrained = 0;
    for (int k = 0; k < 3; k++)
        r->untrained_kinds[k] = 0;
    for (int j = 0; j < r->nruns; j++) {
        cx_run_metrics *m = &r->runs[j];
        m->cluster = -1;
        int kind = kind_of(m->outcome);
        if (kind < 0)
            continue;
        int found = -1;
        for (int g = 0; g < ngroups && found < 0; g++) {
            const cx_run_metrics *l = &r->runs[leader[g]];
            if (kind_of(l->outcome) != kind)
                continue;
            double d2 = 0.0;
            for (int d = 0; d < dim; d++) {
                double e = centre[j][d] - centre[leader[g]][d];
                d2 += e * e;
            }
            if (!(sqrt(d2) <= tol * scale))
                continue;
            if (!(fabs(amplitude[j] - amplitude[leader[g]]) <= tol * scale))
                continue;
            if (kind == 1 && !(fabs(m->period - l->period) <= period_rel * l->period))
                continue;
            found = g;
        }
        if (found < 0) {
            found = ngroups;
            leader[ngroups++] = j;
            r->untrained_kinds[kind]++;
            r->untrained++;
        }
        m->cluster = found;
    }
}
