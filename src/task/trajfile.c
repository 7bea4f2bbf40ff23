/* coexist: trajectories read from files (CSV text or an HDF5 dataset), resampled to the
 * series spacing.
 *
 * CSV: one sample per line, numbers separated by commas and/or blanks; blank lines and lines
 * whose first non-blank character is '#' are skipped; the first remaining line is skipped as a
 * header when it does not parse as numbers. Every row must have the same width (<= CX_MAX_DIM)
 * and every value must be finite. The sample interval is the spec's file_dt.
 * HDF5: a 2-D floating-point dataset (rows x dim; a 1-D one is rows x 1) at the spec's dataset
 * path; the sample interval is file_dt, or when that is 0 the dataset's "sample_interval"
 * attribute. The file is opened read-only with the default (serial) file access, which is valid
 * from one process even when the library is the MPI build.
 *
 * Resampling: the file holds u(k dt_f), k = 0..rows-1; the series needs u(i h), i = 0..n-1. Each
 * is obtained by linear interpolation between the two neighbouring file samples (exact for a
 * signal linear in time, error O(dt_f^2 |u''|) otherwise; e.g. Press, Teukolsky, Vetterling &
 * Flannery, "Numerical Recipes", 3rd ed., Cambridge 2007, Sec. 3.1). Every problem is
 * CX_ERR_INVALID with a message naming the path (and the line for CSV).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <hdf5.h>

#include "coexist/error.h"
#include "coexist/task.h"
#include "task_impl.h"

#define CX_CSV_LINE 8192
/* Slack on "is the file long enough", relative to its duration: sample times carry round-off. */
#define CX_FILE_TIME_FUZZ 1e-9

/* Parse one line of numbers. Returns the count, or -1 when the line is not a list of numbers
 * (*bad then points at the offending text). */
static int is_blank(char c)
{
    return c == ' ' || c == '\t' || c == '\r' || c == '\n';
}

static int parse_numbers(char *s, double *v, int cap, const char **bad)
{
    int k = 0;
    char *p = s;
    for (;;) {
        while (is_blank(*p))
            p++;
        if (*p == '\0')
            return k;
        char *end = NULL;
        double x = strtod(p, &end);
        if (end == p || !(is_blank(*end) || *end == ',' || *end == '\0')) {
            *bad = p; /* not a number, or a number glued to text ("1.5x") */
            return -1;
        }
        if (k < cap)
            v[k] = x;
        k++;
        p = end;
        while (is_blank(*p))
            p++;
        if (*p == ',') {
            p++;
            while (is_blank(*p))
                p++;
            if (*p == '\0' || *p == ',') {
                *bad = p; /* an empty field */
                return -1;
            }
        }
    }
}

/* Read a CSV file. With data == NULL only the shape is found (and the file fully checked);
 * otherwise data holds cap doubles (rows * dim from a first pass). */
static int csv_read(const char *path, double *data, cx_idx cap, cx_idx *rows, int *dim)
{
    int rc = CX_OK;
    FILE *fp = NULL;
    char *line = NULL;
    cx_idx nrow = 0;
    int width = 0;
    long long lineno = 0;
    int seen_first = 0;
    double v[CX_MAX_DIM];

    CX_ALLOC(line, CX_CSV_LINE);
    fp = fopen(path, "r");
    CX_REQUIRE(fp != NULL, CX_ERR_INVALID, "trajectory file %s cannot be opened", path);
    while (fgets(line, CX_CSV_LINE, fp) != NULL) {
        lineno++;
        size_t len = strlen(line);
        CX_REQUIRE(len + 1 < CX_CSV_LINE || line[len - 1] == '\n' || feof(fp), CX_ERR_INVALID,
                   "%s:%lld: line longer than %d characters", path, lineno, CX_CSV_LINE - 2);
        char *p = line;
        while (is_blank(*p))
            p++;
        if (*p == '\0' || *p == '#')
            continue;
        const char *bad = NULL;
        int k = parse_numbers(p, v, CX_MAX_DIM, &bad);
        if (k < 0) {
            if (!seen_first) {
                seen_first = 1; /* a header line */
                continue;
            }
            CX_RAISE(CX_ERR_INVALID, "%s:%lld: not a number near \"%.20s\"", path, lineno, bad);
        }
        seen_first = 1;
        CX_REQUIRE(k <= CX_MAX_DIM, CX_ERR_INVALID, "%s:%lld: %d columns, at most %d allowed", path,
                   lineno, k, CX_MAX_DIM);
        if (width == 0)
            width = k;
        CX_REQUIRE(k == width, CX_ERR_INVALID,
                   "%s:%lld: %d columns where the rows before have %d (ragged rows)", path, lineno,
                   k, width);
        for (int j = 0; j < k; j++)
            CX_REQUIRE(isfinite(v[j]), CX_ERR_INVALID, "%s:%lld: column %d is not finite (%g)",
                       path, lineno, j + 1, v[j]);
        if (data != NULL) {
            CX_REQUIRE((nrow + 1) * width <= cap, CX_ERR_INVALID,
                       "%s: the file changed while it was read", path);
            for (int j = 0; j < k; j++)
                data[nrow * width + j] = v[j];
        }
        nrow++;
    }
    CX_REQUIRE(!ferror(fp), CX_ERR_INVALID, "%s: read error after line %lld", path, lineno);
    CX_REQUIRE(nrow > 0, CX_ERR_INVALID, "%s: no samples in the file", path);
    CX_REQUIRE(data == NULL || nrow * width == cap, CX_ERR_INVALID,
               "%s: the file changed while it was read", path);
    *rows = nrow;
    *dim = width;
done:
    if (fp != NULL)
        fclose(fp);
    free(line);
    return rc;
}

