/* coexist command line: the cost and memory estimate of a whole study (check, jobs). */
#ifndef CX_CLI_ESTIMATE_H
#define CX_CLI_ESTIMATE_H

#include "coexist/study.h"

typedef struct cx_estimate {
    double flops;      /* modelled flops of the whole grid, shared stages charged once per key */
    double memory_max; /* bytes of the largest cell */
    cx_idx networks;   /* distinct network keys */
    cx_idx drives;     /* distinct drive keys (work units) */
    cx_idx blocks;     /* distinct block keys (cells whose closed-loop runs can share blocks) */
    int sampled;       /* 1 when the grid was too large to bind every cell */
} cx_estimate;

/* Bind every cell (a sample of 2,000,000 when the grid is larger) and add up the cost model of
 * src/cell/keys.c. OUT: *e. Not collective. */
int cx_estimate_study(const cx_study *s, cx_estimate *e /* out */);

/* Refuse a study that cannot fit in this machine's memory: the engine's per-cell bookkeeping on
 * rank 0 (keys, costs, masks: CX_BOOKKEEPING_BYTES per cell) plus the largest cell's own memory
 * (sampled over at most 10,000 cells), against the physical memory. CX_ERR_INVALID with a
 * message naming the file when it does not fit. Not collective. */
#define CX_BOOKKEEPING_BYTES 64.0
int cx_estimate_memory_check(const char *path, const cx_study *s);

#endif
