/* coexist classify: an implicit k-d tree for nearest-neighbour and fixed-radius queries in the
 * few dimensions of a task signal (dim <= CX_MAX_DIM = 8).
 *
 * Methods: the k-d tree of J. L. Bentley, "Multidimensional binary search trees used for
 * associative searching", Commun. ACM 18 (1975) 509-517; the split coordinate is the one of
 * largest spread in the range and the split value the median, as in J. H. Friedman, J. L.
 * Bentley & R. A. Finkel, "An algorithm for finding best matches in logarithmic expected time",
 * ACM Trans. Math. Softw. 3 (1977) 209-226. The median is placed by selection, Hoare's FIND
 * (C. A. R. Hoare, "Algorithm 65: Find", Commun. ACM 4 (1961) 321) in the loop form given by
 * N. Wirth, "Algorithms + Data Structures = Programs", Prentice-Hall 1976.
 *
 * Each subtree also keeps the bounding box of its own points, and a search skips a subtree
 * whose box is not nearer than the best distance so far (the bounds-overlap-ball test of
 * Friedman, Bentley & Finkel, with the box fitted to the data rather than the cell cut out by
 * the splits, which matters for the thin sheets and curves of attractors: a query far from the
 * cloud would otherwise meet most cells).
 *
 * The searches return the same squared distance as a brute-force scan, bit for bit: a subtree
 * is skipped only when the computed squared distance to its box is not below the best value,
 * and because rounding is monotone that sum of squared gaps is never above the computed squared
 * distance of any point in the box (same order of summation, each term not larger), so no
 * skipped point could have been strictly nearer.
 */
#include <math.h>
#include <stddef.h>

#include "classify/classify_impl.h"

static void swap_rows(double *pts, int dim, cx_idx i, cx_idx j)
{
    double *a = pts + i * dim;
    double *b = pts + j * dim;
    for (int c = 0; c < dim; c++) {
        double t = a[c];
        a[c] = b[c];
        b[c] = t;
    }
}

/* Put the k-th smallest row of [lo, hi) along coordinate d at row k; rows before it are not
 * above it and rows after it not below (Wirth's form of FIND). */
static void select_row(double *pts, int dim, int d, cx_idx lo, cx_idx hi, cx_idx k)
{
    cx_idx l = lo;
    cx_idx r = hi - 1;
    while (l < r) {
        double x = pts[k * dim + d];
        cx_idx i = l;
        cx_idx j = r;
        do {
            while (pts[i * dim + d] < x)
                i++;
            while (x < pts[j * dim + d])
                j--;
            if (i <= j) {
                swap_rows(pts, dim, i, j);
                i++;
                j--;
            }
        } while (i <= j);
        if (j < k)
            l = i;
        if (k < i)
            r = j;
    }
}

static int widest_coordinate(const double *pts, int dim, cx_idx lo, cx_idx hi)
{
    double mn[CX_MAX_DIM];
    double mx[CX_MAX_DIM];
    for (int c = 0; c < dim; c++) {
        mn[c] = pts[lo * dim + c];
        mx[c] = mn[c];
    }
    for (cx_idx i = lo + 1; i < hi; i++)
        for (int c = 0; c < dim; c++) {
            double v = pts[i * dim + c];
            if (v < mn[c])
                mn[c] = v;
            if (v > mx[c])
                mx[c] = v;
        }
    int best = 0;
    for (int c = 1; c < dim; c++)
        if (mx[c] - mn[c] > mx[best] - mn[best])
            best = c;
    return best;
}

