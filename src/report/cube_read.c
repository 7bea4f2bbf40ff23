/* coexist report: serial, read-only access to a cube written by the engine (src/engine/cube.c).
 *
 * The axes are found through the dimension scales attached to the per-cell dataset
 * `multifunctional` (HDF5 Dimension Scale specification, The HDF Group), so the reader depends
 * on the layout's meaning rather than on dataset names. Enum datasets are read through memory
 * enum types built from the same label names, which HDF5 converts by name, so a cube from
 * another writer (h5py in the tests) with the same labels reads identically. The number of tasks
 * of each cell is not stored in a cube: it comes from binding the stored sweep file, which is
 * what made the cube.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <hdf5.h>
#include <hdf5_hl.h>

#include "coexist/error.h"
#include "coexist/report.h"

#define RQ_H5(expr, what)                                                                          \
    do {                                                                                           \
        if ((expr) < 0)                                                                            \
            CX_RAISE(CX_ERR_HDF5, "HDF5: %s failed for %s", (what), path);                         \
    } while (0)

static hid_t outcome_type(void)
{
    hid_t t = H5Tenum_create(H5T_NATIVE_SCHAR);
    for (int k = 0; t >= 0 && k < CX_OUT_COUNT; k++) {
        signed char v = (signed char)k;
        if (H5Tenum_insert(t, cx_outcome_name(k), &v) < 0) {
            H5Tclose(t);
            t = -1;
        }
    }
    return t;
}

static hid_t status_type(void)
{
    hid_t t = H5Tenum_create(H5T_NATIVE_SCHAR);
    for (int k = 0; t >= 0 && k <= CX_CELL_SKIPPED; k++) {
        signed char v = (signed char)k;
        if (H5Tenum_insert(t, cx_cell_status_name(k), &v) < 0) {
            H5Tclose(t);
            t = -1;
        }
    }
    return t;
}

/* A string attribute, fixed or variable length. OUT: *out (malloc'd). */
static int read_string_attr(hid_t obj, const char *name, char **out, const char *path)
{
    int rc = CX_OK;
    hid_t a = -1, t = -1, mt = -1;
    char *s = NULL;
    RQ_H5(a = H5Aopen(obj, name, H5P_DEFAULT), name);
    RQ_H5(t = H5Aget_type(a), "H5Aget_type");
    CX_REQUIRE(H5Tget_class(t) == H5T_STRING, CX_ERR_INVALID, "%s: attribute %s is not a string",
               path, name);
    if (H5Tis_variable_str(t) > 0) {
        char *v = NULL;
        RQ_H5(mt = H5Tcopy(H5T_C_S1), "H5Tcopy");
        RQ_H5(H5Tset_size(mt, H5T_VARIABLE), "H5Tset_size");
        RQ_H5(H5Aread(a, mt, &v), name);
        size_t n = v ? strlen(v) : 0;
        CX_ALLOC(s, n + 1);
        memcpy(s, v ? v : "", n + 1);
        H5free_memory(v);
    } else {
        size_t n = H5Tget_size(t);
        CX_ALLOC(s, n + 1);
        RQ_H5(mt = H5Tcopy(H5T_C_S1), "H5Tcopy");
        RQ_H5(H5Tset_size(mt, n + 1), "H5Tset_size");
        RQ_H5(H5Aread(a, mt, s), name);
        s[n] = '\0';
    }
    *out = s;
    s = NULL;
done:
    free(s);
    if (mt >= 0)
        H5Tclose(mt);
    if (t >= 0)
        H5Tclose(t);
    if (a >= 0)
        H5Aclose(a);
    return rc;
}

static int read_i64_attr(hid_t obj, const char *name, int64_t *v, const char *path)
{
    int rc = CX_OK;
    hid_t a = -1;
    RQ_H5(a = H5Aopen(obj, name, H5P_DEFAULT), name);
    RQ_H5(H5Aread(a, H5T_NATIVE_INT64, v), name);
done:
    if (a >= 0)
        H5Aclose(a);
    return rc;
}

typedef struct scale_hit {
    hid_t id;
} scale_hit;

