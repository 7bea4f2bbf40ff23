/* coexist: the spectral radius |lambda|max of the reservoir adjacency M.
 *
 * Step 1, exact reduction (trimming). If row v of M has no off-diagonal entry, Laplace expansion
 * of det(M - lambda I) along that row gives (M_vv - lambda) det(M' - lambda I), where M' is M
 * with row and column v deleted; the same holds for a column. So nodes that, within the nodes
 * still left, read nobody or are read by nobody are peeled off one by one, each contributing the
 * eigenvalue M_vv (0 without a self loop), until the "core" is left in which every node has
 * off-diagonal inputs and outputs (the trimming step of strongly-connected-component
 * algorithms: W. McLendon, B. Hendrickson, S. Plimpton & L. Rauchwerger, "Finding strongly
 * connected components in distributed graphs", J. Parallel Distrib. Comput. 65, 901, 2005).
 * A graph with no cycles (the delay line, or any nilpotent pattern) trims away completely and
 * its spectral radius is the largest |M_vv|, 0 without self loops: no iterative method is asked
 * about a zero spectrum, where Arnoldi is known to be unreliable.
 *
 * Step 2, the core:
 * - dgeev (LAPACK, E. Anderson et al., "LAPACK Users' Guide", 3rd ed., SIAM 1999): Hessenberg
 *   reduction and the Francis double-shift QR algorithm on the dense core, eigenvalues only.
 * - implicitly restarted Arnoldi (D. C. Sorensen, "Implicit application of polynomial filters in
 *   a k-step Arnoldi method", SIAM J. Matrix Anal. Appl. 13, 357, 1992; R. B. Lehoucq &
 *   D. C. Sorensen, SIAM J. Matrix Anal. Appl. 17, 789, 1996) through ARPACK's dnaupd/dneupd,
 *   asking for the CX_ARNOLDI_NEV eigenvalues of largest modulus so that complex pairs and near
 *   ties of modulus are resolved together. The starting vectors come from the caller's stream,
 *   so results do not depend on ARPACK's internal random start (ARPACK still draws its own
 *   vector if a Krylov space becomes exactly invariant). An answer is accepted only when two
 *   runs with growing subspaces agree (see arnoldi_agreed); failing that, dgeev takes over for
 *   cores up to CX_ARNOLDI_DENSE_MAX nodes, and above that the call fails with the reason.
 * - a core in which every row holds exactly one entry is a weighted permutation matrix (a
 *   "monomial" matrix, e.g. the simple cycle reservoir). On a cycle of length L whose weights
 *   multiply to P the characteristic polynomial is lambda^L - P, so its eigenvalues are the L-th
 *   roots of P and have modulus |P|^(1/L) (R. A. Horn & C. R. Johnson, "Matrix Analysis", 2nd ed.,
 *   Cambridge 2013, sec. 0.9.6 and 8.3). This case is answered in closed form: all its
 *   eigenvalues tie in modulus, which stalls Arnoldi.
 * Method 0 picks dgeev for cores up to CX_SPECTRAL_DENSE_AUTO nodes, Arnoldi above.
 */
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <lapacke.h>
#include <arpack/arpack.h>

#include "coexist/error.h"
#include "coexist/net.h"

#define CX_SPECTRAL_DENSE_AUTO 1500 /* method 0: dgeev up to this core size */
#define CX_ARNOLDI_DENSE_MAX   4000 /* dgeev fallback when Arnoldi fails, up to this size */
#define CX_ARNOLDI_MIN         64   /* smaller cores always go to dgeev */
#define CX_ARNOLDI_NEV         6
#define CX_ARNOLDI_NCV         40
#define CX_ARNOLDI_TOL         1e-13
#define CX_ARNOLDI_MAXITER     3000
#define CX_ARNOLDI_RUNS        4     /* subspace sizes NCV, 2 NCV, 4 NCV, 8 NCV */
#define CX_ARNOLDI_AGREE       1e-11 /* relative agreement of two runs */

