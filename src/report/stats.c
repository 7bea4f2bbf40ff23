/* coexist report: ensemble statistics of a cube.
 *
 * Each done cell is one Bernoulli trial per question (is it multifunctional? is its class X?),
 * and cells that differ only on the replicate axis are independent draws of the network, the
 * input matrix and the random starts; so a group of cells pooled over the replicate axis gives
 * k successes in n trials, summarised by the Wilson score interval (Wilson EB 1927, "Probable
 * inference, the law of succession, and statistical inference", J. Am. Stat. Assoc. 22, 209-212).
 * It stays inside [0, 1] and keeps its coverage near the nominal level for small n and for k
 * near 0 or n, where the normal-approximation (Wald) interval collapses to a point (Brown, Cai &
 * DasGupta 2001, Statistical Science 16, 101-133). Pooling over axes other than the replicate
 * axis mixes different parameters; the interval then describes the pooled set, not one point.
 *
 * Colours: the eight colours of Okabe & Ito (2008), "Color Universal Design (CUD): how to make
 * figures and presentations that are friendly to colorblind people" (J*FLY, jfly.uni-koeln.de),
 * hex values quoted from memory; which class gets which colour is our own choice.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "coexist/report.h"

void cx_wilson(int64_t k, int64_t n, double z, double *lo, double *hi)
{
    if (n <= 0) {
        *lo = 0.0;
        *hi = 1.0;
        return;
    }
    double nn = (double)n, kk = (double)k, z2 = z * z;
    double centre = (kk + 0.5 * z2) / (nn + z2);
    double half = z * sqrt(kk * (nn - kk) / nn + 0.25 * z2) / (nn + z2);
    *lo = k <= 0 ? 0.0 : centre - half;
    *hi = k >= n ? 1.0 : centre + half;
    if (*lo < 0.0)
        *lo = 0.0;
    if (*hi > 1.0)
        *hi = 1.0;
}

static const char *const class_names[CX_CLASS_COUNT] = {
    "multifunctional", "other-trained", "fixed-point", "untrained-cycle", "untrained-aperiodic",
    "diverged",        "failed",        "tied",        "no-data"};

/* Our assignment: success gets the bluish green, the failures run from the cool colours
 * (landing on the wrong trained attractor, freezing) to the warm ones (untrained motion,
 * blowing up); a failed computation is black, a tie the reddish purple, no data white. */
static const uint32_t class_colours[CX_CLASS_COUNT] = {
    0x009E73, 0x56B4E9, 0x0072B2, 0xF0E442, 0xE69F00, 0xD55E00, 0x000000, 0xCC79A7, 0xFFFFFF};
static const char *const colour_names[CX_CLASS_COUNT] = {
    "bluish green", "sky blue", "blue",           "yellow", "orange",
    "vermillion",   "black",    "reddish purple", "white"};

const char *cx_class_name(int cls)
{
    return cls >= 0 && cls < CX_CLASS_COUNT ? class_names[cls] : "?";
}

uint32_t cx_class_colour(int cls)
{
    return cls >= 0 && cls < CX_CLASS_COUNT ? class_colours[cls] : 0xFFFFFF;
}

const char *cx_class_colour_name(int cls)
{
    return cls >= 0 && cls < CX_CLASS_COUNT ? colour_names[cls] : "?";
}

/* Index of `text` among the axis values (within 1e-9 relative) or labels, or -1. */
static cx_idx match_value(const cx_rcube_axis *a, const char *text)
{
    if (a->labels != NULL) {
        for (cx_idx k = 0; k < a->len; k++)
            if (strcmp(a->labels[k], text) == 0)
                return k;
        return -1;
    }
    char *end = NULL;
    double v = strtod(text, &end);
    if (end == text || *end != '\0')
        return -1;
    for (cx_idx k = 0; k < a->len; k++) {
        double w = a->values[k], scale = fabs(w) > fabs(v) ? fabs(w) : fabs(v);
        if (fabs(w - v) <= 1e-9 * (scale > 0 ? scale : 1.0))
            return k;
    }
    return -1;
}

int cx_report_parse_where(const cx_rcube *c, const char *text, int *fixed, cx_idx *at)
{
    int rc = CX_OK;
    char *copy = NULL;
    size_t len = strlen(text);
    CX_ALLOC(copy, len + 1);
    memcpy(copy, text, len + 1);
    char *save = NULL;
    for (char *item = strtok_r(copy, ",", &save); item; item = strtok_r(NULL, ",", &save)) {
        char *eq = strchr(item, '=');
        CX_REQUIRE(eq != NULL, CX_ERR_INVALID, "--where: expected AXIS=VALUE, got '%s'", item);
        *eq = '\0';
        int i = cx_rcube_axis_find(c, item);
        CX_REQUIRE(i >= 0, CX_ERR_INVALID, "--where: %s is not an axis of %s", item, c->path);
        CX_REQUIRE(!fixed[i], CX_ERR_INVALID, "--where: axis %s named twice", item);
        cx_idx k = match_value(&c->axes[i], eq + 1);
        CX_REQUIRE(k >= 0, CX_ERR_INVALID, "--where: %s=%s is not a value of that axis", item,
                   eq + 1);
        fixed[i] = 1;
        at[i] = k;
    }
done:
    free(copy);
    return rc;
}