static herr_t take_scale(hid_t did, unsigned dim, hid_t dsid, void *data)
{
    (void)did;
    (void)dim;
    scale_hit *h = data;
    h->id = H5Dopen2(dsid, ".", H5P_DEFAULT);
    return 1;
}

/* Read one axis from the dimension scale of dimension `dim` of dataset d. Returns 1 when the
 * scale is a sweep axis, 0 when it is not (the lone `cell` scale of a study without axes). */
static int read_axis(hid_t d, unsigned dim, cx_rcube_axis *ax, int *is_axis, const char *path)
{
    int rc = CX_OK;
    scale_hit h = {-1};
    hid_t sp = -1;
    char *s = NULL;
    *is_axis = 0;
    int idx = 0;
    RQ_H5(H5DSiterate_scales(d, dim, &idx, take_scale, &h), "H5DSiterate_scales");
    RQ_H5(h.id, "open dimension scale");
    if (H5Aexists(h.id, "axis_name") <= 0)
        goto done;
    *is_axis = 1;
    CX_TRY(read_string_attr(h.id, "axis_name", &s, path));
    snprintf(ax->name, sizeof ax->name, "%s", s);
    free(s);
    s = NULL;
    if (H5Aexists(h.id, "units") > 0) {
        CX_TRY(read_string_attr(h.id, "units", &s, path));
        snprintf(ax->units, sizeof ax->units, "%s", s);
        free(s);
        s = NULL;
    }
    RQ_H5(sp = H5Dget_space(h.id), "H5Dget_space");
    hssize_t n = H5Sget_simple_extent_npoints(sp);
    RQ_H5(n, "extent");
    ax->len = (cx_idx)n;
    CX_ALLOC(ax->values, ax->len);
    RQ_H5(H5Dread(h.id, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, ax->values), ax->name);
    ax->kind = strcmp(ax->name, "seed") == 0 ? CX_AXIS_SEED : CX_AXIS_NUMERIC;
    if (H5Aexists(h.id, "labels") > 0) {
        /* space-separated labels (names never contain spaces) */
        CX_TRY(read_string_attr(h.id, "labels", &s, path));
        ax->kind = CX_AXIS_CATEGORICAL;
        CX_CALLOC(ax->labels, ax->len);
        char *save = NULL, *tok = strtok_r(s, " ", &save);
        for (cx_idx k = 0; k < ax->len; k++) {
            const char *word = tok ? tok : "?";
            size_t len = strlen(word);
            CX_ALLOC(ax->labels[k], len + 1);
            memcpy(ax->labels[k], word, len + 1);
            tok = tok ? strtok_r(NULL, " ", &save) : NULL;
        }
    }
done:
    free(s);
    if (sp >= 0)
        H5Sclose(sp);
    if (h.id >= 0)
        H5Dclose(h.id);
    return rc;
}

static int read_all(hid_t file, const char *name, hid_t mtype, void *buf, hssize_t want,
                    const char *path)
{
    int rc = CX_OK;
    hid_t d = -1, sp = -1;
    d = H5Dopen2(file, name, H5P_DEFAULT);
    CX_REQUIRE(d >= 0, CX_ERR_INVALID, "%s is not a coexist cube: no dataset %s", path, name);
    RQ_H5(sp = H5Dget_space(d), "H5Dget_space");
    CX_REQUIRE(H5Sget_simple_extent_npoints(sp) == want, CX_ERR_INVALID,
               "%s: dataset %s has %lld values, expected %lld", path, name,
               (long long)H5Sget_simple_extent_npoints(sp), (long long)want);
    RQ_H5(H5Dread(d, mtype, H5S_ALL, H5S_ALL, H5P_DEFAULT, buf), name);
done:
    if (sp >= 0)
        H5Sclose(sp);
    if (d >= 0)
        H5Dclose(d);
    return rc;
}

