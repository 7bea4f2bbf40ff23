/* coexist: write one cell's matrices and trajectories to an HDF5 file (serial, one process).
 *
 * Layout (documented in the README, section "Dumping a cell"):
 *   /network/rowptr, /network/col, /network/val   M in CSR, scaled to the cell's spectral radius
 *   /input/w_in (nodes x dim), /input/bias (nodes)
 *   /readout/w_out (dim x features)
 *   /tasks/<k>/training (samples x dim), /tasks/<k>/end_state (nodes)
 *   /runs/<j>/output (samples x dim), /runs/<j>/start_state (nodes), attributes outcome, attractor
 * Root attributes: cell, status, dt, nodes, features, tasks, runs, rho_unscaled.
 */
#include <errno.h>
#include <string.h>
#include <stdio.h>
#include <stdlib.h>
#include <sys/stat.h>

#include <hdf5.h>

#include "coexist/cell.h"
#include "coexist/error.h"
#include "cell_impl.h"

static int write_2d(hid_t loc, const char *name, const double *data, cx_idx rows, cx_idx cols)
{
    hsize_t dims[2] = {(hsize_t)rows, (hsize_t)cols};
    int rank = cols > 0 ? 2 : 1;
    hid_t space = H5Screate_simple(rank, dims, NULL);
    if (space < 0)
        return CX_FAIL(CX_ERR_HDF5, "cannot create dataspace for %s", name);
    hid_t d = H5Dcreate2(loc, name, H5T_IEEE_F64LE, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    herr_t st = d < 0 ? -1 : H5Dwrite(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, data);
    if (d >= 0)
        H5Dclose(d);
    H5Sclose(space);
    return st < 0 ? CX_FAIL(CX_ERR_HDF5, "cannot write dataset %s", name) : CX_OK;
}

static int write_idx(hid_t loc, const char *name, const cx_idx *data, cx_idx n)
{
    hsize_t dims[1] = {(hsize_t)n};
    hid_t space = H5Screate_simple(1, dims, NULL);
    if (space < 0)
        return CX_FAIL(CX_ERR_HDF5, "cannot create dataspace for %s", name);
    hid_t d = H5Dcreate2(loc, name, H5T_STD_I64LE, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    herr_t st = d < 0 ? -1 : H5Dwrite(d, H5T_NATIVE_INT64, H5S_ALL, H5S_ALL, H5P_DEFAULT, data);
    if (d >= 0)
        H5Dclose(d);
    H5Sclose(space);
    return st < 0 ? CX_FAIL(CX_ERR_HDF5, "cannot write dataset %s", name) : CX_OK;
}

static int attr_num(hid_t loc, const char *name, hid_t mem, hid_t file, const void *v)
{
    hid_t space = H5Screate(H5S_SCALAR);
    hid_t a = H5Acreate2(loc, name, file, space, H5P_DEFAULT, H5P_DEFAULT);
    herr_t st = a < 0 ? -1 : H5Awrite(a, mem, v);
    if (a >= 0)
        H5Aclose(a);
    H5Sclose(space);
    return st < 0 ? CX_FAIL(CX_ERR_HDF5, "cannot write attribute %s", name) : CX_OK;
}

static int attr_str(hid_t loc, const char *name, const char *v)
{
    hid_t t = H5Tcopy(H5T_C_S1);
    H5Tset_size(t, strlen(v) + 1);
    int rc = attr_num(loc, name, t, t, v);
    H5Tclose(t);
    return rc;
}

static int attr_f64(hid_t loc, const char *name, double v)
{
    return attr_num(loc, name, H5T_NATIVE_DOUBLE, H5T_IEEE_F64LE, &v);
}

static int attr_i64(hid_t loc, const char *name, int64_t v)
{
    return attr_num(loc, name, H5T_NATIVE_INT64, H5T_STD_I64LE, &v);
}

int cx_cell_dump_check(const char *path, int overwrite)
{
    int rc = CX_OK;
    struct stat st;
    char dir[CX_PATH_LEN];
    CX_REQUIRE(overwrite || lstat(path, &st) != 0, CX_ERR_INVALID,
               "%s exists: remove it, choose another name, or pass --overwrite", path);
    snprintf(dir, sizeof dir, "%s", path);
    char *slash = strrchr(dir, '/');
    if (slash == NULL)
        snprintf(dir, sizeof dir, ".");
    else if (slash == dir)
        dir[1] = '\0';
    else
        *slash = '\0';
    CX_REQUIRE(stat(dir, &st) == 0 && S_ISDIR(st.st_mode), CX_ERR_INVALID,
               "cannot write %s: directory %s does not exist", path, dir);
done:
    return rc;
}

int cx_cell_dump(const cx_cell_ws *ws, const cx_cell_params *p, const cx_cell_result *r,
                 const char *path, int overwrite)
{
    int rc = CX_OK;
    hid_t f = -1, grp = -1, sub = -1;
    double *tmp = NULL;
    H5E_auto2_t old_func;
    void *old_data;
    H5Eget_auto2(H5E_DEFAULT, &old_func, &old_data);
    H5Eset_auto2(H5E_DEFAULT, NULL, NULL);

    CX_REQUIRE(ws->keep && ws->have_drive, CX_ERR_INTERNAL,
               "cx_cell_dump needs a workspace that kept its last cell");
    CX_TRY(cx_cell_dump_check(path, overwrite));
    f = H5Fcreate(path, overwrite ? H5F_ACC_TRUNC : H5F_ACC_EXCL, H5P_DEFAULT, H5P_DEFAULT);
    CX_REQUIRE(f >= 0, CX_ERR_IO,
               "cannot create %s (it exists, or the directory is not writable); "
               "remove it or choose another name",
               path);
    cx_idx n = p->net.nodes, nf = ws->nfeat;
    int dim = p->dim;
    CX_TRY(attr_i64(f, "cell", r->cell));
    CX_TRY(attr_str(f, "status", cx_cell_status_name(r->status)));
    CX_TRY(attr_f64(f, "dt", p->train.dt));
    CX_TRY(attr_i64(f, "nodes", n));
    CX_TRY(attr_i64(f, "features", nf));
    CX_TRY(attr_i64(f, "tasks", p->ntasks));
    CX_TRY(attr_i64(f, "runs", r->nruns));
    CX_TRY(attr_f64(f, "rho_unscaled", r->rho_unscaled));

    grp = H5Gcreate2(f, "network", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    CX_REQUIRE(grp >= 0, CX_ERR_HDF5, "cannot create group network in %s", path);
    CX_TRY(write_idx(grp, "rowptr", ws->m.rowptr, n + 1));
    CX_TRY(write_idx(grp, "col", ws->m.col, ws->m.nnz));
    CX_TRY(write_2d(grp, "val", ws->m.val, ws->m.nnz, 0));
    CX_TRY(attr_f64(grp, "spectral_radius", p->res.spectral_radius));
    H5Gclose(grp);
    grp = H5Gcreate2(f, "input", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    CX_REQUIRE(grp >= 0, CX_ERR_HDF5, "cannot create group input in %s", path);
    CX_TRY(write_2d(grp, "w_in", ws->w_in, n, dim));
    CX_TRY(write_2d(grp, "bias", ws->bias, n, 0));
    H5Gclose(grp);

    grp = H5Gcreate2(f, "readout", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    CX_REQUIRE(grp >= 0, CX_ERR_HDF5, "cannot create group readout in %s", path);
    CX_ALLOC(tmp, nf * dim > n ? nf * dim : n);
    for (int j = 0; j < dim; j++) /* column-major dim x nf -> row-major dim x nf */
        for (cx_idx q = 0; q < nf; q++)
            tmp[j * nf + q] = ws->w_out[j + q * dim];
    CX_TRY(write_2d(grp, "w_out", tmp, dim, nf));
    CX_TRY(attr_f64(grp, "ridge", p->train.ridge));
    H5Gclose(grp);
    grp = -1;
    free(tmp);
    tmp = NULL;

    grp = H5Gcreate2(f, "tasks", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    CX_REQUIRE(grp >= 0, CX_ERR_HDF5, "cannot create group tasks in %s", path);
    for (int k = 0; k < p->ntasks; k++) {
        char name[32];
        snprintf(name, sizeof name, "%d", k);
        sub = H5Gcreate2(grp, name, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
        CX_REQUIRE(sub >= 0, CX_ERR_HDF5, "cannot create group tasks/%s in %s", name, path);
        CX_TRY(write_2d(sub, "training", ws->training[k], ws->train + 1, dim));
        CX_TRY(write_2d(sub, "end_state", ws->r_end[k], n, 0));
        CX_TRY(attr_str(sub, "name", p->tasks[k].name));
        H5Gclose(sub);
        sub = -1;
    }
    H5Gclose(grp);
    grp = -1;

    grp = H5Gcreate2(f, "runs", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    CX_REQUIRE(grp >= 0, CX_ERR_HDF5, "cannot create group runs in %s", path);
    if (r->status == CX_CELL_COMPUTED) {
        for (int j = 0; j < r->nruns; j++) {
            char name[32];
            snprintf(name, sizeof name, "%d", j);
            sub = H5Gcreate2(grp, name, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
            CX_REQUIRE(sub >= 0, CX_ERR_HDF5, "cannot create group runs/%s in %s", name, path);
            CX_TRY(write_2d(sub, "output", ws->kept_y + (cx_idx)j * (ws->horizon + 1) * dim,
                            ws->kept_len[j], dim));
            CX_TRY(write_2d(sub, "start_state", ws->kept_start + (cx_idx)j * n, n, 0));
            CX_TRY(attr_str(sub, "outcome", cx_outcome_name(r->runs[j].outcome)));
            CX_TRY(attr_i64(sub, "attractor", r->runs[j].attractor));
            CX_TRY(attr_i64(sub, "own_task", j < p->ntasks ? j : -1));
            H5Gclose(sub);
            sub = -1;
        }
    }
done:
    free(tmp);
    if (sub >= 0)
        H5Gclose(sub);
    if (grp >= 0)
        H5Gclose(grp);
    if (f >= 0)
        H5Fclose(f);
    H5Eset_auto2(H5E_DEFAULT, old_func, old_data);
    return rc;
}
