/* coexist report: the capacity curve, capacity (tasks) against network size.
 *
 * The x axis is the axis `reservoir.nodes` when the table has it, else the first grouping axis
 * other than the task count; every further axis makes one series. Points mark the capacity
 * estimate, vertical bars span the lower and upper estimates (capacity.c), series are offset
 * sideways a little so their bars do not hide each other. The x axis is logarithmic when all
 * values are positive and span a factor of 4 or more (network sizes usually double), linear
 * otherwise; the y axis is linear in whole task counts. Series colours come from the Okabe &
 * Ito (2008) palette (hex values from memory), yellow left out because it is hard to see on
 * white; the order is our own.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "coexist/report.h"
#include "report/report_impl.h"

#define PLOT_W 820.0
#define PLOT_H 520.0

static const uint32_t series_colours[] = {0x0072B2, 0xD55E00, 0x009E73, 0xCC79A7,
                                          0xE69F00, 0x56B4E9, 0x000000};
#define NSERIES_COLOURS ((int)(sizeof series_colours / sizeof series_colours[0]))

typedef struct plot_ctx {
    const cx_rcube *c;
    const cx_table *t;
    const cx_capacity *cap;
    int x_pos; /* position among the group axes of the x axis, or -1 */
    int logx;
    double xmin, xmax, ymax;
    double x0, x1, y0, y1;
} plot_ctx;

static double xval(const plot_ctx *p, const cx_capacity_row *r)
{
    if (p->x_pos < 0)
        return 0.0;
    const cx_rcube_axis *a = &p->c->axes[p->t->group_axis[p->x_pos]];
    return a->labels ? (double)r->coords[p->x_pos] : a->values[r->coords[p->x_pos]];
}

static double map_x(const plot_ctx *p, double v)
{
    double lo = p->xmin, hi = p->xmax;
    if (p->logx) {
        v = log(v);
        lo = log(lo);
        hi = log(hi);
    }
    if (hi <= lo)
        return 0.5 * (p->x0 + p->x1);
    double pad = 0.06 * (p->x1 - p->x0);
    return p->x0 + pad + (v - lo) / (hi - lo) * (p->x1 - p->x0 - 2 * pad);
}

static double map_y(const plot_ctx *p, double v)
{
    return p->y1 - v / p->ymax * (p->y1 - p->y0);
}

/* The series of a row: its index over the group axes other than the task count and x. */
static cx_idx series_of(const plot_ctx *p, const cx_capacity_row *r, cx_idx *nseries)
{
    cx_idx s = 0, n = 1;
    for (int g = 0; g < p->t->ngroup; g++) {
        if (g == p->cap->k_pos || g == p->x_pos)
            continue;
        cx_idx len = p->c->axes[p->t->group_axis[g]].len;
        s = s * len + r->coords[g];
        n *= len;
    }
    if (nseries)
        *nseries = n;
    return s;
}

static void series_label(const plot_ctx *p, const cx_capacity_row *r, char *buf, size_t n)
{
    buf[0] = '\0';
    for (int g = 0; g < p->t->ngroup; g++) {
        if (g == p->cap->k_pos || g == p->x_pos)
            continue;
        const cx_rcube_axis *a = &p->c->axes[p->t->group_axis[g]];
        size_t len = strlen(buf);
        if (a->labels)
            snprintf(buf + len, n - len, "%s%s=%s", len ? ", " : "", a->name,
                     a->labels[r->coords[g]]);
        else
            snprintf(buf + len, n - len, "%s%s=%g", len ? ", " : "", a->name,
                     a->values[r->coords[g]]);
    }
}

