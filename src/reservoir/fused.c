/* coexist: the closed-loop block kernel fused into one pass over the nodes, for our own tanh
 * (CX_TANH_EXPM1) and a CPU with AVX2 + FMA or AVX-512F.
 *
 * batch.c advances B closed-loop runs as an n x B row-major block in four passes per RK4 stage
 * (pre-activations, tanh, stage update, readout). Profiling the benchmark sweep showed those
 * passes, compiled for the baseline x86-64 (two lanes, no FMA), costing about twice the tanh. Here
 * one pass over the nodes does all four for four runs at a time in one 256-bit register (AVX2) or
 * eight in one 512-bit register (AVX-512F): node i's
 * pre-activations of the runs, their tanh (tanh_expm1_k.h, the very operations of the tanh pass),
 * the stage update (Lu, Hunt & Ott 2018, Chaos 28, 061104; the classical RK4 of Kutta 1901, as in
 * model.c) and node i's share of every run's readout. Every run's arithmetic is the scalar
 * kernels' (model.c), operation for operation and in the same order, with no fused multiply-add
 * outside the tanh (which uses them on every path), so a run's bits are the same as with one run
 * at a time, at either vector width; tests/test_speed.c (test_batch) checks it for B = 1..16, both
 * models and both widths.
 *
 * The block's width w is one or two vectors, L or 2 L columns for L lanes (batch.c pads it with
 * copies of a run); the readouts of the w columns are packed node by node (cx_res_pack_readouts)
 * so that the weights of L runs for one node and one output coordinate are one load. The kernel
 * is written once (fused_kernel.h over simd.h) and compiled for each width. A block of two runs
 * (w = 2) takes its own kernel (pair_kernel.h), which puts L/2 nodes rather than L runs in a
 * register for the tanh and the update.
 */
#include <string.h>

#include "reservoir/reservoir_impl.h"

#if defined(__x86_64__)

int cx_res_fused_lanes(const cx_reservoir *res)
{
    const int lanes = cx_res_simd_lanes();
    return res->tanh_mode == CX_TANH_EXPM1 && lanes >= 4 ? lanes : 0;
}

void cx_res_pack_readouts(cx_idx n, int dim, int features, int w, const double *const *w_out,
                          double *pack, double *pconst)
{
    const int nsq = features == CX_FEAT_LINEAR ? 1 : 2;
    for (cx_idx i = 0; i < n; i++)
        for (int h = 0; h < nsq; h++)
            for (int j = 0; j < dim; j++)
                for (int c = 0; c < w; c++)
                    pack[((i * nsq + h) * dim + j) * w + c] = w_out[c][(h * n + i) * dim + j];
    if (features == CX_FEAT_LINEAR_SQUARES_CONSTANT)
        for (int j = 0; j < dim; j++)
            for (int c = 0; c < w; c++)
                pconst[j * w + c] = w_out[c][2 * n * dim + j];
}

#define CX_FUSED_CHUNK 8 /* nodes whose tanh are evaluated abreast */
#define CX_FUSED_NQ    2 /* vectors per node: the block is one or two vectors wide */
#define CX_FUSED_K     4 /* vectors whose tanh are evaluated abreast (8 measured no faster) */

#define CX_SIMD_LANES 4
#include "reservoir/simd.h"
#include "reservoir/fused_kernel.h"
#include "reservoir/pair_kernel.h"
#undef CX_SIMD_LANES
#include "reservoir/simd.h"

#define CX_SIMD_LANES 8
#include "reservoir/simd.h"
#include "reservoir/fused_kernel.h"
#include "reservoir/pair_kernel.h"
#undef CX_SIMD_LANES
#include "reservoir/simd.h"

void cx_res_stage_fused(const cx_res_ws *ws, const cx_reservoir *res, int lanes, int w, int stage,
                        const double *x, const double *u, double c0, double *acc, double *r,
                        double *xout, const double *pack, const double *pconst, double *y)
{
    if (w == 2 && lanes == 8)
        pair_stage_avx512(ws, res, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (w == 2)
        pair_stage_avx2(ws, res, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else if (lanes == 8)
        stage_fused_avx512(ws, res, w, stage, x, u, c0, acc, r, xout, pack, pconst, y);
    else
        stage_fused_avx2(ws, res, w, stage, x, u, c0, acc, r, xout, pack, pconst, y);
}

#else

int cx_res_fused_lanes(const cx_reservoir *res)
{
    (void)res;
    return 0;
}

void cx_res_pack_readouts(cx_idx n, int dim, int features, int w, const double *const *w_out,
                          double *pack, double *pconst)
{
    (void)n, (void)dim, (void)features, (void)w, (void)w_out, (void)pack, (void)pconst;
}

void cx_res_stage_fused(const cx_res_ws *ws, const cx_reservoir *res, int lanes, int w, int stage,
                        const double *x, const double *u, double c0, double *acc, double *r,
                        double *xout, const double *pack, const double *pconst, double *y)
{
    (void)ws, (void)res, (void)lanes, (void)w, (void)stage, (void)x, (void)u, (void)c0, (void)acc,
        (void)r;
    (void)xout, (void)pack, (void)pconst, (void)y;
}

#endif