/* Tasks per cell from the stored sweep file; kinds of the axes from the study. */
static void bind_tasks(cx_rcube *c)
{
    cx_study *s = NULL;
    cx_cell_params *p = cx_malloc_array(1, sizeof *p);
    if (p == NULL || cx_study_load_buffer(c->source, strlen(c->source), c->path, &s) != CX_OK ||
        cx_study_naxes(s) != c->naxes || cx_study_cells(s) != c->ncells)
        goto fallback;
    for (int i = 0; i < c->naxes; i++) {
        cx_axis_info a;
        cx_study_axis(s, i, &a);
        if (strcmp(a.name, c->axes[i].name) != 0)
            goto fallback;
        c->axes[i].kind = a.kind;
    }
    for (cx_idx cell = 0; cell < c->ncells; cell++) {
        if (cx_study_bind(s, cell, p) == CX_OK) {
            c->ntasks[cell] = p->ntasks;
        } else {
            cx_err_clear();
            c->ntasks[cell] = 0;
        }
    }
    c->ntasks_exact = 1;
    goto out;
fallback:
    cx_err_clear();
    for (cx_idx cell = 0; cell < c->ncells; cell++)
        c->ntasks[cell] = c->max_tasks;
    c->ntasks_exact = 0;
out:
    free(p);
    cx_study_destroy(&s);
}

int cx_rcube_open(const char *path, cx_rcube **out)
{
    int rc = CX_OK;
    cx_rcube *c = NULL;
    hid_t file = -1, d = -1, ot = -1, st = -1, sp = -1;
    int64_t v;
    H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
    CX_CALLOC(c, 1);
    snprintf(c->path, sizeof c->path, "%s", path);
    file = H5Fopen(path, H5F_ACC_RDONLY, H5P_DEFAULT);
    CX_REQUIRE(file >= 0, CX_ERR_INVALID, "%s is not a coexist cube (cannot open it as HDF5)",
               path);
    CX_REQUIRE(H5Aexists(file, "coexist_format") > 0, CX_ERR_INVALID, "%s is not a coexist cube",
               path);
    {
        char *s = NULL;
        CX_TRY(read_string_attr(file, "study_name", &s, path));
        snprintf(c->name, sizeof c->name, "%s", s);
        free(s);
    }
    CX_TRY(read_string_attr(file, "sweep_file", &c->source, path));
    CX_TRY(read_string_attr(file, "canonical", &c->canonical, path));
    CX_TRY(read_i64_attr(file, "cells", &v, path));
    c->ncells = v;
    CX_TRY(read_i64_attr(file, "max_runs", &v, path));
    c->max_runs = (int)v;
    CX_TRY(read_i64_attr(file, "max_tasks", &v, path));
    c->max_tasks = (int)v;
    CX_REQUIRE(c->ncells > 0 && c->max_runs > 0 && c->max_runs <= CX_MAX_RUNS && c->max_tasks > 0 &&
                   c->max_tasks <= CX_MAX_TASKS,
               CX_ERR_INVALID, "%s: cells, max_runs or max_tasks out of range", path);

    d = H5Dopen2(file, "multifunctional", H5P_DEFAULT);
    CX_REQUIRE(d >= 0, CX_ERR_INVALID, "%s is not a coexist cube: no multifunctional dataset",
               path);
    RQ_H5(sp = H5Dget_space(d), "H5Dget_space");
    int rank = H5Sget_simple_extent_ndims(sp);
    CX_REQUIRE(rank >= 1 && rank <= CX_MAX_AXES, CX_ERR_INVALID, "%s: bad rank %d", path, rank);
    for (int i = 0; i < rank; i++) {
        int is_axis = 0;
        CX_TRY(read_axis(d, (unsigned)i, &c->axes[c->naxes], &is_axis, path));
        if (is_axis)
            c->naxes++;
    }
    {
        cx_idx prod = 1;
        for (int i = 0; i < c->naxes; i++)
            prod *= c->axes[i].len;
        CX_REQUIRE(prod == c->ncells, CX_ERR_INVALID,
                   "%s: the axes give %lld cells, the attribute cells says %lld", path,
                   (long long)prod, (long long)c->ncells);
    }
    CX_ALLOC(c->done, c->ncells);
    CX_ALLOC(c->status, c->ncells);
    CX_ALLOC(c->multifunctional, c->ncells);
    CX_ALLOC(c->outcome, c->ncells * c->max_runs);
    CX_ALLOC(c->ntasks, c->ncells);
    CX_ALLOC(c->untrained_kinds, c->ncells * 3);
    RQ_H5(ot = outcome_type(), "enum");
    RQ_H5(st = status_type(), "enum");
    CX_TRY(read_all(file, "done", H5T_NATIVE_UCHAR, c->done, c->ncells, path));
    CX_TRY(read_all(file, "status", st, c->status, c->ncells, path));
    CX_TRY(
        read_all(file, "multifunctional", H5T_NATIVE_SCHAR, c->multifunctional, c->ncells, path));
    CX_TRY(read_all(file, "outcome", ot, c->outcome, c->ncells * c->max_runs, path));
    {
        static const char *const kinds[3] = {"untrained_fixed_points", "untrained_cycles",
                                             "untrained_aperiodic"};
        short *tmp = NULL;
        CX_ALLOC(tmp, c->ncells);
        for (int k = 0; k < 3 && rc == CX_OK; k++) {
            rc = read_all(file, kinds[k], H5T_NATIVE_SHORT, tmp, c->ncells, path);
            for (cx_idx i = 0; rc == CX_OK && i < c->ncells; i++)
                c->untrained_kinds[i * 3 + k] = tmp[i];
        }
        free(tmp);
        CX_TRY(rc);
    }
    bind_tasks(c);
    *out = c;
    c = NULL;
done:
    if (sp >= 0)
        H5Sclose(sp);
    if (d >= 0)
        H5Dclose(d);
    if (ot >= 0)
        H5Tclose(ot);
    if (st >= 0)
        H5Tclose(st);
    if (file >= 0)
        H5Fclose(file);
    cx_rcube_close(&c);
    return rc;
}

