/* coexist report: region maps over two axes of a cube.
 *
 * One rectangle per pair of grid values, all of equal size whatever the spacing of the values
 * (a sweep's grid is often geometric or irregular; equal cells keep every grid point visible
 * and each is labelled with its value). A pixel is coloured either by the majority class of the
 * cells it pools (stats.c: classes, colours and the tie rule) or by the fraction of them that is
 * multifunctional on our sequential scale (figure.c). The legend names every class with its
 * colour's name and hex code, or shows the colour bar; the title carries the study name and a
 * note of what was fixed and what was pooled. The companion CSV lists each rectangle's values,
 * counts, class or probability, colour and centre in PNG pixels, so the picture can be checked
 * against the numbers (tests/report_check.py does).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "coexist/report.h"
#include "report/report_impl.h"

#define MAP_W      940.0
#define MAP_H      620.0
#define MAP_LEFT   110.0
#define MAP_RIGHT  300.0 /* legend column */
#define MAP_TOP    70.0
#define MAP_BOTTOM 80.0

typedef struct map_ctx {
    const cx_rcube *c;
    const cx_table *t;
    const cx_map_opts *o;
    cx_idx nx, ny;
    double x0, x1, y0, y1; /* plot area */
} map_ctx;

static const cx_group *group_at(const map_ctx *m, cx_idx ix, cx_idx iy)
{
    return &m->t->groups[ix * m->ny + iy];
}

static double group_p(const cx_group *g)
{
    return g->done > 0 ? (double)g->multi / (double)g->done : NAN;
}

static uint32_t group_colour(const map_ctx *m, const cx_group *g)
{
    if (m->o->probability)
        return cx_fig_sequential(group_p(g));
    return cx_class_colour(cx_group_majority(g));
}

/* Rectangle of grid point (ix, iy), y index 0 at the bottom, with edges on whole pixels computed
 * from the index alone so that neighbours share their edge exactly (no seam, no overlap). */
static void cell_box(const map_ctx *m, cx_idx ix, cx_idx iy, double *x, double *y, double *w,
                     double *h)
{
    double cw = (m->x1 - m->x0) / (double)m->nx, ch = (m->y1 - m->y0) / (double)m->ny;
    double xa = floor(m->x0 + (double)ix * cw), xb = floor(m->x0 + (double)(ix + 1) * cw);
    double ya = floor(m->y1 - (double)(iy + 1) * ch), yb = floor(m->y1 - (double)iy * ch);
    *x = xa;
    *y = ya;
    *w = xb - xa;
    *h = yb - ya;
}

static void value_text(const cx_rcube_axis *a, cx_idx k, char *buf, size_t n)
{
    if (a->labels != NULL)
        snprintf(buf, n, "%s", a->labels[k]);
    else
        snprintf(buf, n, "%.4g", a->values[k]);
}

static void draw_legend(cairo_t *cr, const map_ctx *m)
{
    double lx = m->x1 + 30, ly = m->y0;
    char buf[128];
    if (m->o->probability) {
        double bw = 26, bh = m->y1 - m->y0;
        /* one band per pixel row, without antialiasing, so the bar shows no seams */
        int steps = (int)bh;
        cairo_set_antialias(cr, CAIRO_ANTIALIAS_NONE);
        for (int i = 0; i < steps; i++) {
            cx_fig_colour(cr, cx_fig_sequential(((double)i + 0.5) / steps));
            cairo_rectangle(cr, lx, ly + bh - (double)(i + 1), bw, 1);
            cairo_fill(cr);
        }
        cairo_set_antialias(cr, CAIRO_ANTIALIAS_DEFAULT);
        cx_fig_colour(cr, 0x000000);
        cairo_set_line_width(cr, 1);
        cairo_rectangle(cr, lx, ly, bw, bh);
        cairo_stroke(cr);
        for (int i = 0; i <= 4; i++) {
            double p = i / 4.0, y = ly + bh * (1 - p);
            cairo_move_to(cr, lx + bw, y);
            cairo_line_to(cr, lx + bw + 5, y);
            cairo_stroke(cr);
            snprintf(buf, sizeof buf, "%.2f", p);
            cx_fig_text(cr, lx + bw + 8, y, 12, 0, 0.5, 0, buf);
        }
        cx_fig_text(cr, lx + bw + 55, ly + bh / 2, 13, 0.5, 0.5, 1,
                    "P(multifunctional): yellow -> green -> blue");
        return;
    }
    cx_fig_colour(cr, 0x000000);
    cx_fig_text(cr, lx, ly, 13, 0, 0.5, 0, "majority class of the cells");
    for (int k = 0; k < CX_CLASS_COUNT; k++) {
        double y = ly + 26 + 26.0 * k;
        cx_fig_colour(cr, cx_class_colour(k));
        cairo_rectangle(cr, lx, y - 8, 22, 16);
        cairo_fill_preserve(cr);
        cx_fig_colour(cr, 0x000000);
        cairo_set_line_width(cr, 0.8);
        cairo_stroke(cr);
        snprintf(buf, sizeof buf, "%s: %s #%06X", cx_class_name(k), cx_class_colour_name(k),
                 (unsigned)cx_class_colour(k));
        cx_fig_text(cr, lx + 30, y, 11.5, 0, 0.5, 0, buf);
    }
}