/* The core left after trimming: `sub` is M restricted to the kept nodes, renumbered. */
static int trim(const cx_csr *m, cx_csr *sub /* out */, double *peeled /* out */)
{
    int rc = CX_OK;
    const cx_idx n = m->n;
    cx_idx *nrow = NULL, *ncol = NULL, *cptr = NULL, *crow = NULL, *fill = NULL, *queue = NULL;
    cx_idx *newid = NULL;
    unsigned char *seen = NULL;
    cx_csr s = {0, 0, NULL, NULL, NULL};
    double top = 0.0;

    CX_CALLOC(nrow, n);
    CX_CALLOC(ncol, n);
    CX_CALLOC(cptr, n + 1);
    CX_CALLOC(seen, n);
    CX_ALLOC(queue, n);
    CX_ALLOC(newid, n);
    for (cx_idx i = 0; i < n; i++)
        for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++)
            if (m->col[k] != i) {
                nrow[i]++;
                ncol[m->col[k]]++;
            }
    /* Column-wise pattern of the off-diagonal entries, to visit the readers of a node. */
    for (cx_idx j = 0; j < n; j++)
        cptr[j + 1] = cptr[j] + ncol[j];
    CX_ALLOC(crow, cptr[n] > 0 ? cptr[n] : 1);
    CX_ALLOC(fill, n);
    memcpy(fill, cptr, (size_t)n * sizeof *fill);
    for (cx_idx i = 0; i < n; i++)
        for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++)
            if (m->col[k] != i)
                crow[fill[m->col[k]]++] = i;

    cx_idx head = 0, tail = 0;
    for (cx_idx v = 0; v < n; v++)
        if (nrow[v] == 0 || ncol[v] == 0) {
            seen[v] = 1;
            queue[tail++] = v;
        }
    while (head < tail) {
        cx_idx v = queue[head++];
        for (cx_idx k = m->rowptr[v]; k < m->rowptr[v + 1]; k++) {
            cx_idx j = m->col[k];
            if (j == v) {
                top = fmax(top, fabs(m->val[k]));
                continue;
            }
            if (--ncol[j] == 0 && !seen[j]) {
                seen[j] = 1;
                queue[tail++] = j;
            }
        }
        for (cx_idx k = cptr[v]; k < cptr[v + 1]; k++) {
            cx_idx i = crow[k];
            if (--nrow[i] == 0 && !seen[i]) {
                seen[i] = 1;
                queue[tail++] = i;
            }
        }
    }

    s.n = 0;
    for (cx_idx v = 0; v < n; v++)
        newid[v] = seen[v] ? -1 : s.n++;
    CX_ALLOC(s.rowptr, s.n + 1);
    s.rowptr[0] = 0;
    for (cx_idx v = 0; v < n; v++)
        if (!seen[v])
            for (cx_idx k = m->rowptr[v]; k < m->rowptr[v + 1]; k++)
                s.nnz += !seen[m->col[k]];
    CX_ALLOC(s.col, s.nnz > 0 ? s.nnz : 1);
    CX_ALLOC(s.val, s.nnz > 0 ? s.nnz : 1);
    cx_idx r = 0, e = 0;
    for (cx_idx v = 0; v < n; v++) {
        if (seen[v])
            continue;
        for (cx_idx k = m->rowptr[v]; k < m->rowptr[v + 1]; k++)
            if (!seen[m->col[k]]) {
                s.col[e] = newid[m->col[k]];
                s.val[e] = m->val[k];
                e++;
            }
        s.rowptr[++r] = e;
    }
    *sub = s;
    *peeled = top;
    s.rowptr = NULL;
    s.col = NULL;
    s.val = NULL;
done:
    cx_csr_free(&s);
    free(seen);
    free(newid);
    free(queue);
    free(fill);
    free(crow);
    free(cptr);
    free(ncol);
    free(nrow);
    return rc;
}

/* *applies = 1 and *rho set when every row of m holds exactly one (off-diagonal) entry. */
static int monomial_radius(const cx_csr *m, double *rho /* out */, int *applies /* out */)
{
    int rc = CX_OK;
    unsigned char *seen = NULL;
    *applies = 0;
    if (m->nnz != m->n)
        return CX_OK;
    for (cx_idx i = 0; i < m->n; i++)
        if (m->rowptr[i + 1] - m->rowptr[i] != 1)
            return CX_OK;
    CX_CALLOC(seen, m->n);
    double r = 0.0;
    for (cx_idx s = 0; s < m->n; s++) {
        if (seen[s])
            continue;
        /* After trimming every node lies on a cycle, so following the single input of each
         * node from s returns to s. */
        double logsum = 0.0;
        cx_idx len = 0, v = s;
        int zero = 0;
        do {
            seen[v] = 1;
            double w = fabs(m->val[m->rowptr[v]]);
            if (w == 0.0)
                zero = 1;
            else
                logsum += log(w);
            len++;
            v = m->col[m->rowptr[v]];
        } while (!seen[v]);
        CX_REQUIRE(v == s, CX_ERR_INTERNAL, "trimmed core is not a permutation at node %lld",
                   (long long)v);
        if (!zero)
            r = fmax(r, exp(logsum / (double)len));
    }
    *rho = r;
    *applies = 1;
done:
    free(seen);
    return rc;
}