/* HDF5 handles of one open dataset, closed in reverse by h5_close. */
typedef struct h5_handles {
    hid_t file, dset, space;
} h5_handles;

static void h5_close(h5_handles *h)
{
    if (h->space >= 0)
        H5Sclose(h->space);
    if (h->dset >= 0)
        H5Dclose(h->dset);
    if (h->file >= 0)
        H5Fclose(h->file);
    h->space = h->dset = h->file = -1;
}

static int h5_open(const cx_task_spec *t, h5_handles *h, cx_idx *rows, int *dim)
{
    int rc = CX_OK;
    hid_t type = -1;
    h->file = H5Fopen(t->path, H5F_ACC_RDONLY, H5P_DEFAULT);
    CX_REQUIRE(h->file >= 0, CX_ERR_INVALID, "trajectory file %s cannot be opened as HDF5",
               t->path);
    CX_REQUIRE(H5Lexists(h->file, t->dataset, H5P_DEFAULT) > 0, CX_ERR_INVALID, "%s: no dataset %s",
               t->path, t->dataset);
    h->dset = H5Dopen2(h->file, t->dataset, H5P_DEFAULT);
    CX_REQUIRE(h->dset >= 0, CX_ERR_INVALID, "%s: %s is not a dataset", t->path, t->dataset);
    type = H5Dget_type(h->dset);
    CX_REQUIRE(type >= 0 && H5Tget_class(type) == H5T_FLOAT, CX_ERR_INVALID,
               "%s: dataset %s does not hold floating-point numbers", t->path, t->dataset);
    h->space = H5Dget_space(h->dset);
    CX_REQUIRE(h->space >= 0, CX_ERR_INVALID, "%s: dataset %s has no dataspace", t->path,
               t->dataset);
    int nd = H5Sget_simple_extent_ndims(h->space);
    CX_REQUIRE(nd == 1 || nd == 2, CX_ERR_INVALID,
               "%s: dataset %s has %d dimensions, expected rows x dim", t->path, t->dataset, nd);
    hsize_t d[2] = {0, 1};
    CX_REQUIRE(H5Sget_simple_extent_dims(h->space, d, NULL) == nd, CX_ERR_INVALID,
               "%s: dataset %s: cannot read its shape", t->path, t->dataset);
    CX_REQUIRE(d[0] > 0, CX_ERR_INVALID, "%s: dataset %s is empty", t->path, t->dataset);
    CX_REQUIRE(d[1] >= 1 && d[1] <= CX_MAX_DIM, CX_ERR_INVALID,
               "%s: dataset %s has %llu columns, expected 1..%d", t->path, t->dataset,
               (unsigned long long)d[1], CX_MAX_DIM);
    CX_REQUIRE(d[0] <= (hsize_t)INT64_MAX / CX_MAX_DIM, CX_ERR_INVALID,
               "%s: dataset %s is too long", t->path, t->dataset);
    *rows = (cx_idx)d[0];
    *dim = (int)d[1];
done:
    if (type >= 0)
        H5Tclose(type);
    return rc;
}

/* The sample interval: the spec's, else the dataset attribute (HDF5 only). */
static int h5_interval(const cx_task_spec *t, hid_t dset, double *dt)
{
    int rc = CX_OK;
    hid_t attr = -1, space = -1;
    if (t->file_dt != 0.0) {
        *dt = t->file_dt;
        goto done;
    }
    CX_REQUIRE(H5Aexists(dset, "sample_interval") > 0, CX_ERR_INVALID,
               "%s: dataset %s has no sample_interval attribute and the task gives no file "
               "sample interval",
               t->path, t->dataset);
    attr = H5Aopen(dset, "sample_interval", H5P_DEFAULT);
    CX_REQUIRE(attr >= 0, CX_ERR_INVALID, "%s: cannot open attribute sample_interval", t->path);
    space = H5Aget_space(attr);
    CX_REQUIRE(space >= 0 && H5Sget_simple_extent_npoints(space) == 1, CX_ERR_INVALID,
               "%s: attribute sample_interval of %s must be one number", t->path, t->dataset);
    CX_REQUIRE(H5Aread(attr, H5T_NATIVE_DOUBLE, dt) >= 0, CX_ERR_INVALID,
               "%s: attribute sample_interval of %s is not a number", t->path, t->dataset);
done:
    if (space >= 0)
        H5Sclose(space);
    if (attr >= 0)
        H5Aclose(attr);
    return rc;
}