static void draw_map(cairo_t *cr, const void *ctx)
{
    const map_ctx *m = ctx;
    const cx_rcube_axis *ax = &m->c->axes[m->t->group_axis[0]];
    const cx_rcube_axis *ay = &m->c->axes[m->t->group_axis[1]];
    char buf[256];
    cairo_set_antialias(cr, CAIRO_ANTIALIAS_NONE);
    for (cx_idx ix = 0; ix < m->nx; ix++)
        for (cx_idx iy = 0; iy < m->ny; iy++) {
            double x, y, w, h;
            cell_box(m, ix, iy, &x, &y, &w, &h);
            cx_fig_colour(cr, group_colour(m, group_at(m, ix, iy)));
            cairo_rectangle(cr, x, y, w, h);
            cairo_fill(cr);
        }
    cairo_set_antialias(cr, CAIRO_ANTIALIAS_DEFAULT);
    cx_fig_colour(cr, 0x000000);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, m->x0, m->y0, m->x1 - m->x0, m->y1 - m->y0);
    cairo_stroke(cr);
    /* ticks: every grid value, thinned to at most about 16 labels per axis */
    cx_idx sx = (m->nx + 15) / 16, sy = (m->ny + 15) / 16;
    for (cx_idx ix = 0; ix < m->nx; ix += sx) {
        double x, y, w, h;
        cell_box(m, ix, 0, &x, &y, &w, &h);
        cairo_move_to(cr, x + w / 2, m->y1);
        cairo_line_to(cr, x + w / 2, m->y1 + 5);
        cairo_stroke(cr);
        value_text(ax, ix, buf, sizeof buf);
        cx_fig_text(cr, x + w / 2, m->y1 + 9, 12, 0.5, 0, 0, buf);
    }
    for (cx_idx iy = 0; iy < m->ny; iy += sy) {
        double x, y, w, h;
        cell_box(m, 0, iy, &x, &y, &w, &h);
        cairo_move_to(cr, m->x0, y + h / 2);
        cairo_line_to(cr, m->x0 - 5, y + h / 2);
        cairo_stroke(cr);
        value_text(ay, iy, buf, sizeof buf);
        cx_fig_text(cr, m->x0 - 8, y + h / 2, 12, 1, 0.5, 0, buf);
    }
    cx_fig_axis_label(buf, sizeof buf, ax->name, ax->units);
    cx_fig_text(cr, (m->x0 + m->x1) / 2, m->y1 + 36, 14, 0.5, 0, 0, buf);
    cx_fig_axis_label(buf, sizeof buf, ay->name, ay->units);
    cx_fig_text(cr, 28, (m->y0 + m->y1) / 2, 14, 0.5, 0.5, 1, buf);
    cx_fig_text(cr, m->x0, 22, 16, 0, 0.5, 0, m->o->title ? m->o->title : m->c->name);
    if (m->o->note)
        cx_fig_text(cr, m->x0, 46, 11.5, 0, 0.5, 0, m->o->note);
    draw_legend(cr, m);
}

static int write_csv(const map_ctx *m, const char *base)
{
    int rc = CX_OK;
    char path[4096];
    FILE *f = NULL;
    const cx_rcube_axis *ax = &m->c->axes[m->t->group_axis[0]];
    const cx_rcube_axis *ay = &m->c->axes[m->t->group_axis[1]];
    snprintf(path, sizeof path, "%s.csv", base);
    f = fopen(path, "w");
    CX_REQUIRE(f != NULL, CX_ERR_IO, "cannot write %s", path);
    fprintf(f, "%s,%s,cells,done,multifunctional,p_multifunctional,majority,colour,px,py\n",
            ax->name, ay->name);
    for (cx_idx ix = 0; ix < m->nx; ix++)
        for (cx_idx iy = 0; iy < m->ny; iy++) {
            const cx_group *g = group_at(m, ix, iy);
            double x, y, w, h;
            char vx[64], vy[64];
            cell_box(m, ix, iy, &x, &y, &w, &h);
            if (ax->labels)
                snprintf(vx, sizeof vx, "%s", ax->labels[ix]);
            else
                snprintf(vx, sizeof vx, "%.10g", ax->values[ix]);
            if (ay->labels)
                snprintf(vy, sizeof vy, "%s", ay->labels[iy]);
            else
                snprintf(vy, sizeof vy, "%.10g", ay->values[iy]);
            fprintf(f, "%s,%s,%lld,%lld,%lld,%.6f,%s,#%06X,%d,%d\n", vx, vy, (long long)g->cells,
                    (long long)g->done, (long long)g->multi, group_p(g),
                    cx_class_name(cx_group_majority(g)), (unsigned)group_colour(m, g),
                    (int)floor(x + w / 2), (int)floor(y + h / 2));
        }
    CX_REQUIRE(!ferror(f), CX_ERR_IO, "writing %s failed", path);
done:
    if (f != NULL && fclose(f) != 0 && rc == CX_OK)
        rc = CX_FAIL(CX_ERR_IO, "closing %s failed", path);
    return rc;
}

int cx_map_write(const cx_rcube *c, const cx_table *t, const cx_map_opts *o, const char *base)
{
    int rc = CX_OK;
    CX_REQUIRE(t->ngroup == 2, CX_ERR_INVALID, "a map needs exactly two axes (--by A,B)");
    map_ctx m = {c,
                 t,
                 o,
                 c->axes[t->group_axis[0]].len,
                 c->axes[t->group_axis[1]].len,
                 MAP_LEFT,
                 MAP_W - MAP_RIGHT,
                 MAP_TOP,
                 MAP_H - MAP_BOTTOM};
    CX_TRY(cx_fig_write(base, MAP_W, MAP_H, draw_map, &m));
    CX_TRY(write_csv(&m, base));
done:
    return rc;
}