static int dense_radius(const cx_csr *m, double *rho /* out */)
{
    int rc = CX_OK;
    double *a = NULL, *wr = NULL, *wi = NULL, *work = NULL;
    CX_REQUIRE(m->n <= (cx_idx)INT_MAX, CX_ERR_INVALID, "matrix of order %lld too large for dgeev",
               (long long)m->n);
    const lapack_int n = (lapack_int)m->n;
    /* Column-major, lda = n. */
    CX_CALLOC(a, m->n * m->n);
    CX_ALLOC(wr, m->n);
    CX_ALLOC(wi, m->n);
    for (cx_idx i = 0; i < m->n; i++)
        for (cx_idx k = m->rowptr[i]; k < m->rowptr[i + 1]; k++)
            a[m->col[k] * m->n + i] = m->val[k];
    double query = 0.0;
    lapack_int info = LAPACKE_dgeev_work(LAPACK_COL_MAJOR, 'N', 'N', n, a, n, wr, wi, NULL, 1, NULL,
                                         1, &query, -1);
    CX_REQUIRE(info == 0, CX_ERR_LAPACK, "dgeev workspace query: info = %d", (int)info);
    lapack_int lwork = (lapack_int)query;
    CX_ALLOC(work, lwork);
    info = LAPACKE_dgeev_work(LAPACK_COL_MAJOR, 'N', 'N', n, a, n, wr, wi, NULL, 1, NULL, 1, work,
                              lwork);
    CX_REQUIRE(info >= 0, CX_ERR_LAPACK, "dgeev: illegal argument %d", (int)-info);
    CX_REQUIRE(info == 0, CX_ERR_NUMERIC,
               "dgeev: the QR algorithm did not converge (%d eigenvalues missing)", (int)info);
    double r = 0.0;
    for (cx_idx i = 0; i < m->n; i++)
        r = fmax(r, hypot(wr[i], wi[i]));
    *rho = r;
done:
    free(work);
    free(wi);
    free(wr);
    free(a);
    return rc;
}

/* One Arnoldi run with `ncv` basis vectors. *converged = 0 with `why` filled when ARPACK did
 * not deliver all wanted eigenvalues; that is an outcome, not an error. */
static int arnoldi_radius(const cx_csr *m, cx_rng *rng, int ncv, double *rho /* out */,
                          int *converged /* out */, char *why, size_t why_len)
{
    int rc = CX_OK;
    const a_int n = (a_int)m->n;
    const a_int nev = CX_ARNOLDI_NEV;
    const a_int lworkl = 3 * ncv * ncv + 6 * ncv;
    double *resid = NULL, *v = NULL, *workd = NULL, *workl = NULL, *dr = NULL, *di = NULL;
    double *z = NULL, *workev = NULL;
    a_int *select = NULL;
    a_int iparam[11] = {0}, ipntr[14] = {0};

    *converged = 0;
    CX_ALLOC(resid, m->n);
    CX_ALLOC(v, m->n * ncv);
    CX_ALLOC(workd, 3 * m->n);
    CX_ALLOC(workl, lworkl);
    CX_ALLOC(dr, nev + 1);
    CX_ALLOC(di, nev + 1);
    CX_ALLOC(z, m->n * (nev + 1));
    CX_ALLOC(workev, 3 * ncv);
    CX_CALLOC(select, ncv);
    for (cx_idx i = 0; i < m->n; i++)
        resid[i] = cx_rng_range(rng, -1.0, 1.0);
    iparam[0] = 1; /* exact shifts */
    iparam[2] = CX_ARNOLDI_MAXITER;
    iparam[6] = 1;           /* regular mode: OP = M */
    a_int ido = 0, info = 1; /* info = 1: use resid as the starting vector */
    for (;;) {
        dnaupd_c(&ido, "I", n, "LM", nev, CX_ARNOLDI_TOL, resid, ncv, v, n, iparam, ipntr, workd,
                 workl, lworkl, &info);
        if (ido != -1 && ido != 1)
            break;
        cx_csr_gemv(m, 1.0, workd + ipntr[0] - 1, 0.0, workd + ipntr[1] - 1);
    }
    if (info == 1 || info == 3 || info == -9999) {
        snprintf(why, why_len, "ARPACK dnaupd info = %d (%d of %d eigenvalues converged)",
                 (int)info, (int)iparam[4], (int)nev);
        goto done;
    }
    CX_REQUIRE(info == 0, CX_ERR_LAPACK, "ARPACK dnaupd: info = %d", (int)info);
    dneupd_c(0, "A", select, dr, di, z, n, 0.0, 0.0, workev, "I", n, "LM", nev, CX_ARNOLDI_TOL,
             resid, ncv, v, n, iparam, ipntr, workd, workl, lworkl, &info);
    if (info != 0 || iparam[4] < nev) {
        snprintf(why, why_len, "ARPACK dneupd info = %d (%d of %d eigenvalues converged)",
                 (int)info, (int)iparam[4], (int)nev);
        goto done;
    }
    double r = 0.0;
    for (a_int i = 0; i < iparam[4]; i++)
        r = fmax(r, hypot(dr[i], di[i]));
    *rho = r;
    *converged = 1;
done:
    free(select);
    free(workev);
    free(z);
    free(di);
    free(dr);
    free(workl);
    free(workd);
    free(v);
    free(resid);
    return rc;
}

