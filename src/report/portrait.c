/* coexist report: phase portraits of one cell, read back from its dump (cx_cell_dump's layout:
 * /tasks/<k>/training, /runs/<j>/output with attributes outcome and own_task).
 *
 * For each closed-loop run: every task's training signal as a thin coloured line, and the run's
 * tail (the part the classifier judged) as a thick black line, on two chosen output
 * coordinates, with equal scales on both axes so that circles look round. The view is the
 * training signals' bounding box with a 10 % margin, grown to take in the tail unless the tail
 * goes further than three times the box's half-width (a diverging run), where it is clipped.
 * Colours of the tasks: the Okabe & Ito (2008) palette without black (hex values from memory),
 * in our own order.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <hdf5.h>

#include "coexist/error.h"
#include "coexist/report.h"
#include "report/report_impl.h"

#define PT_SIZE 560.0

static const uint32_t task_colours[] = {0x56B4E9, 0xE69F00, 0x009E73, 0xCC79A7,
                                        0x0072B2, 0xD55E00, 0xF0E442};
#define NTASK_COLOURS ((int)(sizeof task_colours / sizeof task_colours[0]))

typedef struct series {
    double *x; /* rows x cols, row-major */
    hsize_t rows, cols;
} series;

typedef struct portrait_ctx {
    const series *train;
    int ntasks;
    const series *run;
    hsize_t tail0; /* first row of the tail */
    int cx, cy;
    double lo[2], hi[2];
    char title[256], note[256];
    char names[CX_MAX_TASKS][CX_NAME_LEN + 16];
} portrait_ctx;

static int read_2d(hid_t file, const char *name, series *s, const char *path)
{
    int rc = CX_OK;
    hid_t d = -1, sp = -1;
    hsize_t dims[2] = {0, 1};
    d = H5Dopen2(file, name, H5P_DEFAULT);
    CX_REQUIRE(d >= 0, CX_ERR_INVALID, "%s: no dataset %s (not a cell dump?)", path, name);
    sp = H5Dget_space(d);
    int nd = H5Sget_simple_extent_ndims(sp);
    CX_REQUIRE(nd == 1 || nd == 2, CX_ERR_INVALID, "%s: %s is not a matrix", path, name);
    H5Sget_simple_extent_dims(sp, dims, NULL);
    s->rows = dims[0];
    s->cols = nd == 2 ? dims[1] : 1;
    CX_ALLOC(s->x, s->rows * s->cols > 0 ? s->rows * s->cols : 1);
    if (s->rows * s->cols > 0)
        CX_REQUIRE(H5Dread(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, s->x) >= 0,
                   CX_ERR_HDF5, "%s: reading %s failed", path, name);
done:
    if (sp >= 0)
        H5Sclose(sp);
    if (d >= 0)
        H5Dclose(d);
    return rc;
}

static int read_attr_string(hid_t obj, const char *name, char *buf, size_t n)
{
    hid_t a = H5Aopen(obj, name, H5P_DEFAULT);
    if (a < 0)
        return -1;
    hid_t t = H5Aget_type(a), mt = H5Tcopy(H5T_C_S1);
    size_t len = H5Tget_size(t);
    char tmp[512] = "";
    H5Tset_size(mt, len + 1 < sizeof tmp ? len + 1 : sizeof tmp);
    int ok = len + 1 <= sizeof tmp && H5Aread(a, mt, tmp) >= 0;
    H5Tclose(mt);
    H5Tclose(t);
    H5Aclose(a);
    snprintf(buf, n, "%s", ok ? tmp : "?");
    return ok ? 0 : -1;
}

static int64_t read_attr_i64(hid_t obj, const char *name)
{
    int64_t v = -1;
    hid_t a = H5Aopen(obj, name, H5P_DEFAULT);
    if (a >= 0) {
        if (H5Aread(a, H5T_NATIVE_INT64, &v) < 0)
            v = -1;
        H5Aclose(a);
    }
    return v;
}

static double px(const portrait_ctx *p, double v)
{
    return 70 + (v - p->lo[0]) / (p->hi[0] - p->lo[0]) * (PT_SIZE - 100);
}

static double py(const portrait_ctx *p, double v)
{
    return PT_SIZE - 60 - (v - p->lo[1]) / (p->hi[1] - p->lo[1]) * (PT_SIZE - 130);
}