/* Load a whole file. OUT: *data (allocated here, rows * dim, row-major), *rows, *dim, *dt. */
static int file_load(const cx_task_spec *t, double **data, cx_idx *rows, int *dim, double *dt)
{
    int rc = CX_OK;
    double *buf = NULL;
    h5_handles h = {-1, -1, -1};
    H5E_auto2_t old_func = NULL;
    void *old_data = NULL;
    int silenced = 0;
    cx_idx r = 0;
    int d = 0;
    double interval = 0.0;

    if (t->dataset[0] == '\0') {
        CX_TRY(csv_read(t->path, NULL, 0, &r, &d));
        CX_ALLOC(buf, r * d);
        CX_TRY(csv_read(t->path, buf, r * d, &r, &d));
        interval = t->file_dt;
    } else {
        /* HDF5 would print its own error stack to stderr; our message replaces it. */
        H5Eget_auto2(H5E_DEFAULT, &old_func, &old_data);
        H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
        silenced = 1;
        CX_TRY(h5_open(t, &h, &r, &d));
        CX_TRY(h5_interval(t, h.dset, &interval));
        CX_ALLOC(buf, r * d);
        CX_REQUIRE(H5Dread(h.dset, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) >= 0,
                   CX_ERR_INVALID, "%s: dataset %s cannot be read", t->path, t->dataset);
        for (cx_idx i = 0; i < r * d; i++)
            CX_REQUIRE(isfinite(buf[i]), CX_ERR_INVALID,
                       "%s: dataset %s: row %lld column %lld is not finite (%g)", t->path,
                       t->dataset, (long long)(i / d), (long long)(i % d + 1), buf[i]);
    }
    CX_REQUIRE(isfinite(interval) && interval > 0.0, CX_ERR_INVALID,
               "%s: sample interval %g must be > 0", t->path, interval);
    *data = buf;
    buf = NULL;
    *rows = r;
    *dim = d;
    *dt = interval;
done:
    h5_close(&h);
    if (silenced)
        H5Eset_auto2(H5E_DEFAULT, old_func, old_data);
    free(buf);
    return rc;
}

int cx_task_file_shape(const cx_task_spec *t, cx_idx *rows, int *dim)
{
    int rc = CX_OK;
    h5_handles h = {-1, -1, -1};
    H5E_auto2_t old_func = NULL;
    void *old_data = NULL;
    int silenced = 0;
    CX_REQUIRE(t != NULL && rows != NULL && dim != NULL, CX_ERR_INTERNAL,
               "cx_task_file_shape: NULL argument");
    CX_REQUIRE(t->path[0] != '\0', CX_ERR_INVALID, "task %s: no trajectory file given", t->name);
    if (t->dataset[0] == '\0') {
        CX_TRY(csv_read(t->path, NULL, 0, rows, dim));
    } else {
        H5Eget_auto2(H5E_DEFAULT, &old_func, &old_data);
        H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
        silenced = 1;
        CX_TRY(h5_open(t, &h, rows, dim));
    }
done:
    h5_close(&h);
    if (silenced)
        H5Eset_auto2(H5E_DEFAULT, old_func, old_data);
    return rc;
}

int cx_task_file_series(const cx_task_spec *t, double h, cx_idx n, double *out)
{
    int rc = CX_OK;
    double *data = NULL;
    cx_idx rows = 0;
    int dim = 0;
    double dt = 0.0;
    CX_REQUIRE(t->path[0] != '\0', CX_ERR_INVALID, "task %s: no trajectory file given", t->name);
    CX_TRY(file_load(t, &data, &rows, &dim, &dt));
    CX_REQUIRE(dim == t->dim, CX_ERR_INVALID,
               "%s: the file has %d columns but task %s declares dimension %d", t->path, dim,
               t->name, t->dim);
    const double have = (double)(rows - 1) * dt;
    const double need = (double)(n - 1) * h;
    CX_REQUIRE(need <= have * (1.0 + CX_FILE_TIME_FUZZ), CX_ERR_INVALID,
               "%s: too short: %lld samples at interval %g cover %g time units, the series needs "
               "%lld samples at interval %g (%g time units)",
               t->path, (long long)rows, dt, have, (long long)n, h, need);
    for (cx_idx i = 0; i < n; i++) {
        double s = (double)i * h / dt;
        /* A series time that is a file time up to round-off takes that sample as it is. */
        const double r = floor(s + 0.5);
        if (fabs(s - r) <= CX_FILE_TIME_FUZZ * fmax(1.0, s))
            s = r;
        cx_idx k = (cx_idx)floor(s);
        double f = s - (double)k;
        if (k >= rows - 1) { /* the last sample, reached within the fuzz */
            k = rows - 1;
            f = 0.0;
        }
        const double *a = data + k * dim;
        for (int j = 0; j < dim; j++)
            out[i * dim + j] = f == 0.0 ? a[j] : (1.0 - f) * a[j] + f * a[dim + j];
    }
done:
    free(data);
    return rc;
}