/* Arnoldi runs with subspace sizes CX_ARNOLDI_NCV, 2x, 4x, 8x (capped at the order), each from
 * a fresh starting vector, until two successive converged runs agree on |lambda|max to
 * CX_ARNOLDI_AGREE; the larger of the two is taken. In a crowded spectrum (the disc of the
 * circular law) a single run can converge to a set of Ritz values that misses the outermost
 * eigenvalue: at N = 50000 a run with 40 vectors settled 6e-4 below runs with 80 and 120. Two
 * independent runs agreeing is a confirmation, not a proof (common practice, no published
 * source). *ok = 0 and `why` filled when no two runs agreed. */
static int arnoldi_agreed(const cx_csr *m, cx_rng *rng, double *rho /* out */, int *ok /* out */,
                          char *why, size_t why_len)
{
    int rc = CX_OK;
    double prev = -1.0;
    int ncv = CX_ARNOLDI_NCV, last = 0;
    *ok = 0;
    for (int attempt = 0; attempt < CX_ARNOLDI_RUNS; attempt++, ncv *= 2) {
        int use = (cx_idx)ncv < m->n ? ncv : (int)m->n;
        if (use == last)
            break;
        last = use;
        double r = 0.0;
        int conv = 0;
        CX_TRY(arnoldi_radius(m, rng, use, &r, &conv, why, why_len));
        if (!conv)
            continue;
        if (prev >= 0.0 && fabs(r - prev) <= CX_ARNOLDI_AGREE * fmax(r, prev)) {
            *rho = fmax(r, prev);
            *ok = 1;
            goto done;
        }
        if (prev >= 0.0)
            snprintf(why, why_len, "successive runs disagree: %.15g with %d vectors, %.15g before",
                     r, use, prev);
        prev = r;
    }
    if (why[0] == '\0')
        snprintf(why, why_len, "no two runs converged");
done:
    return rc;
}

int cx_net_spectral_radius(const cx_csr *m, int method, cx_rng *rng, double *rho /* out */)
{
    int rc = CX_OK;
    cx_csr core = {0, 0, NULL, NULL, NULL};
    double peeled = 0.0, r = 0.0;
    cx_rng fixed;
    CX_REQUIRE(method >= 0 && method <= 2, CX_ERR_INVALID,
               "spectral radius method must be 0 (automatic), 1 (dgeev) or 2 (Arnoldi), got %d",
               method);
    CX_TRY(cx_csr_check(m));
    CX_TRY(trim(m, &core, &peeled));
    if (core.n == 0) {
        *rho = peeled;
        goto done;
    }
    CX_REQUIRE(core.n <= (cx_idx)INT_MAX / (CX_ARNOLDI_NCV << CX_ARNOLDI_RUNS), CX_ERR_INVALID,
               "matrix of order %lld too large", (long long)core.n);
    int monomial = 0;
    CX_TRY(monomial_radius(&core, &r, &monomial));
    if (monomial) {
        *rho = fmax(r, peeled);
        goto done;
    }
    int use_arnoldi = core.n >= CX_ARNOLDI_MIN &&
                      (method == 2 || (method == 0 && core.n > CX_SPECTRAL_DENSE_AUTO));
    if (!use_arnoldi) {
        CX_TRY(dense_radius(&core, &r));
    } else {
        if (rng == NULL) {
            /* A caller without a stream still gets a reproducible start. */
            cx_rng_seed(&fixed, 0x2385u, CX_RNG_NETWORK);
            rng = &fixed;
        }
        char why[160] = "";
        int ok = 0;
        CX_TRY(arnoldi_agreed(&core, rng, &r, &ok, why, sizeof why));
        if (!ok) {
            CX_REQUIRE(core.n <= CX_ARNOLDI_DENSE_MAX, CX_ERR_NUMERIC,
                       "Arnoldi gave no confirmed answer for a core of %lld nodes (%s) and the "
                       "core is too large for dgeev",
                       (long long)core.n, why);
            CX_TRY(dense_radius(&core, &r));
        }
    }
    *rho = fmax(r, peeled);
done:
    cx_csr_free(&core);
    return rc;
}