int cx_table_build(const cx_rcube *c, const int *group_axis, int ngroup, const int *fixed,
                   const cx_idx *at, cx_table **out)
{
    int rc = CX_OK;
    cx_table *t = NULL;
    CX_REQUIRE(ngroup >= 0 && ngroup <= c->naxes, CX_ERR_INVALID, "bad number of group axes");
    CX_CALLOC(t, 1);
    t->ngroup = ngroup;
    t->ngroups = 1;
    for (int g = 0; g < ngroup; g++) {
        int a = group_axis[g];
        CX_REQUIRE(a >= 0 && a < c->naxes && !fixed[a], CX_ERR_INVALID,
                   "a grouping axis is fixed or unknown");
        for (int h = 0; h < g; h++)
            CX_REQUIRE(group_axis[h] != a, CX_ERR_INVALID, "axis %s named twice", c->axes[a].name);
        t->group_axis[g] = a;
        t->ngroups *= c->axes[a].len;
    }
    for (int i = 0; i < c->naxes; i++) {
        t->fixed[i] = fixed[i];
        t->at[i] = fixed[i] ? at[i] : 0;
    }
    CX_CALLOC(t->groups, t->ngroups);
    for (cx_idx gi = 0; gi < t->ngroups; gi++) {
        cx_idx r = gi;
        for (int g = ngroup - 1; g >= 0; g--) {
            cx_idx len = c->axes[t->group_axis[g]].len;
            t->groups[gi].coords[g] = r % len;
            r /= len;
        }
    }
    for (cx_idx cell = 0; cell < c->ncells; cell++) {
        cx_idx coords[CX_MAX_AXES];
        cx_rcube_coords(c, cell, coords);
        int keep = 1;
        for (int i = 0; i < c->naxes; i++)
            if (fixed[i] && coords[i] != at[i])
                keep = 0;
        if (!keep)
            continue;
        cx_idx gi = 0;
        for (int g = 0; g < ngroup; g++)
            gi = gi * c->axes[t->group_axis[g]].len + coords[t->group_axis[g]];
        cx_group *grp = &t->groups[gi];
        grp->cells++;
        if (!c->done[cell])
            continue;
        grp->done++;
        int cls = cx_rcube_cell_class(c, cell);
        if (cls == CX_CLASS_MULTI)
            grp->multi++;
        if (cls >= 0 && cls < CX_CLASS_CELLS)
            grp->by_class[cls]++;
    }
    *out = t;
    t = NULL;
done:
    cx_table_destroy(&t);
    return rc;
}

void cx_table_destroy(cx_table **pt)
{
    if (*pt == NULL)
        return;
    free((*pt)->groups);
    free(*pt);
    *pt = NULL;
}

int cx_group_majority(const cx_group *g)
{
    if (g->done == 0)
        return CX_CLASS_NONE;
    int best = 0, ties = 0;
    for (int k = 1; k < CX_CLASS_CELLS; k++)
        if (g->by_class[k] > g->by_class[best])
            best = k;
    for (int k = 0; k < CX_CLASS_CELLS; k++)
        if (g->by_class[k] == g->by_class[best])
            ties++;
    return ties > 1 ? CX_CLASS_TIED : best;
}

/* The value of a group axis for CSV and tables. */
static void axis_value_text(const cx_rcube *c, int axis, cx_idx k, char *buf, size_t n)
{
    const cx_rcube_axis *a = &c->axes[axis];
    if (a->labels != NULL)
        snprintf(buf, n, "%s", a->labels[k]);
    else
        snprintf(buf, n, "%.10g", a->values[k]);
}

int cx_table_write_csv(const cx_rcube *c, const cx_table *t, FILE *f)
{
    int rc = CX_OK;
    for (int g = 0; g < t->ngroup; g++)
        fprintf(f, "%s,", c->axes[t->group_axis[g]].name);
    fprintf(f, "cells,done,multifunctional,p_multifunctional,lo95,hi95");
    /* class 0 is multifunctional itself, already in the columns above */
    for (int k = 1; k < CX_CLASS_CELLS; k++)
        fprintf(f, ",n_%s,p_%s,lo95_%s,hi95_%s", cx_class_name(k), cx_class_name(k),
                cx_class_name(k), cx_class_name(k));
    fprintf(f, ",majority\n");
    for (cx_idx gi = 0; gi < t->ngroups; gi++) {
        const cx_group *g = &t->groups[gi];
        char buf[CX_NAME_LEN];
        double lo, hi;
        for (int a = 0; a < t->ngroup; a++) {
            axis_value_text(c, t->group_axis[a], g->coords[a], buf, sizeof buf);
            fprintf(f, "%s,", buf);
        }
        cx_wilson(g->multi, g->done, CX_Z95, &lo, &hi);
        fprintf(f, "%lld,%lld,%lld,%.6f,%.6f,%.6f", (long long)g->cells, (long long)g->done,
                (long long)g->multi, g->done ? (double)g->multi / (double)g->done : NAN, lo, hi);
        for (int k = 1; k < CX_CLASS_CELLS; k++) {
            cx_wilson(g->by_class[k], g->done, CX_Z95, &lo, &hi);
            fprintf(f, ",%lld,%.6f,%.6f,%.6f", (long long)g->by_class[k],
                    g->done ? (double)g->by_class[k] / (double)g->done : NAN, lo, hi);
        }
        fprintf(f, ",%s\n", cx_class_name(cx_group_majority(g)));
    }
    if (ferror(f))
        CX_RAISE(CX_ERR_IO, "writing a CSV table failed");
done:
    return rc;
}
