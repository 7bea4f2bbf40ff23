/* coexist engine: the cube, one self-describing HDF5 file per sweep.
 *
 * Layout: one 1-D coordinate dataset per axis (the axis name with '.' replaced by '_', the
 * original kept in the attribute `axis_name`), plus `run` and `task`, each made a dimension
 * scale and attached to every variable, so netCDF-4 and xarray readers see named dimensions
 * (HDF5 Dimension Scale specification, Folk, Koziol et al., The HDF Group 2005/2012). Results
 * are per run (axes..., run), per run and task (axes..., run, task) and per cell (axes...);
 * outcome labels and cell statuses are HDF5 enum types; float variables carry `units`,
 * `description` and a NaN `_FillValue` (the netCDF user guide's attribute conventions). The
 * per-cell wall time and the root attributes about the run (ranks, times) are not results.
 *
 * Why the file is made this way (parallel HDF5 1.10.8 on MPI-IO, see PLATFORM.md): every
 * dataset is created by one process with early allocation and its fill value written, the file
 * is closed and renamed into place, and only then opened by all ranks with the MPI-IO driver.
 * So a crash never leaves a cube whose metadata was never flushed, and while the sweep runs no
 * metadata changes at all: each rank writes its own cells with independent hyperslab writes to
 * the allocated datasets, which needs no collective and so never makes a worker wait. Metadata
 * (final attributes) changes only in cx_cube_finish, collectively, followed by a collective
 * flush. Filters are not used because they would force collective writes.
 */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include <sys/statvfs.h>

#include <mpi.h>
#include <hdf5.h>
#include <hdf5_hl.h>

#include "coexist/engine.h"
#include "coexist/error.h"

#ifndef CX_GIT_REVISION
#define CX_GIT_REVISION "unknown"
#endif

#define CX_CUBE_FORMAT 1
#define MAX_DIMS       (CX_MAX_AXES + 2)

enum { SHAPE_CELL, SHAPE_RUN, SHAPE_TASK };
enum { TY_F64, TY_I8, TY_I16, TY_U8, TY_OUTCOME, TY_STATUS };

typedef struct var_def {
    const char *name;
    int shape;
    int type;
    const char *units;
    const char *description;
} var_def;

/* The order is the order of creation; never reuse a name for another meaning. */
static const var_def vars[] = {
    {"outcome", SHAPE_RUN, TY_OUTCOME, NULL,
     "outcome of each closed-loop run: runs 0..tasks-1 start where each task's training ended, "
     "the rest from random starts"},
    {"attractor", SHAPE_RUN, TY_I8, "1",
     "index of the trained attractor a run landed on, -1 for none or not run"},
    {"distance", SHAPE_TASK, TY_F64, "signal units",
     "mean nearest-neighbour distance of the run's tail to each trained attractor's cloud"},
    {"coverage", SHAPE_RUN, TY_F64, "1",
     "fraction of the matched (else own) attractor's cloud with a tail point nearby"},
    {"roundness", SHAPE_RUN, TY_F64, "signal units",
     "peak-to-valley roundness of the tail in the plane of the first two coordinates"},
    {"rotation", SHAPE_RUN, TY_F64, "1",
     "rotation sense of the tail in the first two coordinates: +1 anticlockwise, -1 clockwise"},
    {"period", SHAPE_RUN, TY_F64, "time units", "period of the tail when it recurs"},
    {"valid_time", SHAPE_RUN, TY_F64, "time units",
     "valid prediction time against the true continuation"},
    {"lyapunov", SHAPE_RUN, TY_F64, "1/time unit",
     "largest Lyapunov exponent of the run where it was asked for"},
    {"stop_time", SHAPE_RUN, TY_F64, "time units", "time at which the run ended"},
    {"status", SHAPE_CELL, TY_STATUS, NULL, "state of the cell: computed, failed (why), ..."},
    {"multifunctional", SHAPE_CELL, TY_I8, "1",
     "1 when every task's own run is reconstructed, 0 when not, -1 not computed"},
    {"untrained", SHAPE_CELL, TY_I16, "attractors",
     "distinct untrained attractors the runs ended on (fixed points, periodic orbits, aperiodic), "
     "-1 not computed"},
    {"untrained_fixed_points", SHAPE_CELL, TY_I16, "attractors",
     "distinct fixed points the runs ended on, -1 not computed"},
    {"untrained_cycles", SHAPE_CELL, TY_I16, "attractors",
     "distinct untrained periodic orbits the runs ended on, -1 not computed"},
    {"untrained_aperiodic", SHAPE_CELL, TY_I16, "attractors",
     "distinct untrained aperiodic attractors the runs ended on, -1 not computed"},
    {"cluster", SHAPE_RUN, TY_I8, "1",
     "which of the cell's distinct untrained attractors the run ended on, -1 none or not run"},
    {"rho_unscaled", SHAPE_CELL, TY_F64, "1",
     "largest eigenvalue modulus of the unscaled recurrent matrix"},
    {"wout_norm", SHAPE_CELL, TY_F64, "1", "Frobenius norm of the trained readout"},
    {"wout_square_norm", SHAPE_CELL, TY_F64, "1",
     "Frobenius norm of the readout block on the squared states"},
    {"done", SHAPE_CELL, TY_U8, "1", "1 when the cell's result is in this file"},
    {"wall_time", SHAPE_CELL, TY_F64, "s",
     "wall-clock seconds to compute the cell on its rank (cells computed as one group share the "
     "group's time evenly); not a result (depends on the machine and the schedule)"},
};
#define NVARS ((int)(sizeof vars / sizeof vars[0]))

struct cx_cube {
    hid_t file;
    hid_t dset[NVARS];
    hid_t outcome_type, status_type;
    const cx_plan *plan;
    int ndims; /* grid dims (>= 1) */
    hsize_t dims[MAX_DIMS];
    char path[CX_PATH_LEN];
};

static int h5fail(const char *what, const char *path)
{
    return CX_FAIL(CX_ERR_HDF5, "HDF5: %s failed for %s", what, path);
}

/* Every write of a cube goes through H5W, where a fault-injection build can make it fail
 * (cx_fault_hdf5_write, src/core/error.c). */