/* Build [lo, hi) and return its bounding box in box[mid] (lo[dim] then hi[dim]). */
static void build_range(double *pts, unsigned char *split, double *box, int dim, cx_idx lo,
                        cx_idx hi)
{
    cx_idx mid = lo + (hi - lo) / 2;
    double *b = box + mid * 2 * dim;
    if (hi - lo > 1) {
        int d = widest_coordinate(pts, dim, lo, hi);
        select_row(pts, dim, d, lo, hi, mid);
        split[mid] = (unsigned char)d;
    } else {
        split[mid] = 0;
    }
    for (int c = 0; c < dim; c++) {
        b[c] = pts[mid * dim + c];
        b[dim + c] = pts[mid * dim + c];
    }
    cx_idx child[2][2] = {{lo, mid}, {mid + 1, hi}};
    for (int k = 0; k < 2; k++) {
        cx_idx clo = child[k][0], chi = child[k][1];
        if (clo >= chi)
            continue;
        build_range(pts, split, box, dim, clo, chi);
        const double *cb = box + (clo + (chi - clo) / 2) * 2 * dim;
        for (int c = 0; c < dim; c++) {
            if (cb[c] < b[c])
                b[c] = cb[c];
            if (cb[dim + c] > b[dim + c])
                b[dim + c] = cb[dim + c];
        }
    }
}

void cx_kd_build(cx_kd *t, double *pts, unsigned char *split, double *box, cx_idx n, int dim)
{
    t->pts = pts;
    t->split = split;
    t->box = box;
    t->n = n;
    t->dim = dim;
    if (n > 0)
        build_range(pts, split, box, dim, 0, n);
}

static double dist2(const double *a, const double *b, int dim)
{
    double s = 0.0;
    for (int c = 0; c < dim; c++) {
        double d = a[c] - b[c];
        s += d * d;
    }
    return s;
}

/* Squared distance from q to the box of the subtree [lo, hi), summed in coordinate order. */
static double box_dist2(const cx_kd *t, const double *q, cx_idx lo, cx_idx hi)
{
    int dim = t->dim;
    const double *b = t->box + (lo + (hi - lo) / 2) * 2 * dim;
    double s = 0.0;
    for (int c = 0; c < dim; c++) {
        double g = 0.0;
        if (q[c] < b[c])
            g = q[c] - b[c];
        else if (q[c] > b[dim + c])
            g = q[c] - b[dim + c];
        s += g * g;
    }
    return s;
}

static void nearest_node(const cx_kd *t, const double *q, cx_idx lo, cx_idx hi, double *best,
                         cx_idx *arg)
{
    if (lo >= hi || !(box_dist2(t, q, lo, hi) < *best))
        return;
    cx_idx mid = lo + (hi - lo) / 2;
    const double *p = t->pts + mid * t->dim;
    double d2 = dist2(p, q, t->dim);
    if (d2 < *best) {
        *best = d2;
        *arg = mid;
    }
    int s = t->split[mid];
    if (q[s] < p[s]) {
        nearest_node(t, q, lo, mid, best, arg);
        nearest_node(t, q, mid + 1, hi, best, arg);
    } else {
        nearest_node(t, q, mid + 1, hi, best, arg);
        nearest_node(t, q, lo, mid, best, arg);
    }
}

double cx_kd_nearest2(const cx_kd *t, const double *q, cx_idx *hint)
{
    double best = INFINITY;
    cx_idx arg = -1;
    /* A nearby point found by the previous query bounds the search from the start; it is a real
     * point's distance, so the result is unchanged. */
    if (hint != NULL && *hint >= 0 && *hint < t->n) {
        arg = *hint;
        best = dist2(t->pts + arg * t->dim, q, t->dim);
    }
    nearest_node(t, q, 0, t->n, &best, &arg);
    if (hint != NULL)
        *hint = arg;
    return best;
}

static int within_node(const cx_kd *t, const double *q, double r2, cx_idx lo, cx_idx hi)
{
    if (lo >= hi || !(box_dist2(t, q, lo, hi) <= r2))
        return 0;
    cx_idx mid = lo + (hi - lo) / 2;
    const double *p = t->pts + mid * t->dim;
    if (dist2(p, q, t->dim) <= r2)
        return 1;
    int s = t->split[mid];
    if (q[s] < p[s])
        return within_node(t, q, r2, lo, mid) || within_node(t, q, r2, mid + 1, hi);
    return within_node(t, q, r2, mid + 1, hi) || within_node(t, q, r2, lo, mid);
}

int cx_kd_any_within(const cx_kd *t, const double *q, double r2)
{
    return within_node(t, q, r2, 0, t->n);
}