static void polyline(cairo_t *cr, const portrait_ctx *p, const series *s, hsize_t from)
{
    int pen = 0;
    for (hsize_t i = from; i < s->rows; i++) {
        double a = s->x[i * s->cols + (hsize_t)p->cx], b = s->x[i * s->cols + (hsize_t)p->cy];
        if (!isfinite(a) || !isfinite(b)) {
            pen = 0;
            continue;
        }
        if (pen)
            cairo_line_to(cr, px(p, a), py(p, b));
        else
            cairo_move_to(cr, px(p, a), py(p, b));
        pen = 1;
    }
    cairo_stroke(cr);
}

static void draw_portrait(cairo_t *cr, const void *ctx)
{
    const portrait_ctx *p = ctx;
    char buf[64];
    cairo_save(cr);
    cairo_rectangle(cr, 70, 70, PT_SIZE - 100, PT_SIZE - 130);
    cairo_clip(cr);
    cairo_set_line_width(cr, 1.2);
    for (int k = 0; k < p->ntasks; k++) {
        cx_fig_colour(cr, task_colours[k % NTASK_COLOURS]);
        polyline(cr, p, &p->train[k], 0);
    }
    cairo_set_line_width(cr, 2.2);
    cx_fig_colour(cr, 0x000000);
    polyline(cr, p, p->run, p->tail0);
    /* key: one short line per task in its colour, then the tail */
    for (int k = 0; k <= p->ntasks; k++) {
        double y = 84 + 16.0 * k;
        cx_fig_colour(cr, k < p->ntasks ? task_colours[k % NTASK_COLOURS] : 0x000000);
        cairo_set_line_width(cr, k < p->ntasks ? 1.5 : 2.5);
        cairo_move_to(cr, 80, y);
        cairo_line_to(cr, 104, y);
        cairo_stroke(cr);
        cx_fig_colour(cr, 0x000000);
        cx_fig_text(cr, 110, y, 11, 0, 0.5, 0, k < p->ntasks ? p->names[k] : "this run's tail");
    }
    cairo_restore(cr);
    cx_fig_colour(cr, 0x000000);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, 70, 70, PT_SIZE - 100, PT_SIZE - 130);
    cairo_stroke(cr);
    for (int e = 0; e < 2; e++) {
        double lo = p->lo[e], hi = p->hi[e];
        for (int i = 0; i <= 4; i++) {
            double v = lo + (hi - lo) * i / 4.0;
            snprintf(buf, sizeof buf, "%.3g", v);
            if (e == 0) {
                cairo_move_to(cr, px(p, v), PT_SIZE - 60);
                cairo_line_to(cr, px(p, v), PT_SIZE - 55);
                cairo_stroke(cr);
                cx_fig_text(cr, px(p, v), PT_SIZE - 51, 11, 0.5, 0, 0, buf);
            } else {
                cairo_move_to(cr, 70, py(p, v));
                cairo_line_to(cr, 65, py(p, v));
                cairo_stroke(cr);
                cx_fig_text(cr, 62, py(p, v), 11, 1, 0.5, 0, buf);
            }
        }
    }
    snprintf(buf, sizeof buf, "output coordinate %d [signal units]", p->cx);
    cx_fig_text(cr, PT_SIZE / 2 + 20, PT_SIZE - 24, 13, 0.5, 0.5, 0, buf);
    snprintf(buf, sizeof buf, "output coordinate %d [signal units]", p->cy);
    cx_fig_text(cr, 16, PT_SIZE / 2, 13, 0.5, 0.5, 1, buf);
    cx_fig_text(cr, 70, 22, 14, 0, 0.5, 0, p->title);
    cx_fig_text(cr, 70, 46, 11, 0, 0.5, 0, p->note);
}

/* Bounds on coordinate c of a series from row `from`, ignoring non-finite values. */
static void grow(const series *s, hsize_t from, int c, double *lo, double *hi)
{
    for (hsize_t i = from; i < s->rows; i++) {
        double v = s->x[i * s->cols + (hsize_t)c];
        if (isfinite(v)) {
            *lo = v < *lo ? v : *lo;
            *hi = v > *hi ? v : *hi;
        }
    }
}

