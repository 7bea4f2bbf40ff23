/* coexist: the fixed random network of a reservoir (adjacency M in CSR) and its input matrix.
 *
 * Topologies: directed Erdos-Renyi (Erdos & Renyi 1959), the simple cycle reservoir and the
 * delay line (Rodan & Tino 2011, IEEE Trans. Neural Netw. 22, 131), and the Watts-Strogatz small
 * world (Watts & Strogatz 1998, Nature 393, 440). Spectral radius by LAPACK dgeev (small N) or
 * the implicitly restarted Arnoldi method (Lehoucq & Sorensen 1996, SIAM J. Matrix Anal. Appl.
 * 17, 789; ARPACK) for large N.
 */
#ifndef COEXIST_NET_H
#define COEXIST_NET_H

#include "coexist/config.h"
#include "coexist/rng.h"

enum cx_topology {
    CX_TOPO_ERDOS_RENYI = 0, /* each i<-j present with prob. d/(N-1), d/N with self loops */
    CX_TOPO_RING = 1,        /* simple cycle: node i reads node i-1 (mod N) */
    CX_TOPO_DELAY_LINE = 2,  /* node i reads node i-1, no wrap: nilpotent, spectral radius 0 */
    CX_TOPO_SMALL_WORLD = 3  /* ring lattice of mean degree d, each edge rewired with prob. p */
};

enum cx_weight_law {
    CX_WEIGHT_UNIFORM = 0, /* U(-a, a) */
    CX_WEIGHT_NORMAL = 1   /* N(0, a^2) */
};

enum cx_input_layout {
    CX_INPUT_ONE_PER_NODE = 0, /* node i reads one random coordinate with weight U(-1, 1) */
    CX_INPUT_DENSE = 1         /* every entry U(-1, 1) */
};

/* What the network draw depends on; zero-initialise before filling so that hashing is stable. */
typedef struct cx_net_params {
    cx_idx nodes;
    int topology;        /* enum cx_topology */
    double mean_degree;  /* d: expected in-degree (ER), lattice degree (small world, even) */
    double rewire;       /* small world rewiring probability p in [0, 1] */
    int weight_law;      /* enum cx_weight_law */
    double weight_scale; /* a */
    int self_loops;      /* ER only: 0 = no i<-i edges (the default) */
} cx_net_params;

/* Compressed sparse row matrix, n x n, 0-based. Row i holds the inputs of node i. */
typedef struct cx_csr {
    cx_idx n;
    cx_idx nnz;
    cx_idx *rowptr; /* n + 1 */
    cx_idx *col;    /* nnz */
    double *val;    /* nnz */
} cx_csr;

/* Draw M from the stream `rng` (the caller keys it). OUT: *m, free with cx_csr_free.
 * Fails with CX_ERR_INVALID on bad parameters (N < 2, d >= N, ...). Not collective. */
int cx_net_draw(const cx_net_params *p, cx_rng *rng, cx_csr *m /* out */);

void cx_csr_free(cx_csr *m);

/* y = alpha * M x + beta * y. */
void cx_csr_gemv(const cx_csr *m, double alpha, const double *x, double beta, double *y);

/* Y = M X for a block of b column vectors stored row-major (X is n x b, ld = b). */
void cx_csr_gemm(const cx_csr *m, const double *x, cx_idx b, double *y);

/* Multiply every stored value by s. */
void cx_csr_scale(cx_csr *m, double s);

/* Largest eigenvalue modulus of M.
 * method 0 = automatic (dgeev for n <= 1500, Arnoldi above), 1 = dgeev, 2 = Arnoldi.
 * Nodes without inputs or without outputs are first peeled off, repeatedly (exact: each adds
 * its self-loop weight as an eigenvalue), and n above is the size of what is left; an
 * acyclic matrix (delay line) gives 0 (or its largest |self loop|), a weighted permutation
 * (ring) is answered in closed form. `rng` supplies Arnoldi's starting vectors; NULL uses a
 * fixed internal stream. Fails with CX_ERR_NUMERIC when Arnoldi is not confirmed and the
 * matrix is too large for the dgeev fallback (4000). OUT: *rho. Not collective. */
int cx_net_spectral_radius(const cx_csr *m, int method, cx_rng *rng, double *rho /* out */);

/* Input matrix W_in, n x dim row-major, drawn from `rng`. OUT: w (caller allocates n*dim). */
int cx_net_input(cx_idx n, int dim, int layout, cx_rng *rng, double *w /* out */);

/* Check CSR invariants (sorted unique columns per row, bounds); returns CX_OK or an error. */
int cx_csr_check(const cx_csr *m);

#endif