void cx_rcube_close(cx_rcube **pc)
{
    cx_rcube *c = *pc;
    if (c == NULL)
        return;
    for (int i = 0; i < c->naxes; i++) {
        if (c->axes[i].labels != NULL)
            for (cx_idx k = 0; k < c->axes[i].len; k++)
                free(c->axes[i].labels[k]);
        free(c->axes[i].labels);
        free(c->axes[i].values);
    }
    free(c->ntasks);
    free(c->untrained_kinds);
    free(c->outcome);
    free(c->multifunctional);
    free(c->status);
    free(c->done);
    free(c->canonical);
    free(c->source);
    free(c);
    *pc = NULL;
}

int cx_rcube_axis_find(const cx_rcube *c, const char *name)
{
    for (int i = 0; i < c->naxes; i++) {
        char alt[CX_NAME_LEN];
        snprintf(alt, sizeof alt, "%s", c->axes[i].name);
        for (char *q = alt; *q; q++)
            if (*q == '.')
                *q = '_';
        if (strcmp(c->axes[i].name, name) == 0 || strcmp(alt, name) == 0)
            return i;
    }
    return -1;
}

void cx_rcube_coords(const cx_rcube *c, cx_idx cell, cx_idx *coords)
{
    for (int i = c->naxes - 1; i >= 0; i--) {
        coords[i] = cell % c->axes[i].len;
        cell /= c->axes[i].len;
    }
}

int cx_rcube_cell_class(const cx_rcube *c, cx_idx cell)
{
    if (!c->done[cell])
        return CX_CLASS_NONE;
    if (c->status[cell] != CX_CELL_COMPUTED)
        return CX_CLASS_FAILED;
    if (c->multifunctional[cell] == 1)
        return CX_CLASS_MULTI;
    int count[CX_OUT_COUNT] = {0};
    const signed char *o = c->outcome + cell * c->max_runs;
    int nt = c->ntasks[cell] < c->max_runs ? c->ntasks[cell] : c->max_runs;
    for (int j = 0; j < nt; j++)
        if (o[j] >= 0 && o[j] < CX_OUT_COUNT)
            count[(int)o[j]]++;
    /* failure outcomes in increasing severity; ties go to the later one */
    static const int order[] = {CX_OUT_OTHER_TRAINED, CX_OUT_FIXED_POINT, CX_OUT_UNTRAINED_CYCLE,
                                CX_OUT_UNTRAINED_APERIODIC, CX_OUT_DIVERGED};
    static const int cls[] = {CX_CLASS_OTHER, CX_CLASS_FIXED, CX_CLASS_CYCLE, CX_CLASS_APERIODIC,
                              CX_CLASS_DIVERGED};
    int best = -1, best_n = 0;
    for (int i = 0; i < 5; i++)
        if (count[order[i]] > 0 && count[order[i]] >= best_n) {
            best = cls[i];
            best_n = count[order[i]];
        }
    /* A computed cell that is not multifunctional has a failing task run; if the stored
     * outcomes show none (a cube written by hand), call it failed rather than guess. */
    return best >= 0 ? best : CX_CLASS_FAILED;
}