static void draw_plot(cairo_t *cr, const void *ctx)
{
    const plot_ctx *p = ctx;
    char buf[256];
    cx_idx nseries = 1;
    if (p->cap->nrows > 0)
        series_of(p, &p->cap->rows[0], &nseries);
    cx_fig_colour(cr, 0x000000);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, p->x0, p->y0, p->x1 - p->x0, p->y1 - p->y0);
    cairo_stroke(cr);
    /* y ticks at whole task counts */
    int ystep = p->ymax > 12 ? (int)ceil(p->ymax / 12) : 1;
    for (int k = 0; k <= (int)p->ymax; k += ystep) {
        double y = map_y(p, k);
        cx_fig_colour(cr, 0xDDDDDD);
        cairo_move_to(cr, p->x0, y);
        cairo_line_to(cr, p->x1, y);
        cairo_stroke(cr);
        cx_fig_colour(cr, 0x000000);
        snprintf(buf, sizeof buf, "%d", k);
        cx_fig_text(cr, p->x0 - 8, y, 12, 1, 0.5, 0, buf);
    }
    /* x ticks at the grid values */
    if (p->x_pos >= 0) {
        const cx_rcube_axis *a = &p->c->axes[p->t->group_axis[p->x_pos]];
        for (cx_idx k = 0; k < a->len; k++) {
            double v = a->labels ? (double)k : a->values[k], x = map_x(p, v);
            cairo_move_to(cr, x, p->y1);
            cairo_line_to(cr, x, p->y1 + 5);
            cairo_stroke(cr);
            if (a->labels)
                snprintf(buf, sizeof buf, "%s", a->labels[k]);
            else
                snprintf(buf, sizeof buf, "%g", a->values[k]);
            cx_fig_text(cr, x, p->y1 + 9, 12, 0.5, 0, 0, buf);
        }
        cx_fig_axis_label(buf, sizeof buf, a->name, a->units);
        size_t len = strlen(buf);
        if (p->logx)
            snprintf(buf + len, sizeof buf - len, ", log scale");
    } else {
        cx_fig_text(cr, map_x(p, 0), p->y1 + 9, 12, 0.5, 0, 0, "all cells pooled");
        snprintf(buf, sizeof buf, "(no other axis)");
    }
    cx_fig_text(cr, (p->x0 + p->x1) / 2, p->y1 + 36, 14, 0.5, 0, 0, buf);
    const cx_rcube_axis *ka = &p->c->axes[p->t->group_axis[p->cap->k_pos]];
    snprintf(buf, sizeof buf, "capacity [%s]", ka->units[0] ? ka->units : "tasks");
    cx_fig_text(cr, 28, (p->y0 + p->y1) / 2, 14, 0.5, 0.5, 1, buf);
    cx_fig_text(cr, p->x0, 22, 16, 0, 0.5, 0, p->c->name);
    snprintf(buf, sizeof buf,
             "largest task count with P(multifunctional) >= %.3g there and below; bars: "
             "95 %% Wilson bounds",
             p->cap->threshold);
    cx_fig_text(cr, p->x0, 46, 11.5, 0, 0.5, 0, buf);

    double spread = nseries > 1 ? 14.0 : 0.0;
    for (cx_idx s = 0; s < nseries; s++) {
        uint32_t col = series_colours[s % NSERIES_COLOURS];
        double off = nseries > 1 ? spread * ((double)s / (double)(nseries - 1) - 0.5) : 0.0;
        int first = 1;
        const cx_capacity_row *label_row = NULL;
        cairo_set_line_width(cr, 1.8);
        cx_fig_colour(cr, col);
        for (cx_idx i = 0; i < p->cap->nrows; i++) {
            const cx_capacity_row *r = &p->cap->rows[i];
            if (series_of(p, r, NULL) != s)
                continue;
            label_row = r;
            double x = map_x(p, xval(p, r)) + off, y = map_y(p, r->capacity);
            if (first)
                cairo_move_to(cr, x, y);
            else
                cairo_line_to(cr, x, y);
            first = 0;
        }
        cairo_stroke(cr);
        for (cx_idx i = 0; i < p->cap->nrows; i++) {
            const cx_capacity_row *r = &p->cap->rows[i];
            if (series_of(p, r, NULL) != s)
                continue;
            double x = map_x(p, xval(p, r)) + off;
            cairo_set_line_width(cr, 1.4);
            cairo_move_to(cr, x, map_y(p, r->lower));
            cairo_line_to(cr, x, map_y(p, r->upper));
            cairo_move_to(cr, x - 5, map_y(p, r->lower));
            cairo_line_to(cr, x + 5, map_y(p, r->lower));
            cairo_move_to(cr, x - 5, map_y(p, r->upper));
            cairo_line_to(cr, x + 5, map_y(p, r->upper));
            cairo_stroke(cr);
            cairo_arc(cr, x, map_y(p, r->capacity), 4.5, 0, 6.283185307179586);
            cairo_fill(cr);
        }
        if (nseries > 1 && label_row != NULL && s < 20) {
            double ly = p->y0 + 14 + 20.0 * (double)s;
            cairo_rectangle(cr, p->x1 + 16, ly - 6, 18, 12);
            cairo_fill(cr);
            series_label(p, label_row, buf, sizeof buf);
            cx_fig_colour(cr, 0x000000);
            cx_fig_text(cr, p->x1 + 40, ly, 11, 0, 0.5, 0, buf);
        }
    }
}

int cx_capacity_plot(const cx_rcube *c, const cx_table *t, const cx_capacity *cap, const char *base)
{
    int rc = CX_OK;
    plot_ctx p;
    memset(&p, 0, sizeof p);
    p.c = c;
    p.t = t;
    p.cap = cap;
    p.x_pos = -1;
    for (int g = 0; g < t->ngroup; g++)
        if (g != cap->k_pos && strcmp(c->axes[t->group_axis[g]].name, "reservoir.nodes") == 0)
            p.x_pos = g;
    for (int g = 0; g < t->ngroup && p.x_pos < 0; g++)
        if (g != cap->k_pos)
            p.x_pos = g;
    p.xmin = INFINITY;
    p.xmax = -INFINITY;
    p.ymax = 1;
    const cx_rcube_axis *ka = &c->axes[t->group_axis[cap->k_pos]];
    for (cx_idx k = 0; k < ka->len; k++)
        if (ka->values[k] > p.ymax)
            p.ymax = ka->values[k];
    p.ymax = ceil(p.ymax) + 0.5;
    if (p.x_pos >= 0) {
        const cx_rcube_axis *a = &c->axes[t->group_axis[p.x_pos]];
        for (cx_idx k = 0; k < a->len; k++) {
            double v = a->labels ? (double)k : a->values[k];
            p.xmin = v < p.xmin ? v : p.xmin;
            p.xmax = v > p.xmax ? v : p.xmax;
        }
        p.logx = a->labels == NULL && p.xmin > 0 && p.xmax / p.xmin >= 4.0;
    } else {
        p.xmin = p.xmax = 0;
    }
    cx_idx nseries = 1;
    if (cap->nrows > 0)
        series_of(&p, &cap->rows[0], &nseries);
    p.x0 = 90;
    p.x1 = PLOT_W - (nseries > 1 ? 260 : 40);
    p.y0 = 70;
    p.y1 = PLOT_H - 80;
    CX_TRY(cx_fig_write(base, PLOT_W, PLOT_H, draw_plot, &p));
done:
    return rc;
}
