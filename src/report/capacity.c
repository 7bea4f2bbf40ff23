/* coexist report: capacity, the largest number of attractors one network still holds.
 *
 * Definition (ours; capacity studies of multifunctionality have no agreed one): with p(K) the
 * probability that a cell with K tasks is multifunctional, estimated by k/n over the pooled
 * cells, the capacity is the largest K of the grid such that p(K') >= threshold for K and for
 * every smaller K' of the grid, and 0 when p already fails at the smallest K. Requiring every
 * smaller K as well keeps one lucky large K from counting when smaller ones fail. The lower and
 * upper estimates apply the same rule to the lower and upper ends of the 95 % Wilson score
 * intervals (Wilson 1927, J. Am. Stat. Assoc. 22, 209; see stats.c), so they bracket the
 * capacity: the lower estimate is the largest K whose success probability is plausibly at least
 * the threshold everywhere below, the upper the largest K not yet plausibly below it.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "coexist/report.h"

typedef struct kv {
    double value;
    cx_idx index;
} kv;

static int cmp_kv(const void *a, const void *b)
{
    const kv *x = a, *y = b;
    return (x->value > y->value) - (x->value < y->value);
}

int cx_capacity_compute(const cx_rcube *c, const cx_table *t, int k_pos, double threshold,
                        cx_capacity **out)
{
    int rc = CX_OK;
    cx_capacity *cap = NULL;
    kv *order = NULL;
    CX_REQUIRE(k_pos >= 0 && k_pos < t->ngroup, CX_ERR_INVALID,
               "capacity needs the task-count axis among the grouping axes");
    const cx_rcube_axis *ka = &c->axes[t->group_axis[k_pos]];
    CX_CALLOC(cap, 1);
    cap->k_pos = k_pos;
    cap->threshold = threshold;
    cap->nrows = t->ngroups / ka->len;
    CX_CALLOC(cap->rows, cap->nrows);
    CX_ALLOC(order, ka->len);
    for (cx_idx k = 0; k < ka->len; k++) {
        order[k].value = ka->values[k];
        order[k].index = k;
    }
    qsort(order, (size_t)ka->len, sizeof *order, cmp_kv);
    for (cx_idx row = 0; row < cap->nrows; row++) {
        cx_capacity_row *r = &cap->rows[row];
        /* coordinates of the other axes from the row index, row-major in group order */
        cx_idx rem = row;
        for (int g = t->ngroup - 1; g >= 0; g--) {
            if (g == k_pos)
                continue;
            cx_idx len = c->axes[t->group_axis[g]].len;
            r->coords[g] = rem % len;
            rem /= len;
        }
        r->coords[k_pos] = 0;
        int alive[3] = {1, 1, 1}; /* estimate, lower, upper */
        double best[3] = {0, 0, 0};
        r->done_min = -1;
        for (cx_idx q = 0; q < ka->len; q++) {
            cx_idx gi = 0;
            for (int g = 0; g < t->ngroup; g++) {
                cx_idx idx = g == k_pos ? order[q].index : r->coords[g];
                gi = gi * c->axes[t->group_axis[g]].len + idx;
            }
            const cx_group *grp = &t->groups[gi];
            double lo, hi, p = grp->done > 0 ? (double)grp->multi / (double)grp->done : -1.0;
            cx_wilson(grp->multi, grp->done, CX_Z95, &lo, &hi);
            if (grp->done == 0)
                lo = -1.0; /* no data: never a success for the estimate or the lower bound */
            double v[3] = {p, lo, hi};
            for (int e = 0; e < 3; e++) {
                if (alive[e] && v[e] >= threshold)
                    best[e] = order[q].value;
                else
                    alive[e] = 0;
            }
            if (r->done_min < 0 || grp->done < r->done_min)
                r->done_min = grp->done;
        }
        r->capacity = best[0];
        r->lower = best[1];
        r->upper = best[2];
    }
    *out = cap;
    cap = NULL;
done:
    free(order);
    cx_capacity_destroy(&cap);
    return rc;
}

void cx_capacity_destroy(cx_capacity **pc)
{
    if (*pc == NULL)
        return;
    free((*pc)->rows);
    free(*pc);
    *pc = NULL;
}

int cx_capacity_write_csv(const cx_rcube *c, const cx_table *t, const cx_capacity *cap, FILE *f)
{
    int rc = CX_OK;
    for (int g = 0; g < t->ngroup; g++)
        if (g != cap->k_pos)
            fprintf(f, "%s,", c->axes[t->group_axis[g]].name);
    fprintf(f, "threshold,capacity,lower95,upper95,fewest_cells\n");
    for (cx_idx row = 0; row < cap->nrows; row++) {
        const cx_capacity_row *r = &cap->rows[row];
        for (int g = 0; g < t->ngroup; g++) {
            if (g == cap->k_pos)
                continue;
            const cx_rcube_axis *a = &c->axes[t->group_axis[g]];
            if (a->labels != NULL)
                fprintf(f, "%s,", a->labels[r->coords[g]]);
            else
                fprintf(f, "%.10g,", a->values[r->coords[g]]);
        }
        fprintf(f, "%.6g,%.10g,%.10g,%.10g,%lld\n", cap->threshold, r->capacity, r->lower, r->upper,
                (long long)r->done_min);
    }
    if (ferror(f))
        CX_RAISE(CX_ERR_IO, "writing the capacity table failed");
done:
    return rc;
}