/* Read the hyperslab of one cell of dataset `name` (extra trailing dims read whole). */
static int read_cell_slab(hid_t file, const cx_rcube *c, const cx_idx *coords, const char *name,
                          hid_t mtype, int extra, void *buf)
{
    int rc = CX_OK;
    const char *path = c->path;
    hid_t d = -1, fsp = -1, msp = -1;
    hsize_t start[CX_MAX_AXES + 2], count[CX_MAX_AXES + 2];
    int nd = c->naxes > 0 ? c->naxes : 1;
    for (int i = 0; i < nd; i++) {
        start[i] = c->naxes > 0 ? (hsize_t)coords[i] : 0;
        count[i] = 1;
    }
    if (extra >= 1) {
        start[nd] = 0;
        count[nd] = (hsize_t)c->max_runs;
    }
    if (extra >= 2) {
        start[nd + 1] = 0;
        count[nd + 1] = (hsize_t)c->max_tasks;
    }
    d = H5Dopen2(file, name, H5P_DEFAULT);
    CX_REQUIRE(d >= 0, CX_ERR_INVALID, "%s: no dataset %s", path, name);
    RQ_H5(fsp = H5Dget_space(d), "H5Dget_space");
    CX_REQUIRE(H5Sget_simple_extent_ndims(fsp) == nd + extra, CX_ERR_INVALID,
               "%s: dataset %s has the wrong rank", path, name);
    RQ_H5(H5Sselect_hyperslab(fsp, H5S_SELECT_SET, start, NULL, count, NULL), "select");
    hsize_t total = 1;
    for (int i = 0; i < nd + extra; i++)
        total *= count[i];
    RQ_H5(msp = H5Screate_simple(1, &total, NULL), "H5Screate_simple");
    RQ_H5(H5Dread(d, mtype, msp, fsp, H5P_DEFAULT, buf), name);
done:
    if (msp >= 0)
        H5Sclose(msp);
    if (fsp >= 0)
        H5Sclose(fsp);
    if (d >= 0)
        H5Dclose(d);
    return rc;
}

