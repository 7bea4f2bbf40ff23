/* coexist: the sweep engine. It turns a study into work units, hands them to MPI ranks, keeps a
 * CRC-checked journal per rank, and merges results into one HDF5 cube that survives crashes and
 * resumes.
 *
 * Layers, bottom up: CRC-32C (crc.c) -> fixed-size result records and per-rank journals
 * (record.c, journal.c) -> the sweep plan and its work units (plan.c, units.c) -> the cube
 * (cube.c) -> the coordinator and workers (engine.c).
 */
#ifndef COEXIST_ENGINE_H
#define COEXIST_ENGINE_H

#include <mpi.h>
#include <stddef.h>
#include <stdint.h>

#include "coexist/config.h"
#include "coexist/cell.h"
#include "coexist/study.h"

/* Batches a worker holds at once: the one it computes and DEPTH - 1 in reserve (prefetch). A
 * deeper reserve hides the coordinator's latency for very cheap units; a shallower one leaves
 * fewer units stranded on one worker at the end of a sweep. */
#ifndef CX_ENGINE_DEPTH
#define CX_ENGINE_DEPTH 4
#endif

/* CRC-32C (Castagnoli polynomial, reflected). Start with crc = 0; pass the previous value to
 * continue over several buffers. Not collective. */
uint32_t cx_crc32c(uint32_t crc, const void *data, size_t n);

/* 64-bit FNV-1a hash of a byte string (the study hash). */
uint64_t cx_hash64(const void *data, size_t n);

/* What the engine knows about a grid: its shape, the sizes of per-run arrays, the texts that
 * identify it, and (on the coordinator) the stage keys and costs of every cell. */
typedef struct cx_plan_axis {
    char name[CX_NAME_LEN]; /* as written in the sweep file */
    char units[CX_NAME_LEN];
    int kind; /* enum cx_axis_kind */
    cx_idx len;
    double *values; /* len values */
    char **labels;  /* categorical: len labels; else NULL */
} cx_plan_axis;

typedef struct cx_plan {
    char name[CX_NAME_LEN];
    int naxes;
    cx_plan_axis axes[CX_MAX_AXES];
    cx_idx ncells;
    int max_runs;
    int max_tasks;
    char *source;    /* sweep file text */
    char *canonical; /* canonical resolved form */
    uint64_t hash;   /* cx_hash64 of canonical */
    /* Per cell, filled by cx_plan_keys (NULL until then). A cell whose parameters do not bind
     * has keys 0 and cost 0. */
    uint64_t *network_key;
    uint64_t *drive_key;
    uint64_t *block_key; /* units of equal cost are ordered by it (cx_cell_block_key) */
    double *cost_shared; /* flops of the network and drive stages (paid once per unit) */
    double *cost_own;    /* flops of the solve and probe stages (paid per cell) */
} cx_plan;

/* Build a plan from a study (shape and texts only). OUT: *plan. Not collective. */
int cx_plan_from_study(const cx_study *s, cx_plan **plan /* out */);
/* Fill the per-cell keys and costs by binding every cell. Not collective. */
int cx_plan_keys(cx_plan *plan, const cx_study *s);
/* An empty plan for tests and benchmarks: axes added with cx_plan_add_axis. */
int cx_plan_create(const char *name, int max_runs, int max_tasks, const char *canonical,
                   cx_plan **plan /* out */);
int cx_plan_add_axis(cx_plan *plan, const char *name, const char *units, cx_idx len,
                     const double *values);
/* Allocate the per-cell arrays after the axes are added (keys 0, costs 0). */
int cx_plan_alloc_keys(cx_plan *plan);
void cx_plan_destroy(cx_plan **plan);
/* Row-major coordinates of a cell. */
void cx_plan_coords(const cx_plan *plan, cx_idx cell, cx_idx *coords /* out */);

/* Work units: every cell of one drive key, consecutive; units of one network key form a group.
 * `todo[c]` != 0 selects the cells to schedule. OUT: *u. Not collective. */
typedef struct cx_units cx_units;
int cx_units_build(const cx_plan *plan, const uint8_t *todo, int max_unit_cells,
                   cx_units **u /* out */);
void cx_units_destroy(cx_units **u);
cx_idx cx_units_count(const cx_units *u);
cx_idx cx_units_cells(const cx_units *u);
double cx_units_cost(const cx_units *u); /* total estimated flops */
cx_idx cx_units_groups(const cx_units *u);
cx_idx cx_units_left(const cx_units *u); /* units not yet taken */
/* Take the next batch for worker w (0..nworkers-1): units of w's current group if any are
 * left, else of the unclaimed group with the largest remaining cost, else taken from the back
 * of the group with the largest remaining cost. The batch holds units whose cost reaches
 * remaining / (2 nworkers) (at least one unit, at most max_units units and max_cells cells);
 * max_units 0 means no unit limit; a group used up below that cost is followed by the next
 * unclaimed group (which w then owns). Writes the cells, in order, to cells[] and returns the
 * count (0 when nothing is left). Not collective; rank 0 only. */
cx_idx cx_units_take(cx_units *u, int w, int nworkers, int max_units, cx_idx max_cells,
                     int64_t *cells /* out */, cx_idx *nunits /* out */);