#define H5W(fn, ...) (cx_fault_hdf5_write() ? (herr_t)-1 : fn(__VA_ARGS__))

#define CX_H5(expr, what)                                                                          \
    do {                                                                                           \
        if ((expr) < 0)                                                                            \
            CX_RAISE(CX_ERR_HDF5, "HDF5: %s failed for %s", (what), path);                         \
    } while (0)

static void quiet_hdf5(void)
{
    H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
}

static hid_t make_outcome_type(void)
{
    hid_t t = H5Tenum_create(H5T_NATIVE_SCHAR);
    if (t < 0)
        return t;
    for (int k = 0; k < CX_OUT_COUNT; k++) {
        signed char v = (signed char)k;
        if (H5Tenum_insert(t, cx_outcome_name(k), &v) < 0) {
            H5Tclose(t);
            return -1;
        }
    }
    return t;
}

static hid_t make_status_type(void)
{
    hid_t t = H5Tenum_create(H5T_NATIVE_SCHAR);
    if (t < 0)
        return t;
    for (int k = 0; k <= CX_CELL_SKIPPED; k++) {
        signed char v = (signed char)k;
        if (H5Tenum_insert(t, cx_cell_status_name(k), &v) < 0) {
            H5Tclose(t);
            return -1;
        }
    }
    return t;
}

static int grid_dims(const cx_plan *p, hsize_t *dims)
{
    if (p->naxes == 0) {
        dims[0] = 1;
        return 1;
    }
    for (int i = 0; i < p->naxes; i++)
        dims[i] = (hsize_t)p->axes[i].len;
    return p->naxes;
}

static int var_rank(int ndims, int shape)
{
    return ndims + (shape == SHAPE_RUN ? 1 : shape == SHAPE_TASK ? 2 : 0);
}

static hid_t mem_type(const cx_cube *c, int type)
{
    switch (type) {
    case TY_F64:
        return H5T_NATIVE_DOUBLE;
    case TY_I8:
        return H5T_NATIVE_SCHAR;
    case TY_I16:
        return H5T_NATIVE_SHORT;
    case TY_U8:
        return H5T_NATIVE_UCHAR;
    case TY_OUTCOME:
        return c->outcome_type;
    default:
        return c->status_type;
    }
}

static hid_t file_type(int type, hid_t outcome_type, hid_t status_type)
{
    switch (type) {
    case TY_F64:
        return H5T_IEEE_F64LE;
    case TY_I8:
        return H5T_STD_I8LE;
    case TY_I16:
        return H5T_STD_I16LE;
    case TY_U8:
        return H5T_STD_U8LE;
    case TY_OUTCOME:
        return outcome_type;
    default:
        return status_type;
    }
}

static size_t type_size(int type)
{
    return type == TY_F64 ? 8 : type == TY_I16 ? 2 : 1;
}

static int put_string_attr(hid_t obj, const char *name, const char *value, const char *path)
{
    int rc = CX_OK;
    hid_t t = -1, sp = -1, a = -1;
    size_t len = strlen(value);
    CX_H5(t = H5Tcopy(H5T_C_S1), "H5Tcopy");
    CX_H5(H5Tset_size(t, len > 0 ? len : 1), "H5Tset_size");
    CX_H5(H5Tset_strpad(t, H5T_STR_NULLTERM), "H5Tset_strpad");
    CX_H5(sp = H5Screate(H5S_SCALAR), "H5Screate");
    if (H5Aexists(obj, name) > 0)
        CX_H5(H5Adelete(obj, name), "H5Adelete");
    CX_H5(a = H5Acreate2(obj, name, t, sp, H5P_DEFAULT, H5P_DEFAULT), name);
    if (H5W(H5Awrite, a, t, len > 0 ? value : " ") < 0)
        CX_RAISE(CX_ERR_HDF5, "HDF5: writing attribute %s failed for %s", name, path);
done:
    if (a >= 0)
        H5Aclose(a);
    if (sp >= 0)
        H5Sclose(sp);
    if (t >= 0)
        H5Tclose(t);
    return rc;
}

static int put_num_attr(hid_t obj, const char *name, hid_t ftype, hid_t mtype, const void *v,
                        hsize_t n, const char *path)
{
    int rc = CX_OK;
    hid_t sp = -1, a = -1;
    CX_H5(sp = (n == 0 ? H5Screate(H5S_SCALAR) : H5Screate_simple(1, &n, NULL)), "H5Screate");
    if (H5Aexists(obj, name) > 0) {
        CX_H5(a = H5Aopen(obj, name, H5P_DEFAULT), name);
    } else {
        CX_H5(a = H5Acreate2(obj, name, ftype, sp, H5P_DEFAULT, H5P_DEFAULT), name);
    }
    if (H5W(H5Awrite, a, mtype, v) < 0)
        CX_RAISE(CX_ERR_HDF5, "HDF5: writing attribute %s failed for %s", name, path);
done:
    if (a >= 0)
        H5Aclose(a);
    if (sp >= 0)
        H5Sclose(sp);
    return rc;
}

