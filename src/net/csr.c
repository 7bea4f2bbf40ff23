/* coexist: kernels on a compressed sparse row matrix (the reservoir adjacency M).
 *
 * CSR layout (Y. Saad, "Iterative Methods for Sparse Linear Systems", 2nd ed., SIAM 2003,
 * sec. 3.4): rowptr[i] .. rowptr[i+1]-1 index the stored entries of row i, whose columns are
 * strictly increasing. Products are plain row-wise sums, summed in column order so that a result
 * does not depend on anything but M and x.
 */
#include <math.h>
#include <stdlib.h>

#include "coexist/error.h"
#include "coexist/net.h"

void cx_csr_free(cx_csr *m)
{
    if (m == NULL)
        return;
    free(m->val);
    free(m->col);
    free(m->rowptr);
    m->n = 0;
    m->nnz = 0;
    m->rowptr = NULL;
    m->col = NULL;
    m->val = NULL;
}

void cx_csr_gemv(const cx_csr *m, double alpha, const double *x, double beta, double *y)
{
    for (cx_idx i = 0; i < m->n; i++) {
        double s = 0.0;
        for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++)
            s += m->val[k] * x[m->col[k]];
        /* beta = 0 must not read y (BLAS convention: y may hold garbage). */
        y[i] = beta == 0.0 ? alpha * s : alpha * s + beta * y[i];
    }
}

void cx_csr_gemm(const cx_csr *m, const double *x, cx_idx b, double *y)
{
    for (cx_idx i = 0; i < m->n; i++) {
        double *yi = y + i * b;
        for (cx_idx c = 0; c < b; c++)
            yi[c] = 0.0;
        for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++) {
            const double v = m->val[k];
            const double *xj = x + m->col[k] * b;
            for (cx_idx c = 0; c < b; c++)
                yi[c] += v * xj[c];
        }
    }
}

void cx_csr_scale(cx_csr *m, double s)
{
    for (cx_idx k = 0; k < m->nnz; k++)
        m->val[k] *= s;
}

int cx_csr_check(const cx_csr *m)
{
    int rc = CX_OK;
    CX_REQUIRE(m != NULL, CX_ERR_INTERNAL, "no matrix");
    CX_REQUIRE(m->n >= 0 && m->nnz >= 0, CX_ERR_INTERNAL, "negative size n = %lld, nnz = %lld",
               (long long)m->n, (long long)m->nnz);
    CX_REQUIRE(m->rowptr != NULL, CX_ERR_INTERNAL, "no row pointers");
    CX_REQUIRE(m->nnz == 0 || (m->col != NULL && m->val != NULL), CX_ERR_INTERNAL,
               "no column or value array");
    CX_REQUIRE(m->rowptr[0] == 0, CX_ERR_INTERNAL, "rowptr[0] = %lld, not 0",
               (long long)m->rowptr[0]);
    CX_REQUIRE(m->rowptr[m->n] == m->nnz, CX_ERR_INTERNAL, "rowptr[n] = %lld but nnz = %lld",
               (long long)m->rowptr[m->n], (long long)m->nnz);
    for (cx_idx i = 0; i < m->n; i++) {
        CX_REQUIRE(m->rowptr[i + 1] >= m->rowptr[i], CX_ERR_INTERNAL,
                   "row pointers decrease at row %lld", (long long)i);
        for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++) {
            CX_REQUIRE(m->col[k] >= 0 && m->col[k] < m->n, CX_ERR_INTERNAL,
                       "row %lld: column %lld out of range [0, %lld)", (long long)i,
                       (long long)m->col[k], (long long)m->n);
            CX_REQUIRE(k == m->rowptr[i] || m->col[k] > m->col[k - 1], CX_ERR_INTERNAL,
                       "row %lld: columns not strictly increasing at entry %lld", (long long)i,
                       (long long)k);
            CX_REQUIRE(isfinite(m->val[k]), CX_ERR_INTERNAL, "row %lld: non-finite value",
                       (long long)i);
        }
    }
done:
    return rc;
}