/* One result record: a cell's result in a fixed-size byte layout set by (max_runs, max_tasks),
 * ending in a CRC-32C. Besides the result it holds the cell's wall time and finish time, which
 * are not results. */
size_t cx_record_size(int max_runs, int max_tasks);
void cx_record_encode(const cx_cell_result *r, double wall, double finished, int rank, int max_runs,
                      int max_tasks, unsigned char *buf /* out */);
/* Returns 0 when the record's magic and CRC are good; fills *r (runs beyond max_runs set to
 * not-run), *wall and *finished. */
int cx_record_decode(const unsigned char *buf, int max_runs, int max_tasks,
                     cx_cell_result *r /* out */, double *wall /* out */,
                     double *finished /* out */);
/* The cell index of an encoded record (no check). */
int64_t cx_record_cell(const unsigned char *buf);
double cx_record_finished(const unsigned char *buf);
int cx_record_status(const unsigned char *buf);

/* A rank's journal: a 64-byte header (magic, version, record size, study hash, rank, run and
 * task counts, header CRC) followed by records. Appends are buffered; cx_journal_sync flushes
 * and fsyncs. Not collective. */
typedef struct cx_journal cx_journal;
/* Open for appending. An existing journal with the same hash and record size keeps its good
 * records (a torn or corrupt tail is cut off); one with a different hash is refused
 * (CX_ERR_MISMATCH); a missing one is created. */
int cx_journal_open(const char *path, uint64_t hash, int rank, int max_runs, int max_tasks,
                    cx_journal **j /* out */);
int cx_journal_append(cx_journal *j, const unsigned char *record);
/* Hand buffered records to the operating system (survives a killed process). */
int cx_journal_flush(cx_journal *j);
/* Flush and fsync (survives a lost machine). */
int cx_journal_sync(cx_journal *j);
int cx_journal_close(cx_journal **j);
int64_t cx_journal_records(const cx_journal *j);

typedef struct cx_replay_stats {
    int rank;             /* from the header */
    int64_t records;      /* good records */
    int64_t torn;         /* 1 when a partial record was at the end */
    int64_t bad_crc;      /* full-size records with a bad magic or CRC */
    double last_finished; /* finish time of the last good record (Unix seconds) */
} cx_replay_stats;
/* Read a journal; call fn for each good record (fn returns CX_OK to continue). The header must
 * match hash and record size (else CX_ERR_MISMATCH, or CX_ERR_INVALID for a file that is not a
 * journal). OUT: *st. */
typedef int (*cx_replay_fn)(void *ctx, const unsigned char *record);
int cx_journal_replay(const char *path, uint64_t hash, int max_runs, int max_tasks, cx_replay_fn fn,
                      void *ctx, cx_replay_stats *st /* out */);
/* Read only the header of a journal (for status). */
int cx_journal_peek(const char *path, uint64_t *hash, int *rank, size_t *record_size, int *max_runs,
                    int *max_tasks);
/* The journal directory of a cube (CUBE + ".journal") and the path of rank r's journal. */
void cx_journal_dir(const char *cube, char *out, size_t n);
void cx_journal_path(const char *cube, int rank, char *out, size_t n);
/* The journal of rank r of shard i of n: CUBE.journal/shard-IIII-of-NNNN-rank-RRRR.jnl. */
void cx_journal_shard_path(const char *cube, int index, int count, int rank, char *out, size_t n);
/* Parse a journal file name (no directory) of that form; 0 when it is one. */
int cx_journal_shard_parse(const char *name, int *index /* out */, int *count /* out */);

/* Shards: mine[c] = 1 for the cells of shard `index` of `count` (0 <= index < count), a pure
 * function of the plan's keys and costs (cost-balanced, longest first). OUT: mine (ncells
 * bytes), *cost (the shard's estimated flops; may be NULL). Not collective. */
int cx_shard_mask(const cx_plan *plan, int index, int count, uint8_t *mine /* out */,
                  double *cost /* out */);

/* The cube. */
typedef struct cx_cube cx_cube;
enum { CX_CUBE_ABSENT = 0, CX_CUBE_OURS = 1, CX_CUBE_FOREIGN = 2 };
/* What is at `path`: nothing, a coexist cube, or something else. Serial, read-only. */
int cx_cube_probe(const char *path, int *kind /* out */);
/* Compare a cube's canonical form with the plan's. On a difference returns CX_ERR_MISMATCH
 * with a message naming the keys that differ. Serial, read-only. */
int cx_cube_check(const char *path, const cx_plan *plan);
/* Create a new cube with every dataset and attribute (serial, one rank), written under a
 * temporary name, flushed, closed and renamed into place. */
int cx_cube_create(const char *path, const cx_plan *plan, int ranks, double start_time);
/* Open an existing cube read-write with the MPI-IO driver. Collective over comm. */
int cx_cube_open(MPI_Comm comm, const char *path, const cx_plan *plan, cx_cube **c /* out */);
/* Read the done mask (ncells bytes). Independent. */
int cx_cube_read_done(cx_cube *c, uint8_t *done /* out */);
/* Write n encoded records (any cells, any order). Independent: each rank writes its own cells
 * into the early-allocated datasets. */