int cx_rcube_read_cell(const cx_rcube *c, cx_idx cell, cx_cell_result *r, int *done_out)
{
    int rc = CX_OK;
    const char *path = c->path;
    hid_t file = -1, ot = -1, st = -1;
    cx_idx coords[CX_MAX_AXES] = {0};
    signed char b8[CX_MAX_RUNS];
    double f[CX_MAX_RUNS * CX_MAX_TASKS];
    CX_REQUIRE(cell >= 0 && cell < c->ncells, CX_ERR_INVALID, "cell %lld is not in %s",
               (long long)cell, path);
    cx_rcube_coords(c, cell, coords);
    memset(r, 0, sizeof *r);
    r->cell = cell;
    file = H5Fopen(path, H5F_ACC_RDONLY, H5P_DEFAULT);
    CX_REQUIRE(file >= 0, CX_ERR_IO, "cannot open %s", path);
    RQ_H5(ot = outcome_type(), "enum");
    RQ_H5(st = status_type(), "enum");
    {
        unsigned char dn = 0;
        signed char s = 0, mf = 0;
        short un = 0, kinds[3] = {0, 0, 0};
        CX_TRY(read_cell_slab(file, c, coords, "untrained_fixed_points", H5T_NATIVE_SHORT, 0,
                              &kinds[0]));
        CX_TRY(read_cell_slab(file, c, coords, "untrained_cycles", H5T_NATIVE_SHORT, 0, &kinds[1]));
        CX_TRY(
            read_cell_slab(file, c, coords, "untrained_aperiodic", H5T_NATIVE_SHORT, 0, &kinds[2]));
        for (int k = 0; k < 3; k++)
            r->untrained_kinds[k] = kinds[k];
        CX_TRY(read_cell_slab(file, c, coords, "done", H5T_NATIVE_UCHAR, 0, &dn));
        CX_TRY(read_cell_slab(file, c, coords, "status", st, 0, &s));
        CX_TRY(read_cell_slab(file, c, coords, "multifunctional", H5T_NATIVE_SCHAR, 0, &mf));
        CX_TRY(read_cell_slab(file, c, coords, "untrained", H5T_NATIVE_SHORT, 0, &un));
        *done_out = dn != 0;
        r->status = s;
        r->multifunctional = mf;
        r->untrained = un;
    }
    CX_TRY(read_cell_slab(file, c, coords, "rho_unscaled", H5T_NATIVE_DOUBLE, 0, &r->rho_unscaled));
    CX_TRY(read_cell_slab(file, c, coords, "wout_norm", H5T_NATIVE_DOUBLE, 0, &r->wout_norm));
    CX_TRY(read_cell_slab(file, c, coords, "wout_square_norm", H5T_NATIVE_DOUBLE, 0,
                          &r->wout_square_norm));
    CX_TRY(read_cell_slab(file, c, coords, "outcome", ot, 1, b8));
    for (int j = 0; j < c->max_runs; j++)
        r->runs[j].outcome = b8[j];
    CX_TRY(read_cell_slab(file, c, coords, "attractor", H5T_NATIVE_SCHAR, 1, b8));
    for (int j = 0; j < c->max_runs; j++)
        r->runs[j].attractor = b8[j];
    CX_TRY(read_cell_slab(file, c, coords, "cluster", H5T_NATIVE_SCHAR, 1, b8));
    for (int j = 0; j < c->max_runs; j++)
        r->runs[j].cluster = b8[j];
    CX_TRY(read_cell_slab(file, c, coords, "distance", H5T_NATIVE_DOUBLE, 2, f));
    for (int j = 0; j < c->max_runs; j++) {
        for (int t = 0; t < CX_MAX_TASKS; t++)
            r->runs[j].distance[t] = t < c->max_tasks ? f[j * c->max_tasks + t] : NAN;
    }
    static const char *const per_run[] = {"coverage",   "roundness", "rotation", "period",
                                          "valid_time", "lyapunov",  "stop_time"};
    for (int v = 0; v < 7; v++) {
        CX_TRY(read_cell_slab(file, c, coords, per_run[v], H5T_NATIVE_DOUBLE, 1, f));
        for (int j = 0; j < c->max_runs; j++) {
            cx_run_metrics *m = &r->runs[j];
            double *dst[7] = {&m->coverage,   &m->roundness, &m->rotation, &m->period,
                              &m->valid_time, &m->lyapunov,  &m->stop_time};
            *dst[v] = f[j];
        }
    }
    for (int j = c->max_runs; j < CX_MAX_RUNS; j++) {
        cx_run_metrics *m = &r->runs[j];
        m->outcome = CX_OUT_NOT_RUN;
        m->attractor = -1;
        m->cluster = -1;
        for (int t = 0; t < CX_MAX_TASKS; t++)
            m->distance[t] = NAN;
        m->coverage = m->roundness = m->rotation = m->period = NAN;
        m->valid_time = m->lyapunov = m->stop_time = NAN;
    }
    r->ntasks = c->ntasks[cell];
    r->nruns = 0;
    for (int j = 0; j < c->max_runs; j++)
        if (r->runs[j].outcome != CX_OUT_NOT_RUN)
            r->nruns = j + 1;
done:
    if (ot >= 0)
        H5Tclose(ot);
    if (st >= 0)
        H5Tclose(st);
    if (file >= 0)
        H5Fclose(file);
    return rc;
}