int cx_portrait_write(const char *dump_path, const char *title, int cx, int cy, cx_idx n_tail,
                      const char *dir)
{
    int rc = CX_OK;
    const char *path = dump_path;
    hid_t file = -1;
    series train[CX_MAX_TASKS];
    series run = {NULL, 0, 0};
    int ntasks = 0;
    memset(train, 0, sizeof train);
    H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
    file = H5Fopen(path, H5F_ACC_RDONLY, H5P_DEFAULT);
    CX_REQUIRE(file >= 0, CX_ERR_IO, "cannot open the cell dump %s", path);
    int64_t nt = read_attr_i64(file, "tasks"), nr = read_attr_i64(file, "runs");
    CX_REQUIRE(nt >= 1 && nt <= CX_MAX_TASKS && nr >= 0 && nr <= CX_MAX_RUNS, CX_ERR_INVALID,
               "%s: not a cell dump (attributes tasks, runs)", path);
    char name[128];
    for (int k = 0; k < nt; k++) {
        snprintf(name, sizeof name, "tasks/%d/training", k);
        CX_TRY(read_2d(file, name, &train[k], path));
        ntasks++;
        CX_REQUIRE(cx >= 0 && cy >= 0 && (hsize_t)cx < train[k].cols && (hsize_t)cy < train[k].cols,
                   CX_ERR_INVALID, "--coords %d,%d: the tasks have %llu coordinates (0-based)", cx,
                   cy, (unsigned long long)train[k].cols);
    }
    char names[CX_MAX_TASKS][CX_NAME_LEN + 16];
    for (int k = 0; k < ntasks; k++) {
        char group[32];
        snprintf(group, sizeof group, "tasks/%d", k);
        snprintf(names[k], sizeof names[k], "task %d", k);
        hid_t g = H5Gopen2(file, group, H5P_DEFAULT);
        if (g >= 0) {
            char nm[CX_NAME_LEN];
            if (read_attr_string(g, "name", nm, sizeof nm) == 0)
                snprintf(names[k], sizeof names[k], "task %d: %s", k, nm);
            H5Gclose(g);
        }
    }
    double box_lo[2] = {INFINITY, INFINITY}, box_hi[2] = {-INFINITY, -INFINITY};
    for (int k = 0; k < ntasks; k++) {
        grow(&train[k], 0, cx, &box_lo[0], &box_hi[0]);
        grow(&train[k], 0, cy, &box_lo[1], &box_hi[1]);
    }
    for (int j = 0; j < nr; j++) {
        portrait_ctx p;
        memset(&p, 0, sizeof p);
        snprintf(name, sizeof name, "runs/%d/output", j);
        free(run.x);
        run.x = NULL;
        CX_TRY(read_2d(file, name, &run, path));
        p.train = train;
        p.ntasks = ntasks;
        memcpy(p.names, names, sizeof names);
        p.run = &run;
        p.cx = cx;
        p.cy = cy;
        p.tail0 = run.rows > (hsize_t)n_tail ? run.rows - (hsize_t)n_tail : 0;
        double lo[2] = {box_lo[0], box_lo[1]}, hi[2] = {box_hi[0], box_hi[1]};
        int coord[2] = {cx, cy};
        for (int e = 0; e < 2; e++) {
            double mid = 0.5 * (lo[e] + hi[e]), half = 0.5 * (hi[e] - lo[e]);
            double tlo = INFINITY, thi = -INFINITY;
            grow(&run, p.tail0, coord[e], &tlo, &thi);
            if (tlo >= mid - 3 * half && tlo < lo[e])
                lo[e] = tlo;
            if (thi <= mid + 3 * half && thi > hi[e])
                hi[e] = thi;
        }
        /* equal scales: widen the narrower range about its middle */
        double wx = hi[0] - lo[0], wy = hi[1] - lo[1], w = (wx > wy ? wx : wy) * 1.1;
        if (!(w > 0))
            w = 1.0;
        for (int e = 0; e < 2; e++) {
            double mid = 0.5 * (lo[e] + hi[e]);
            p.lo[e] = mid - w / 2;
            p.hi[e] = mid + w / 2;
        }
        char outcome[64] = "?", group[32];
        snprintf(group, sizeof group, "runs/%d", j);
        hid_t g = H5Gopen2(file, group, H5P_DEFAULT);
        int64_t own = -1;
        if (g >= 0) {
            read_attr_string(g, "outcome", outcome, sizeof outcome);
            own = read_attr_i64(g, "own_task");
            H5Gclose(g);
        }
        snprintf(p.title, sizeof p.title, "%s: run %d", title, j);
        if (own >= 0)
            snprintf(p.note, sizeof p.note,
                     "starts at the end of task %lld's training; outcome %s; black: the tail",
                     (long long)own, outcome);
        else
            snprintf(p.note, sizeof p.note, "random start; outcome %s; black: the tail", outcome);
        char base[CX_PATH_LEN + 32];
        snprintf(base, sizeof base, "%s/run-%d", dir, j);
        CX_TRY(cx_fig_write(base, PT_SIZE, PT_SIZE, draw_portrait, &p));
    }
done:
    free(run.x);
    for (int k = 0; k < ntasks; k++)
        free(train[k].x);
    if (file >= 0)
        H5Fclose(file);
    return rc;
}