int cx_cube_write_records(cx_cube *c, const unsigned char *records, cx_idx n);
/* Final attributes (identical values on every rank), then a collective flush. Collective. */
typedef struct cx_cube_final {
    int ranks;
    double start_time, end_time;
    cx_cell_counts counts; /* to be added to the counts already stored */
    cx_idx computed;       /* cells computed in this run */
    int complete;
} cx_cube_final;
int cx_cube_finish(cx_cube *c, const cx_cube_final *f);
/* Close. Collective. */
int cx_cube_close(cx_cube **c);

/* A read-only summary of a cube for `status`. Serial. */
typedef struct cx_cube_summary {
    char name[CX_NAME_LEN];
    cx_idx ncells;
    cx_idx done;
    cx_idx by_status[8];
    uint64_t hash;
    int max_runs, max_tasks;
    int ranks;
    int complete;
    double start_time, end_time;
    double wall_sum; /* sum of per-cell wall times of done cells */
} cx_cube_summary;
int cx_cube_summarize(const char *path, cx_cube_summary *s /* out */, uint8_t **done /* out */);

/* What computes a cell. The default uses cx_study_bind + cx_cell_compute_group; tests and
 * benchmarks plug in their own. compute_group may be NULL (cells one at a time through compute);
 * otherwise it computes the leading *used (>= 1) of cells[0..n-1], n <= CX_CELL_GROUP, into
 * out[0..*used-1], each as compute would, and the engine records them one by one. */
typedef struct cx_engine_ops {
    int (*create)(void **state);
    void (*destroy)(void **state);
    int (*compute)(void *state, const cx_study *s, const cx_plan *plan, cx_idx cell,
                   cx_cell_result *out /* out */);
    void (*counts)(const void *state, cx_cell_counts *c /* out */);
    int (*compute_group)(void *state, const cx_study *s, const cx_plan *plan, const int64_t *cells,
                         int n, cx_cell_result *out /* out */, int *used /* out */);
} cx_engine_ops;
const cx_engine_ops *cx_engine_cell_ops(void);

typedef struct cx_engine_opts {
    const char *cube;          /* output path */
    int fresh;                 /* start over: remove an existing cube of ours and its journals */
    double checkpoint_seconds; /* journal fsync and cube write interval per rank */
    double progress_seconds;   /* plain progress line interval (a terminal gets a bar) */
    int coordinator_computes;  /* -1 auto, 0 no, 1 yes */
    int max_units_per_batch;   /* 0: sized by cost (factoring) */
    double flop_rate;          /* flops per second per core assumed for the estimate */
    int blas_threads;
    int quiet;         /* no start lines and no progress */
    int keep_journals; /* do not remove journals after a complete run */
    /* Shard mode (shard_count > 0): compute only shard shard_index of shard_count, write only
     * journals named by shard and rank, never create or write the cube. */
    int shard_index, shard_count;
    /* Merge mode: compute nothing; create the cube if absent and replay every journal. */
    int merge_only;
    /* Seconds that cells still computing after a stop request may take; after that the
     * process leaves them (they stay not done) and exits with status 3. */
    double grace_seconds;
} cx_engine_opts;
void cx_engine_opts_default(cx_engine_opts *o /* out */);

typedef struct cx_engine_stats {
    cx_idx cells;     /* in the grid */
    cx_idx units;     /* scheduled in this run */
    cx_idx scheduled; /* cells in those units */
    cx_idx batches;
    cx_idx done_in_cube;    /* done before this run, found in the cube */
    cx_idx replayed;        /* found in journals and merged */
    cx_idx computed;        /* computed in this run */
    cx_idx by_status[8];    /* over the whole grid at the end */
    int64_t dropped;        /* journal records dropped on replay (torn or bad CRC) */
    cx_cell_counts counts;  /* stage counts summed over ranks, this run */
    double wall;            /* seconds of the run phase (dispatch to last result) */
    double rank0_cpu;       /* CPU seconds of rank 0 during the run phase */
    double write_seconds;   /* seconds spent in journal appends/syncs and cube writes (sum) */
    double compute_seconds; /* seconds spent computing cells (sum over ranks) */
    double estimated_flops; /* estimated cost of the cells scheduled in this run */
    int coordinator_computes;
    int compute_ranks; /* ranks (or rank 0's thread) that computed */
    int complete;
    int interrupted;
} cx_engine_stats;

/* Run the sweep: check or create the cube, replay journals, compute the missing cells, merge
 * and finish. Every rank passes the same plan (keys needed on rank 0 only) and study.
 * Collective over comm. OUT: *st (meaningful on rank 0). */
int cx_engine_run(MPI_Comm comm, const cx_plan *plan, const cx_study *s, const cx_engine_ops *ops,
                  const cx_engine_opts *o, cx_engine_stats *st /* out */);

/* Ask a running engine to stop (async-signal-safe): no more work is handed out, cells being
 * computed may finish within opts.grace_seconds, the rest stay not done. */
void cx_engine_request_stop(void);

#endif
