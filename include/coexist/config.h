/* coexist: every compile-time limit in one place (Lua's luaconf.h habit).
 *
 * The limits size fixed-length records (journal records, cube rows) so that a result can be
 * written without allocation; raising one changes the on-disk record size, which is why they
 * are constants rather than sweep-file keys. A test build may shrink them.
 */
#ifndef COEXIST_CONFIG_H
#define COEXIST_CONFIG_H

#include <stdint.h>

/* Signed 64-bit index for every count and offset; narrowed, checked, at the BLAS/MPI edges. */
typedef int64_t cx_idx;

#define CX_MAX_TASKS    16 /* attractors trained into one readout */
#define CX_MAX_DIM      8  /* dimension of one task's signal */
#define CX_MAX_AXES     12 /* axes of one sweep */
#define CX_MAX_RUNS     64 /* closed-loop runs of one cell: tasks + random starts */
#define CX_MAX_FLOW_PAR 6  /* parameters of one built-in flow */
#define CX_NAME_LEN     64 /* names of studies, tasks, axes, labels (with the NUL) */
#define CX_PATH_LEN     1024

#define CX_VERSION "0.1.0"

/* Rate of one core assumed by the cost estimates, in modelled flop/s (see the flop model in
 * src/cell/keys.c, which counts a tanh as 20 flops). Calibrated, not measured per run: cells of
 * jobs/demo-window.yaml ran at 3.5-4 modelled GFLOP/s on this project's 2-core machines. */
#define CX_ASSUMED_FLOP_RATE 3.0e9

#endif