static int get_string_attr(hid_t obj, const char *name, char **out, const char *path)
{
    int rc = CX_OK;
    hid_t a = -1, t = -1, mt = -1;
    char *s = NULL;
    CX_H5(a = H5Aopen(obj, name, H5P_DEFAULT), name);
    CX_H5(t = H5Aget_type(a), "H5Aget_type");
    CX_REQUIRE(H5Tget_class(t) == H5T_STRING && !H5Tis_variable_str(t), CX_ERR_INVALID,
               "attribute %s of %s is not a fixed-length string", name, path);
    size_t n = H5Tget_size(t);
    CX_ALLOC(s, n + 1);
    CX_H5(mt = H5Tcopy(H5T_C_S1), "H5Tcopy");
    CX_H5(H5Tset_size(mt, n + 1), "H5Tset_size");
    CX_H5(H5Aread(a, mt, s), name);
    s[n] = '\0';
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

static int get_i64_attr(hid_t obj, const char *name, int64_t *v, const char *path)
{
    int rc = CX_OK;
    hid_t a = -1;
    CX_H5(a = H5Aopen(obj, name, H5P_DEFAULT), name);
    CX_H5(H5Aread(a, H5T_NATIVE_INT64, v), name);
done:
    if (a >= 0)
        H5Aclose(a);
    return rc;
}

static void coord_name(const char *axis, char *out, size_t n)
{
    snprintf(out, n, "%s", axis);
    for (char *q = out; *q; q++)
        if (*q == '.' || *q == '/' || *q == ' ')
            *q = '_';
    for (int v = 0; v < NVARS; v++)
        if (strcmp(out, vars[v].name) == 0 || strcmp(out, "run") == 0 || strcmp(out, "task") == 0) {
            size_t len = strlen(out);
            if (len + 6 > n)
                len = n - 6;
            memmove(out + 5, out, len);
            memcpy(out, "axis_", 5);
            out[len + 5] = '\0';
            break;
        }
}

static void iso_time(double t, char *out, size_t n)
{
    time_t s = (time_t)t;
    struct tm tm;
    gmtime_r(&s, &tm);
    strftime(out, n, "%Y-%m-%dT%H:%M:%SZ", &tm);
}

/* One 1-D coordinate variable made a dimension scale. */
static int make_scale(hid_t file, const char *name, hid_t ftype, hid_t mtype, const void *values,
                      hsize_t len, const char *units, const char *description, hid_t *out,
                      const char *path)
{
    int rc = CX_OK;
    hid_t sp = -1, d = -1;
    CX_H5(sp = H5Screate_simple(1, &len, NULL), "H5Screate_simple");
    CX_H5(d = H5Dcreate2(file, name, ftype, sp, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), name);
    if (H5W(H5Dwrite, d, mtype, H5S_ALL, H5S_ALL, H5P_DEFAULT, values) < 0)
        CX_RAISE(CX_ERR_HDF5, "HDF5: writing dataset %s failed for %s", name, path);
    CX_H5(H5DSset_scale(d, name), "H5DSset_scale");
    CX_TRY(put_string_attr(d, "units", units, path));
    CX_TRY(put_string_attr(d, "description", description, path));
    *out = d;
    d = -1;
done:
    if (d >= 0)
        H5Dclose(d);
    if (sp >= 0)
        H5Sclose(sp);
    return rc;
}

static int write_root_attrs(hid_t file, const cx_plan *p, int ranks, double start, const char *path)
{
    int rc = CX_OK;
    char hex[32], when[64];
    int64_t fmt = CX_CUBE_FORMAT, cells = p->ncells, zero = 0;
    int64_t mr = p->max_runs, mt = p->max_tasks, nr = ranks;
    uint64_t hash = p->hash;
    snprintf(hex, sizeof hex, "%016llx", (unsigned long long)p->hash);
    iso_time(start, when, sizeof when);
    CX_TRY(put_num_attr(file, "coexist_format", H5T_STD_I64LE, H5T_NATIVE_INT64, &fmt, 0, path));
    CX_TRY(put_string_attr(file, "title", "coexist sweep cube", path));
    CX_TRY(put_string_attr(file, "study_name", p->name, path));
    CX_TRY(put_string_attr(file, "sweep_file", p->source, path));
    CX_TRY(put_string_attr(file, "canonical", p->canonical, path));
    CX_TRY(put_string_attr(file, "study_hash", hex, path));
    CX_TRY(put_num_attr(file, "study_hash_u64", H5T_STD_U64LE, H5T_NATIVE_UINT64, &hash, 0, path));
    CX_TRY(put_string_attr(file, "program_version", CX_VERSION, path));
    CX_TRY(put_string_attr(file, "git_revision", CX_GIT_REVISION, path));
    CX_TRY(put_num_attr(file, "cells", H5T_STD_I64LE, H5T_NATIVE_INT64, &cells, 0, path));
    CX_TRY(put_num_attr(file, "max_runs", H5T_STD_I64LE, H5T_NATIVE_INT64, &mr, 0, path));
    CX_TRY(put_num_attr(file, "max_tasks", H5T_STD_I64LE, H5T_NATIVE_INT64, &mt, 0, path));
    CX_TRY(put_num_attr(file, "ranks", H5T_STD_I64LE, H5T_NATIVE_INT64, &nr, 0, path));
    CX_TRY(put_string_attr(file, "created", when, path));
    CX_TRY(put_string_attr(file, "start_time", when, path));
    CX_TRY(put_string_attr(file, "end_time", "", path));
    CX_TRY(put_num_attr(file, "complete", H5T_STD_I64LE, H5T_NATIVE_INT64, &zero, 0, path));
    static const char *const stages[] = {"stage_networks", "stage_spectral_radii", "stage_inputs",
                                         "stage_drives",   "stage_solves",         "stage_probes",
                                         "cells_computed"};
    for (size_t k = 0; k < sizeof stages / sizeof stages[0]; k++)
        CX_TRY(put_num_attr(file, stages[k], H5T_STD_I64LE, H5T_NATIVE_INT64, &zero, 0, path));
done:
    return rc;
}

/* Create every variable of one cube in an open (serial) file. */
static int create_layout(hid_t file, const cx_plan *p, const char *path)
{
    int rc = CX_OK;
    hid_t scales[MAX_DIMS], outcome_t = -1, status_t = -1, sp = -1, dcpl = -1, d = -1;
    hsize_t dims[MAX_DIMS];
    double *values = NULL;
    int *ids = NULL;
    int nscales = 0;
    for (int i = 0; i < MAX_DIMS; i++)
        scales[i] = -1;
    int ndims = grid_dims(p, dims);
    dims[ndims] = (hsize_t)p->max_runs;
    dims[ndims + 1] = (hsize_t)p->max_tasks;

    for (int i = 0; i < ndims; i++) {
        char name[CX_NAME_LEN + 8];
        if (p->naxes == 0) {
            double zero = 0.0;
            CX_TRY(make_scale(file, "cell", H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, &zero, 1, "1",
                              "the only cell of a study without axes", &scales[nscales++], path));
            break;
        }
        const cx_plan_axis *a = &p->axes[i];
        char desc[256];
        coord_name(a->name, name, sizeof name);
        snprintf(desc, sizeof desc, "values of the sweep axis %s%s", a->name,
                 a->kind == CX_AXIS_CATEGORICAL ? " (indices into the attribute labels)" : "");
        CX_TRY(make_scale(file, name, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, a->values, (hsize_t)a->len,
                          a->units, desc, &scales[nscales], path));
        CX_TRY(put_string_attr(scales[nscales], "axis_name", a->name, path));
        if (a->labels != NULL) {
            size_t total = 1;
            for (cx_idx k = 0; k < a->len; k++)
                total += strlen(a->labels[k]) + 1;
            char *joined = cx_malloc_array(total, 1);
            if (joined == NULL)
                CX_RAISE(CX_ERR_NOMEM, "out of memory joining labels");
            joined[0] = '\0';
            for (cx_idx k = 0; k < a->len; k++) {
                strcat(joined, a->labels[k]);
                if (k + 1 < a->len)
                    strcat(joined, " ");
            }
            rc = put_string_attr(scales[nscales], "labels", joined, path);
            free(joined);
            CX_TRY(rc);
        }
        nscales++;
    }
    cx_idx nmax = p->max_runs > p->max_tasks ? p->max_runs : p->max_tasks;
    CX_ALLOC(ids, nmax);
    for (cx_idx k = 0; k < nmax; k++)
        ids[k] = (int)k;
    CX_TRY(make_scale(file, "run", H5T_STD_I32LE, H5T_NATIVE_INT, ids, (hsize_t)p->max_runs, "1",
                      "closed-loop run: 0..tasks-1 from the end of each task's training, then "
                      "random starts",
                      &scales[ndims], path));
    CX_TRY(make_scale(file, "task", H5T_STD_I32LE, H5T_NATIVE_INT, ids, (hsize_t)p->max_tasks, "1",
                      "trained task (attractor) index", &scales[ndims + 1], path));

    CX_H5(outcome_t = make_outcome_type(), "enum outcome");
    CX_H5(status_t = make_status_type(), "enum status");
    /* netCDF-4 readers see an enum only as a named (committed) datatype. */
    CX_H5(H5Tcommit2(file, "outcome_labels", outcome_t, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT),
          "H5Tcommit2 outcome_labels");
    CX_H5(H5Tcommit2(file, "cell_status_labels", status_t, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT),
          "H5Tcommit2 cell_status_labels");
    for (int v = 0; v < NVARS; v++) {
        const var_def *vd = &vars[v];
        int r = var_rank(ndims, vd->shape);
        CX_H5(sp = H5Screate_simple(r, dims, NULL), "H5Screate_simple");
        CX_H5(dcpl = H5Pcreate(H5P_DATASET_CREATE), "H5Pcreate");
        CX_H5(H5Pset_layout(dcpl, H5D_CONTIGUOUS), "H5Pset_layout");
        CX_H5(H5Pset_alloc_time(dcpl, H5D_ALLOC_TIME_EARLY), "H5Pset_alloc_time");
        CX_H5(H5Pset_fill_time(dcpl, H5D_FILL_TIME_IFSET), "H5Pset_fill_time");
        double nan = NAN;
        signed char m1 = -1, z = 0;
        short m1s = -1;
        unsigned char zu = 0;
        const void *fill = NULL;
        hid_t ft = file_type(vd->type, outcome_t, status_t), fmt;
        switch (vd->type) {
        case TY_F64:
            fill = &nan;
            fmt = H5T_NATIVE_DOUBLE;
            break;
        case TY_I8:
            fill = &m1;
            fmt = H5T_NATIVE_SCHAR;
            break;
        case TY_I16:
            fill = &m1s;
            fmt = H5T_NATIVE_SHORT;
            break;
        case TY_U8:
            fill = &zu;
            fmt = H5T_NATIVE_UCHAR;
            break;
        default:
            fill = &z;
            fmt = ft;
            break;
        }
        CX_H5(H5Pset_fill_value(dcpl, fmt, fill), "H5Pset_fill_value");
        CX_H5(d = H5Dcreate2(file, vd->name, ft, sp, H5P_DEFAULT, dcpl, H5P_DEFAULT), vd->name);
        if (vd->units != NULL)
            CX_TRY(put_string_attr(d, "units", vd->units, path));
        CX_TRY(put_string_attr(d, "description", vd->description, path));
        if (vd->type == TY_F64)
            CX_TRY(put_num_attr(d, "_FillValue", H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, &nan, 0, path));
        if (vd->type == TY_OUTCOME || vd->type == TY_STATUS) {
            char meanings[512] = "";
            int n = vd->type == TY_OUTCOME ? CX_OUT_COUNT : CX_CELL_SKIPPED + 1;
            for (int k = 0; k < n; k++) {
                const char *nm =
                    vd->type == TY_OUTCOME ? cx_outcome_name(k) : cx_cell_status_name(k);
                strncat(meanings, nm, sizeof meanings - strlen(meanings) - 2);
                if (k + 1 < n)
                    strncat(meanings, " ", sizeof meanings - strlen(meanings) - 1);
            }
            CX_TRY(put_string_attr(d, "labels", meanings, path));
        }
        for (int k = 0; k < r; k++)
            CX_H5(H5DSattach_scale(d, scales[k], (unsigned)k), "H5DSattach_scale");
        H5Dclose(d);
        d = -1;
        H5Pclose(dcpl);
        dcpl = -1;
        H5Sclose(sp);
        sp = -1;
    }
done:
    free(values);
    free(ids);
    if (d >= 0)
        H5Dclose(d);
    if (dcpl >= 0)
        H5Pclose(dcpl);
    if (sp >= 0)
        H5Sclose(sp);
    if (outcome_t >= 0)
        H5Tclose(outcome_t);
    if (status_t >= 0)
        H5Tclose(status_t);
    for (int i = 0; i < MAX_DIMS; i++)
        if (scales[i] >= 0)
            H5Dclose(scales[i]);
    return rc;
}

static hid_t serial_fapl(int locking)
{
    hid_t fapl = H5Pcreate(H5P_FILE_ACCESS);
    if (fapl < 0)
        return fapl;
    /* 1.8 format or later: attributes larger than 64 KiB (a long sweep file) go to dense
     * storage, which netCDF-4 readers handle. */
    if (H5Pset_libver_bounds(fapl, H5F_LIBVER_V18, H5F_LIBVER_LATEST) < 0 ||
        H5Pset_file_locking(fapl, locking ? 1 : 0, 1) < 0) {
        H5Pclose(fapl);
        return -1;
    }
    return fapl;
}

/* Bytes the early-allocated datasets of a cube take, plus its metadata: 32 KiB and 1 KiB per
 * dataset (a 96-cell cube of 28 datasets measured 65 KB, of which 26 KB were data). */
static double cube_bytes(const cx_plan *p)
{
    double cells = (double)p->ncells, runs = (double)p->max_runs, tasks = (double)p->max_tasks;
    double per_cell = 0.0;
    for (int v = 0; v < NVARS; v++) {
        double size = vars[v].type == TY_F64 ? 8.0 : vars[v].type == TY_I16 ? 2.0 : 1.0;
        double n = vars[v].shape == SHAPE_CELL  ? 1.0
                   : vars[v].shape == SHAPE_RUN ? runs
                                                : runs * tasks;
        per_cell += size * n;
    }
    return cells * per_cell + 32768.0 + 1024.0 * (double)NVARS;
}

/* Refuse to start a cube that the file system cannot hold: HDF5 cannot close a file whose
 * metadata flush failed for lack of space, and the open id then breaks MPI_Finalize. */
static int check_space(const char *path, const cx_plan *p)
{
    char dir[CX_PATH_LEN];
    snprintf(dir, sizeof dir, "%s", path);
    char *slash = strrchr(dir, '/');
    if (slash == NULL)
        snprintf(dir, sizeof dir, ".");
    else if (slash == dir)
        dir[1] = '\0';
    else
        *slash = '\0';
    struct statvfs fs;
    if (statvfs(dir, &fs) != 0)
        return CX_OK; /* unknown: let the create report what goes wrong */
    double have = (double)fs.f_bavail * (double)fs.f_frsize;
    double need = 1.05 * cube_bytes(p);
    if (have < need)
        return CX_FAIL(CX_ERR_IO,
                       "no space for %s: the cube needs about %.3g MiB and %s has %.3g "
                       "MiB free; free some space or choose another directory",
                       path, need / 1048576.0, dir, have / 1048576.0);
    return CX_OK;
}

int cx_cube_create(const char *path, const cx_plan *p, int ranks, double start_time)
{
    int rc = CX_OK;
    hid_t fapl = -1, fcpl = -1, file = -1;
    char tmp[CX_PATH_LEN + 16];
    int made = 0;
    quiet_hdf5();
    CX_TRY(check_space(path, p));
    snprintf(tmp, sizeof tmp, "%s.creating", path);
    unlink(tmp);
    CX_H5(fapl = serial_fapl(1), "H5Pcreate");
    /* Links in creation order, as netCDF-4 writes them: its reader then meets the committed
     * enum types before the variables that use them. */
    CX_H5(fcpl = H5Pcreate(H5P_FILE_CREATE), "H5Pcreate");
    CX_H5(H5Pset_link_creation_order(fcpl, H5P_CRT_ORDER_TRACKED | H5P_CRT_ORDER_INDEXED),
          "H5Pset_link_creation_order");
    file = H5Fcreate(tmp, H5F_ACC_EXCL, fcpl, fapl);
    if (file < 0)
        CX_RAISE(CX_ERR_IO, "cannot create %s: %s", tmp, strerror(errno));
    made = 1;
    CX_TRY(write_root_attrs(file, p, ranks, start_time, path));
    CX_TRY(create_layout(file, p, path));
    CX_H5(H5W(H5Fflush, file, H5F_SCOPE_GLOBAL), "flushing");
    CX_H5(H5Fclose(file), "H5Fclose");
    file = -1;
    {
        int fd = open(tmp, O_RDONLY);
        if (fd >= 0) {
            fsync(fd);
            close(fd);
        }
    }
    if (rename(tmp, path) != 0)
        CX_RAISE(CX_ERR_IO, "cannot rename %s to %s: %s", tmp, path, strerror(errno));
    made = 0;
done:
    if (file >= 0)
        H5Fclose(file);
    if (fapl >= 0)
        H5Pclose(fapl);
    if (fcpl >= 0)
        H5Pclose(fcpl);
    if (made)
        unlink(tmp);
    return rc;
}

int cx_cube_probe(const char *path, int *kind)
{
    int rc = CX_OK;
    hid_t fapl = -1, file = -1;
    quiet_hdf5();
    *kind = CX_CUBE_ABSENT;
    if (access(path, F_OK) != 0)
        return CX_OK;
    *kind = CX_CUBE_FOREIGN;
    CX_H5(fapl = serial_fapl(0), "H5Pcreate");
    if (H5Fis_hdf5(path) <= 0)
        goto done;
    file = H5Fopen(path, H5F_ACC_RDONLY, fapl);
    if (file < 0)
        goto done;
    int64_t fmt = 0;
    if (H5Aexists(file, "coexist_format") > 0 &&
        get_i64_attr(file, "coexist_format", &fmt, path) == CX_OK && fmt == CX_CUBE_FORMAT)
        *kind = CX_CUBE_OURS;
    cx_err_clear();
done:
    if (file >= 0)
        H5Fclose(file);
    if (fapl >= 0)
        H5Pclose(fapl);
    return rc;
}

/* Keys present in one canonical text and not the other, or with other values, joined. */
static void diff_keys(const char *a, const char *b, char *out, size_t n)
{
    out[0] = '\0';
    const char *texts[2] = {a, b};
    for (int pass = 0; pass < 2; pass++) {
        const char *s = texts[pass], *other = texts[1 - pass];
        while (*s) {
            const char *eol = strchr(s, '\n');
            size_t len = eol ? (size_t)(eol - s) : strlen(s);
            const char *colon = memchr(s, ':', len);
            size_t klen = colon ? (size_t)(colon - s) : len;
            /* Is the identical line in the other text? */
            int same = 0, key_seen = 0;
            const char *o = other;
            while (*o) {
                const char *oe = strchr(o, '\n');
                size_t ol = oe ? (size_t)(oe - o) : strlen(o);
                if (ol == len && memcmp(o, s, len) == 0)
                    same = 1;
                o += ol + (oe ? 1 : 0);
            }
            char key[256];
            snprintf(key, sizeof key, "%.*s", (int)(klen < 200 ? klen : 200), s);
            if (!same) {
                char *hit = strstr(out, key);
                key_seen = hit != NULL && (hit == out || hit[-1] == ' ') &&
                           (hit[strlen(key)] == ',' || hit[strlen(key)] == '\0');
                if (!key_seen && strlen(out) + strlen(key) + 3 < n) {
                    if (out[0])
                        strcat(out, ", ");
                    strcat(out, key);
                }
            }
            s += len + (eol ? 1 : 0);
        }
    }
}

int cx_cube_check(const char *path, const cx_plan *p)
{
    int rc = CX_OK;
    hid_t fapl = -1, file = -1;
    char *canon = NULL;
    quiet_hdf5();
    CX_H5(fapl = serial_fapl(0), "H5Pcreate");
    file = H5Fopen(path, H5F_ACC_RDONLY, fapl);
    if (file < 0)
        CX_RAISE(CX_ERR_INVALID, "%s is not a coexist cube (not an HDF5 file)", path);
    CX_TRY(get_string_attr(file, "canonical", &canon, path));
    if (strcmp(canon, p->canonical) != 0) {
        char keys[2048];
        diff_keys(canon, p->canonical, keys, sizeof keys);
        CX_RAISE(CX_ERR_MISMATCH,
                 "%s was made from a different sweep file; these keys differ: %s (use --fresh "
                 "to start over, which deletes that cube, or write to another file)",
                 path, keys[0] ? keys : "(formatting only)");
    }
done:
    free(canon);
    if (file >= 0)
        H5Fclose(file);
    if (fapl >= 0)
        H5Pclose(fapl);
    return rc;
}

int cx_cube_open(MPI_Comm comm, const char *path, const cx_plan *p, cx_cube **out)
{
    int rc = CX_OK;
    cx_cube *c = NULL;
    hid_t fapl = -1;
    MPI_Info info = MPI_INFO_NULL;
    quiet_hdf5();
    CX_CALLOC(c, 1);
    c->file = -1;
    for (int v = 0; v < NVARS; v++)
        c->dset[v] = -1;
    c->outcome_type = c->status_type = -1;
    c->plan = p;
    snprintf(c->path, sizeof c->path, "%s", path);
    c->ndims = grid_dims(p, c->dims);
    c->dims[c->ndims] = (hsize_t)p->max_runs;
    c->dims[c->ndims + 1] = (hsize_t)p->max_tasks;
    CX_H5(fapl = H5Pcreate(H5P_FILE_ACCESS), "H5Pcreate");
    /* Ranks write interleaved cells independently: forbid ROMIO's read-modify-write data
     * sieving, which could write back a neighbour's stale bytes (OMPIO does not sieve). */
    if (MPI_Info_create(&info) != MPI_SUCCESS ||
        MPI_Info_set(info, "romio_ds_write", "disable") != MPI_SUCCESS)
        CX_RAISE(CX_ERR_MPI, "MPI_Info for %s failed", path);
    CX_H5(H5Pset_fapl_mpio(fapl, comm, info), "H5Pset_fapl_mpio");
    CX_H5(H5Pset_libver_bounds(fapl, H5F_LIBVER_V18, H5F_LIBVER_LATEST), "libver");
    c->file = H5Fopen(path, H5F_ACC_RDWR, fapl);
    if (c->file < 0)
        CX_RAISE(CX_ERR_IO, "cannot open %s for writing with MPI-IO", path);
    int64_t h = 0;
    {
        hid_t a = H5Aopen(c->file, "study_hash_u64", H5P_DEFAULT);
        CX_H5(a, "study_hash_u64");
        herr_t e = H5Aread(a, H5T_NATIVE_UINT64, &h);
        H5Aclose(a);
        CX_H5(e, "H5Aread");
    }
    CX_REQUIRE((uint64_t)h == p->hash, CX_ERR_MISMATCH, "%s belongs to another study", path);
    CX_H5(c->outcome_type = make_outcome_type(), "enum");
    CX_H5(c->status_type = make_status_type(), "enum");
    for (int v = 0; v < NVARS; v++)
        CX_H5(c->dset[v] = H5Dopen2(c->file, vars[v].name, H5P_DEFAULT), vars[v].name);
    *out = c;
    c = NULL;
done:
    if (info != MPI_INFO_NULL)
        MPI_Info_free(&info);
    if (fapl >= 0)
        H5Pclose(fapl);
    if (c != NULL) {
        for (int v = 0; v < NVARS; v++)
            if (c->dset[v] >= 0)
                H5Dclose(c->dset[v]);
        if (c->outcome_type >= 0)
            H5Tclose(c->outcome_type);
        if (c->status_type >= 0)
            H5Tclose(c->status_type);
        if (c->file >= 0)
            H5Fclose(c->file);
        free(c);
    }
    return rc;
}

int cx_cube_read_done(cx_cube *c, uint8_t *done)
{
    int rc = CX_OK;
    const char *path = c->path;
    for (int v = 0; v < NVARS; v++)
        if (strcmp(vars[v].name, "done") == 0)
            CX_H5(H5Dread(c->dset[v], H5T_NATIVE_UCHAR, H5S_ALL, H5S_ALL, H5P_DEFAULT, done),
                  "read done");
done:
    return rc;
}

typedef struct decoded {
    cx_cell_result r;
    double wall;
} decoded;

static int cmp_decoded(const void *a, const void *b)
{
    const decoded *x = a, *y = b;
    return (x->r.cell > y->r.cell) - (x->r.cell < y->r.cell);
}

/* The value of variable v for run k (and task t) of one result, stored at out. */
static void value_of(int v, const decoded *d, int k, int t, unsigned char *out)
{
    const cx_cell_result *r = &d->r;
    const cx_run_metrics *m = &r->runs[k < CX_MAX_RUNS ? k : 0];
    double x = NAN;
    const char *name = vars[v].name;
    switch (vars[v].type) {
    case TY_OUTCOME: {
        signed char s = (signed char)m->outcome;
        memcpy(out, &s, 1);
        return;
    }
    case TY_STATUS: {
        signed char s = (signed char)r->status;
        memcpy(out, &s, 1);
        return;
    }
    case TY_U8:
        *out = 1; /* done */
        return;
    case TY_I8: {
        int v8 = strcmp(name, "attractor") == 0 ? m->attractor
                 : strcmp(name, "cluster") == 0 ? m->cluster
                                                : r->multifunctional;
        signed char s = (signed char)v8;
        memcpy(out, &s, 1);
        return;
    }
    case TY_I16: {
        int v16 = strcmp(name, "untrained_fixed_points") == 0 ? r->untrained_kinds[0]
                  : strcmp(name, "untrained_cycles") == 0     ? r->untrained_kinds[1]
                  : strcmp(name, "untrained_aperiodic") == 0  ? r->untrained_kinds[2]
                                                              : r->untrained;
        short s = (short)v16;
        memcpy(out, &s, 2);
        return;
    }
    default:
        break;
    }
    if (strcmp(name, "distance") == 0)
        x = m->distance[t];
    else if (strcmp(name, "coverage") == 0)
        x = m->coverage;
    else if (strcmp(name, "roundness") == 0)
        x = m->roundness;
    else if (strcmp(name, "rotation") == 0)
        x = m->rotation;
    else if (strcmp(name, "period") == 0)
        x = m->period;
    else if (strcmp(name, "valid_time") == 0)
        x = m->valid_time;
    else if (strcmp(name, "lyapunov") == 0)
        x = m->lyapunov;
    else if (strcmp(name, "stop_time") == 0)
        x = m->stop_time;
    else if (strcmp(name, "rho_unscaled") == 0)
        x = r->rho_unscaled;
    else if (strcmp(name, "wout_norm") == 0)
        x = r->wout_norm;
    else if (strcmp(name, "wout_square_norm") == 0)
        x = r->wout_square_norm;
    else if (strcmp(name, "wall_time") == 0)
        x = d->wall;
    memcpy(out, &x, 8);
}

int cx_cube_write_records(cx_cube *c, const unsigned char *records, cx_idx n)
{
    int rc = CX_OK;
    const char *path = c->path;
    const cx_plan *p = c->plan;
    decoded *d = NULL;
    unsigned char *buf = NULL;
    hid_t fsp = -1, msp = -1;
    size_t rs = cx_record_size(p->max_runs, p->max_tasks);
    if (n == 0)
        return CX_OK;
    CX_ALLOC(d, n);
    cx_idx m = 0;
    for (cx_idx i = 0; i < n; i++) {
        double fin;
        if (cx_record_decode(records + (size_t)i * rs, p->max_runs, p->max_tasks, &d[m].r,
                             &d[m].wall, &fin) != 0)
            CX_RAISE(CX_ERR_INTERNAL, "a result record failed its CRC before the cube write");
        CX_REQUIRE(d[m].r.cell >= 0 && d[m].r.cell < p->ncells, CX_ERR_INTERNAL,
                   "cell %lld out of range", (long long)d[m].r.cell);
        m++;
    }
    qsort(d, (size_t)m, sizeof *d, cmp_decoded);
    cx_idx u = 0; /* drop duplicates: replayed records of one cell are identical */
    for (cx_idx i = 0; i < m; i++)
        if (u == 0 || d[u - 1].r.cell != d[i].r.cell)
            d[u++] = d[i];
    m = u;
    size_t per_cell = (size_t)p->max_runs * (size_t)p->max_tasks;
    CX_ALLOC(buf, (size_t)m * per_cell * 8);
    for (int v = 0; v < NVARS; v++) {
        const var_def *vd = &vars[v];
        int r = var_rank(c->ndims, vd->shape);
        hsize_t start[MAX_DIMS], count[MAX_DIMS];
        int nr = vd->shape == SHAPE_CELL ? 1 : p->max_runs;
        int nt = vd->shape == SHAPE_TASK ? p->max_tasks : 1;
        size_t es = type_size(vd->type);
        CX_H5(fsp = H5Dget_space(c->dset[v]), "H5Dget_space");
        CX_H5(H5Sselect_none(fsp), "H5Sselect_none");
        unsigned char *q = buf;
        for (cx_idx i = 0; i < m; i++) {
            cx_idx coords[CX_MAX_AXES];
            if (p->naxes > 0)
                cx_plan_coords(p, d[i].r.cell, coords);
            else
                coords[0] = 0;
            for (int k = 0; k < c->ndims; k++) {
                start[k] = (hsize_t)coords[k];
                count[k] = 1;
            }
            if (r > c->ndims) {
                start[c->ndims] = 0;
                count[c->ndims] = (hsize_t)nr;
            }
            if (r > c->ndims + 1) {
                start[c->ndims + 1] = 0;
                count[c->ndims + 1] = (hsize_t)nt;
            }
            CX_H5(H5Sselect_hyperslab(fsp, H5S_SELECT_OR, start, NULL, count, NULL),
                  "H5Sselect_hyperslab");
            for (int k = 0; k < nr; k++)
                for (int t = 0; t < nt; t++) {
                    value_of(v, &d[i], k, t, q);
                    q += es;
                }
        }
        hsize_t total = (hsize_t)m * (hsize_t)nr * (hsize_t)nt;
        CX_H5(msp = H5Screate_simple(1, &total, NULL), "H5Screate_simple");
        if (H5W(H5Dwrite, c->dset[v], mem_type(c, vd->type), msp, fsp, H5P_DEFAULT, buf) < 0)
            CX_RAISE(CX_ERR_HDF5, "HDF5: writing dataset %s failed for %s", vd->name, path);
        H5Sclose(msp);
        msp = -1;
        H5Sclose(fsp);
        fsp = -1;
    }
done:
    if (msp >= 0)
        H5Sclose(msp);
    if (fsp >= 0)
        H5Sclose(fsp);
    free(buf);
    free(d);
    return rc;
}

int cx_cube_finish(cx_cube *c, const cx_cube_final *f)
{
    int rc = CX_OK;
    const char *path = c->path;
    char when[64];
    int64_t ranks = f->ranks, complete = f->complete;
    static const char *const stages[] = {"stage_networks", "stage_spectral_radii", "stage_inputs",
                                         "stage_drives",   "stage_solves",         "stage_probes",
                                         "cells_computed"};
    int64_t add[7] = {f->counts.networks, f->counts.spectral_radii, f->counts.inputs,
                      f->counts.drives,   f->counts.solves,         f->counts.probes,
                      f->computed};
    for (int k = 0; k < 7; k++) {
        int64_t v = 0;
        CX_TRY(get_i64_attr(c->file, stages[k], &v, path));
        v += add[k];
        CX_TRY(put_num_attr(c->file, stages[k], H5T_STD_I64LE, H5T_NATIVE_INT64, &v, 0, path));
    }
    CX_TRY(put_num_attr(c->file, "ranks", H5T_STD_I64LE, H5T_NATIVE_INT64, &ranks, 0, path));
    CX_TRY(put_num_attr(c->file, "complete", H5T_STD_I64LE, H5T_NATIVE_INT64, &complete, 0, path));
    iso_time(f->start_time, when, sizeof when);
    CX_TRY(put_string_attr(c->file, "start_time", when, path));
    iso_time(f->end_time, when, sizeof when);
    CX_TRY(put_string_attr(c->file, "end_time", when, path));
    CX_H5(H5W(H5Fflush, c->file, H5F_SCOPE_GLOBAL), "flushing");
done:
    return rc;
}

int cx_cube_close(cx_cube **pc)
{
    int rc = CX_OK;
    cx_cube *c = *pc;
    if (c == NULL)
        return CX_OK;
    *pc = NULL;
    for (int v = 0; v < NVARS; v++)
        if (c->dset[v] >= 0)
            H5Dclose(c->dset[v]);
    H5Tclose(c->outcome_type);
    H5Tclose(c->status_type);
    if (H5Fclose(c->file) < 0)
        rc = h5fail("H5Fclose", c->path);
    free(c);
    return rc;
}

/* A per-cell dataset must hold exactly `cells` values before it is read whole into a buffer of
 * that size (a damaged or foreign file may disagree with its own `cells` attribute). */
static int check_cells(hid_t d, cx_idx cells, const char *name, const char *path)
{
    hid_t sp = H5Dget_space(d);
    hssize_t n = sp >= 0 ? H5Sget_simple_extent_npoints(sp) : -1;
    if (sp >= 0)
        H5Sclose(sp);
    if (n != (hssize_t)cells)
        return CX_FAIL(
            CX_ERR_INVALID,
            "%s is not a valid coexist cube: dataset %s holds %lld values for %lld cells", path,
            name, (long long)n, (long long)cells);
    return CX_OK;
}

int cx_cube_summarize(const char *path, cx_cube_summary *s, uint8_t **done_out)
{
    int rc = CX_OK;
    hid_t fapl = -1, file = -1, d = -1;
    char *str = NULL;
    uint8_t *done = NULL;
    signed char *status = NULL;
    double *wall = NULL;
    int64_t v;
    memset(s, 0, sizeof *s);
    quiet_hdf5();
    CX_H5(fapl = serial_fapl(0), "H5Pcreate");
    file = H5Fopen(path, H5F_ACC_RDONLY, fapl);
    if (file < 0)
        CX_RAISE(CX_ERR_INVALID, "%s is not a coexist cube (cannot open it as HDF5)", path);
    if (H5Aexists(file, "coexist_format") <= 0)
        CX_RAISE(CX_ERR_INVALID, "%s is not a coexist cube", path);
    CX_TRY(get_string_attr(file, "study_name", &str, path));
    snprintf(s->name, sizeof s->name, "%s", str);
    CX_TRY(get_i64_attr(file, "cells", &v, path));
    s->ncells = v;
    CX_TRY(get_i64_attr(file, "max_runs", &v, path));
    s->max_runs = (int)v;
    CX_TRY(get_i64_attr(file, "max_tasks", &v, path));
    s->max_tasks = (int)v;
    CX_TRY(get_i64_attr(file, "ranks", &v, path));
    s->ranks = (int)v;
    CX_TRY(get_i64_attr(file, "complete", &v, path));
    s->complete = (int)v;
    {
        hid_t a = H5Aopen(file, "study_hash_u64", H5P_DEFAULT);
        CX_H5(a, "study_hash_u64");
        herr_t e = H5Aread(a, H5T_NATIVE_UINT64, &s->hash);
        H5Aclose(a);
        CX_H5(e, "H5Aread");
    }
    CX_REQUIRE(s->ncells > 0, CX_ERR_INVALID, "%s is not a coexist cube: it declares %lld cells",
               path, (long long)s->ncells);
    CX_ALLOC(done, s->ncells);
    CX_ALLOC(status, s->ncells);
    CX_ALLOC(wall, s->ncells);
    CX_H5(d = H5Dopen2(file, "done", H5P_DEFAULT), "done");
    CX_TRY(check_cells(d, s->ncells, "done", path));
    CX_H5(H5Dread(d, H5T_NATIVE_UCHAR, H5S_ALL, H5S_ALL, H5P_DEFAULT, done), "read done");
    H5Dclose(d);
    CX_H5(d = H5Dopen2(file, "status", H5P_DEFAULT), "status");
    CX_TRY(check_cells(d, s->ncells, "status", path));
    {
        hid_t st = make_status_type();
        herr_t e = H5Dread(d, st, H5S_ALL, H5S_ALL, H5P_DEFAULT, status);
        H5Tclose(st);
        CX_H5(e, "read status");
    }
    H5Dclose(d);
    CX_H5(d = H5Dopen2(file, "wall_time", H5P_DEFAULT), "wall_time");
    CX_TRY(check_cells(d, s->ncells, "wall_time", path));
    CX_H5(H5Dread(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, wall), "read wall");
    H5Dclose(d);
    d = -1;
    for (cx_idx c = 0; c < s->ncells; c++) {
        if (!done[c])
            continue;
        s->done++;
        if (status[c] >= 0 && status[c] < 8)
            s->by_status[(int)status[c]]++;
        if (isfinite(wall[c]))
            s->wall_sum += wall[c];
    }
    if (done_out != NULL) {
        *done_out = done;
        done = NULL;
    }
done:
    free(str);
    free(done);
    free(status);
    free(wall);
    if (d >= 0)
        H5Dclose(d);
    if (file >= 0)
        H5Fclose(file);
    if (fapl >= 0)
        H5Pclose(fapl);
    return rc;
}
