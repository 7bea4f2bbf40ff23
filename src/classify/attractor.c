/* coexist classify: a trained attractor as a point cloud with a k-d tree over it.
 *
 * The cloud keeps at most cloud_points samples of the training signal, evenly spaced in time,
 * so that the cost of a query does not grow with the training length. The centroid and the
 * scale s (RMS distance to the centroid) are taken over the whole signal, not the kept points,
 * because they are O(n) and the full signal is the better estimate. Tree: see kdtree.c.
 */
#include <math.h>
#include <stdlib.h>

#include "coexist/error.h"
#include "classify/classify_impl.h"

int cx_attractor_create(const double *x, cx_idx n, int dim, cx_idx cloud_points, cx_attractor **a)
{
    int rc = CX_OK;
    cx_attractor *t = NULL;
    CX_REQUIRE(x != NULL && a != NULL, CX_ERR_INVALID, "attractor: NULL argument");
    CX_REQUIRE(n > 0, CX_ERR_INVALID, "attractor: empty training signal");
    CX_REQUIRE(dim >= 1 && dim <= CX_MAX_DIM, CX_ERR_INVALID,
               "attractor: dimension %d outside 1..%d", dim, CX_MAX_DIM);
    CX_REQUIRE(cloud_points >= 1, CX_ERR_INVALID, "attractor: cloud_points must be positive");
    for (cx_idx i = 0; i < n * dim; i++)
        CX_REQUIRE(isfinite(x[i]), CX_ERR_INVALID,
                   "attractor: non-finite training value at sample %lld", (long long)(i / dim));

    cx_idx m = n < cloud_points ? n : cloud_points;
    CX_CALLOC(t, 1);
    CX_ALLOC(t->pts, m * dim);
    CX_ALLOC(t->split, m);
    CX_ALLOC(t->box, m * 2 * dim);
    t->dim = dim;
    for (cx_idx j = 0; j < m; j++) {
        /* j (n - 1) / (m - 1) keeps the first and the last sample. */
        cx_idx i = m > 1 ? (j * (n - 1)) / (m - 1) : 0;
        for (int c = 0; c < dim; c++)
            t->pts[j * dim + c] = x[i * dim + c];
    }
    for (int c = 0; c < dim; c++) {
        double s = 0.0;
        for (cx_idx i = 0; i < n; i++)
            s += x[i * dim + c];
        t->centre[c] = s / (double)n;
    }
    double ss = 0.0;
    for (cx_idx i = 0; i < n; i++)
        for (int c = 0; c < dim; c++) {
            double d = x[i * dim + c] - t->centre[c];
            ss += d * d;
        }
    t->scale = sqrt(ss / (double)n);
    cx_kd_build(&t->tree, t->pts, t->split, t->box, m, dim);
    *a = t;
    t = NULL;
done:
    if (t != NULL) {
        free(t->box);
        free(t->split);
        free(t->pts);
        free(t);
    }
    return rc;
}

void cx_attractor_destroy(cx_attractor **a)
{
    if (a == NULL || *a == NULL)
        return;
    free((*a)->box);
    free((*a)->split);
    free((*a)->pts);
    free(*a);
    *a = NULL;
}

double cx_attractor_scale(const cx_attractor *a)
{
    return a->scale;
}

const double *cx_attractor_centre(const cx_attractor *a)
{
    return a->centre;
}
