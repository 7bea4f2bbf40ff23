/* coexist classify: private structs and the internal k-d tree shared by the files of the module.
 *
 * The k-d tree is implicit (no node records): the points of a range [lo, hi) are reordered so
 * that the row at mid = lo + (hi - lo) / 2 is the median along the split coordinate stored at
 * split[mid], rows [lo, mid) are not above it and rows [mid + 1, hi) are not below it, and both
 * halves are built the same way (Bentley 1975, CACM 18, 509); each subtree's bounding box is
 * kept at its median row. Building in place over a buffer
 * the caller owns is what lets cx_classify_run index the tail without allocating.
 */
#ifndef COEXIST_CLASSIFY_IMPL_H
#define COEXIST_CLASSIFY_IMPL_H

#include "coexist/classify.h"

typedef struct cx_kd {
    double *pts;          /* n x dim, row-major, reordered by cx_kd_build (borrowed) */
    unsigned char *split; /* n split coordinates (borrowed) */
    double *box;          /* n x 2 dim: bounding box (lo[dim], hi[dim]) of the subtree whose
                             median row is i, stored at row i (borrowed) */
    cx_idx n;
    int dim;
} cx_kd;

/* Reorder pts (n x dim) into a k-d tree in place; split must hold n bytes and box n x 2 dim
 * doubles. Not collective, does not allocate. */
void cx_kd_build(cx_kd *t /* out */, double *pts, unsigned char *split, double *box, cx_idx n,
                 int dim);
/* Smallest squared Euclidean distance from q to a point of the tree (+inf for an empty tree).
 * hint (may be NULL): in, a row to start from (-1 for none); out, the row of the nearest point.
 * Consecutive queries that are close in space run faster with the previous row as the hint. */
double cx_kd_nearest2(const cx_kd *t, const double *q, cx_idx *hint);
/* 1 when some point lies within squared distance r2 of q (inclusive), else 0. */
int cx_kd_any_within(const cx_kd *t, const double *q, double r2);

struct cx_attractor {
    double *pts; /* the cloud, reordered into the tree */
    unsigned char *split;
    double *box;
    cx_kd tree;
    double centre[CX_MAX_DIM];
    double scale; /* RMS distance to the centroid */
    int dim;
};

struct cx_class_ws {
    cx_idx max_samples;
    int dim;
    double *tail;         /* max_samples x dim: subsampled tail, reordered into a tree */
    unsigned char *split; /* max_samples */
    double *box;          /* max_samples x 2 dim: boxes of the tail tree */
    double *lagd;         /* max_samples: squared recurrence distances of the period search */
};

/* Rotation sense of the first two coordinates of n samples at spacing dt (metrics.c). */
double cx_class_rotation(const double *x, cx_idx n, int dim, double dt);

#endif
