/* coexist: the open-loop drive of a reservoir by one task signal, with the Gram sums of ridge
 * regression (Hoerl & Kennard 1970, Technometrics 12, 55) accumulated on the fly:
 *     G += sum_i q(r_i) q(r_i)^T,   C += sum_i u_i q(r_i)^T.
 * The history of states is never held: B feature vectors are buffered as the columns of a block
 * Q (nfeat x B) and folded in by one symmetric rank-B update, G += Q Q^T (BLAS dsyrk), and one
 * product C += U Q^T (dgemm); level-3 BLAS runs these at a large fraction of peak, where B
 * rank-1 updates would be bound by memory traffic (Dongarra, Du Croz, Hammarling & Duff 1990,
 * ACM TOMS 16, 1). Only the upper triangle of G is formed.
 */
#include <cblas.h>
#include <string.h>

#include "coexist/clock.h"
#include "coexist/error.h"
#include "reservoir/reservoir_impl.h"

static int fits_blasint(cx_idx v)
{
    return v >= 0 && (cx_idx)(blasint)v == v;
}

/* Fold the first `cnt` buffered columns into g and c; the time it takes is added to the
 * workspace's Gram clock (two clock reads per block of samples: negligible). */
static void gram_flush(cx_res_ws *ws, cx_idx cnt, double *g, double *c)
{
    if (cnt == 0)
        return;
    double t0 = cx_clock_mono();
    const blasint nf = (blasint)ws->nfeat, k = (blasint)cnt, d = (blasint)ws->dim;
    cblas_dsyrk(CblasColMajor, CblasUpper, CblasNoTrans, nf, k, 1.0, ws->qblk, nf, 1.0, g, nf);
    cblas_dgemm(CblasColMajor, CblasNoTrans, CblasTrans, d, nf, k, 1.0, ws->ublk, d, ws->qblk, nf,
                1.0, c, d);
    ws->gram_seconds += cx_clock_mono() - t0;
}

double cx_res_ws_gram_seconds(const cx_res_ws *ws)
{
    return ws->gram_seconds;
}

int cx_res_drive(cx_res_ws *ws, const cx_reservoir *res, const double *u, double dt, cx_idx washout,
                 cx_idx train, cx_idx stride, double *r, double *g, double *c)
{
    int rc = CX_OK;
    CX_TRY(cx_res_meet(ws, res));
    CX_REQUIRE(washout >= 0 && train >= 0 && stride >= 1, CX_ERR_INVALID,
               "drive: washout %lld, training steps %lld, stride %lld", (long long)washout,
               (long long)train, (long long)stride);
    CX_REQUIRE(r != NULL && (u != NULL || washout + train == 0), CX_ERR_INVALID,
               "drive: NULL state or signal");
    CX_REQUIRE(train == 0 || (g != NULL && c != NULL), CX_ERR_INVALID, "drive: NULL Gram sums");
    CX_REQUIRE(res->model == CX_MODEL_DISCRETE || dt > 0.0, CX_ERR_INVALID, "drive: time step %g",
               dt);
    CX_REQUIRE(fits_blasint(ws->nfeat) && fits_blasint(ws->block), CX_ERR_INVALID,
               "drive: %lld features do not fit the BLAS integer", (long long)ws->nfeat);

    const int dim = ws->dim;
    const cx_idx nfeat = ws->nfeat;
    /* Sample spacing of u: dt/2 for RK4 (start, midpoint, end of each step), dt for the map. */
    const cx_idx per = res->model == CX_MODEL_CONTINUOUS ? 2 : 1;
    const cx_idx steps = washout + train;
    /* in position order (rows.c) the state lives in ws->rows_x and goes back to node order for
     * the features and at the end */
    const int rows = cx_res_open_rows_ok(ws, res);
    double *x = r;
    if (rows) {
        x = ws->rows_x;
        cx_res_rows_gather(ws, r, x);
    }
    cx_idx cnt = 0;
    for (cx_idx i = 0; i < steps; i++) {
        const double *u0 = u + per * i * dim;
        const double *uh = u + (per * i + 1) * dim;
        const double *u1 = u + per * (i + 1) * dim;
        if (rows)
            cx_res_open_step_rows(ws, res, dt, u0, uh, u1, x);
        else
            cx_res_open_step(ws, res, dt, u0, uh, u1, r);
        if (i < washout || (i - washout) % stride != 0)
            continue;
        if (rows)
            cx_res_rows_scatter(ws, x, r);
        cx_res_features_of(ws, r, ws->qblk + cnt * nfeat);
        memcpy(ws->ublk + cnt * dim, u1, (size_t)dim * sizeof *u1);
        if (++cnt == ws->block) {
            gram_flush(ws, cnt, g, c);
            cnt = 0;
        }
    }
    gram_flush(ws, cnt, g, c);
    if (rows)
        cx_res_rows_scatter(ws, x, r);
done:
    return rc;
}

int cx_res_drive_constant(cx_res_ws *ws, const cx_reservoir *res, const double *p, double dt,
                          cx_idx nsteps, double *r)
{
    int rc = CX_OK;
    CX_TRY(cx_res_meet(ws, res));
    CX_REQUIRE(nsteps >= 0 && p != NULL && r != NULL, CX_ERR_INVALID,
               "constant drive: %lld steps, or NULL point or state", (long long)nsteps);
    CX_REQUIRE(res->model == CX_MODEL_DISCRETE || dt > 0.0, CX_ERR_INVALID,
               "constant drive: time step %g", dt);
    for (cx_idx i = 0; i < nsteps; i++)
        cx_res_open_step(ws, res, dt, p, p, p, r);
done:
    return rc;
}
