/* coexist: the blended ridge readout of a multifunctional reservoir.
 *
 * Ridge regression (Hoerl & Kennard 1970, Technometrics 12, 55) over several training tasks with
 * weights w_k, i.e. the least-squares problem min sum_k w_k^2 |U_k - W Q_k|^2 + beta |W|^2,
 * whose normal equations are
 *     W_out A = B,   A = sum_k w_k^2 G_k + beta I,   B = sum_k w_k^2 C_k,
 * with the Gram sums G_k = Q_k Q_k^T and C_k = U_k Q_k^T of cx_res_drive. A is symmetric
 * positive semi-definite, so W_out^T = A^-1 B^T is found by Cholesky factorisation and two
 * triangular solves (LAPACK dpotrf/dpotrs; Anderson et al. 1999, LAPACK Users' Guide, 3rd ed.,
 * SIAM). A factorisation that meets a non-positive pivot is a numerical outcome of the cell
 * (status CX_SOLVE_NOT_PD), not an error.
 */
#include <lapacke.h>
#include <math.h>

#include "coexist/error.h"
#include "coexist/reservoir.h"

int cx_readout_solve(cx_idx nfeat, int dim, int ntasks, const double *const *g,
                     const double *const *c, const double *w, double beta, double *work,
                     double *w_out, int *status)
{
    int rc = CX_OK;
    CX_REQUIRE(nfeat >= 1 && dim >= 1 && dim <= CX_MAX_DIM && ntasks >= 1 && ntasks <= CX_MAX_TASKS,
               CX_ERR_INVALID, "readout: %lld features, dimension %d, %d tasks", (long long)nfeat,
               dim, ntasks);
    CX_REQUIRE(g != NULL && c != NULL && w != NULL && work != NULL && w_out != NULL &&
                   status != NULL,
               CX_ERR_INVALID, "readout: NULL argument");
    CX_REQUIRE(beta >= 0.0, CX_ERR_INVALID, "readout: ridge %g is negative", beta);
    CX_REQUIRE((cx_idx)(lapack_int)nfeat == nfeat, CX_ERR_INVALID,
               "readout: %lld features do not fit the LAPACK integer", (long long)nfeat);

    double *a = work;                 /* nfeat x nfeat, column-major, upper triangle */
    double *x = work + nfeat * nfeat; /* B^T: nfeat x dim, column-major, ld = nfeat */
    int finite = 1;
    for (cx_idx col = 0; col < nfeat; col++) {
        double *acol = a + col * nfeat;
        for (cx_idx row = 0; row <= col; row++)
            acol[row] = 0.0;
        for (int k = 0; k < ntasks; k++) {
            const double wk2 = w[k] * w[k];
            const double *gcol = g[k] + col * nfeat;
            for (cx_idx row = 0; row <= col; row++)
                acol[row] += wk2 * gcol[row];
        }
        acol[col] += beta;
        for (cx_idx row = 0; row <= col; row++)
            if (!isfinite(acol[row]))
                finite = 0;
    }
    for (cx_idx f = 0; f < nfeat; f++) {
        for (int j = 0; j < dim; j++) {
            double s = 0.0;
            for (int k = 0; k < ntasks; k++)
                s += w[k] * w[k] * c[k][j + f * dim];
            if (!isfinite(s))
                finite = 0;
            x[f + (cx_idx)j * nfeat] = s;
        }
    }
    if (!finite) {
        *status = CX_SOLVE_NONFINITE;
        goto done;
    }

    const lapack_int nl = (lapack_int)nfeat;
    lapack_int info = LAPACKE_dpotrf(LAPACK_COL_MAJOR, 'U', nl, a, nl);
    CX_REQUIRE(info >= 0, CX_ERR_LAPACK, "dpotrf: illegal argument %d", (int)-info);
    if (info > 0) {
        *status = CX_SOLVE_NOT_PD;
        goto done;
    }
    info = LAPACKE_dpotrs(LAPACK_COL_MAJOR, 'U', nl, (lapack_int)dim, a, nl, x, nl);
    CX_REQUIRE(info == 0, CX_ERR_LAPACK, "dpotrs: illegal argument %d", (int)-info);
    for (cx_idx f = 0; f < nfeat; f++)
        for (int j = 0; j < dim; j++)
            w_out[j + f * dim] = x[f + (cx_idx)j * nfeat];
    *status = CX_SOLVE_OK;
done:
    return rc;
}
