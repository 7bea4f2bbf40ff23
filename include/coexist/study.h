/* coexist: a study (one sweep file): its fixed parameters, its axes and the grid of cells.
 *
 * A sweep file is YAML (parsed with libyaml's event API so every value keeps its line and
 * column). Every error names file:line:column, the key, and what was expected; unknown keys are
 * errors. The grid is the Cartesian product of the axes in file order; cell indices are
 * row-major (the first axis varies slowest).
 */
#ifndef COEXIST_STUDY_H
#define COEXIST_STUDY_H

#include <stddef.h>
#include <stdint.h>

#include "coexist/config.h"
#include "coexist/net.h"
#include "coexist/task.h"
#include "coexist/reservoir.h"
#include "coexist/classify.h"

enum cx_start_mode {
    CX_START_BOX = 0,        /* reservoir state uniform in [-start_box, start_box]^N */
    CX_START_DRIVE_POINT = 1 /* reservoir driven for drive_time by a constant input point drawn
                                uniformly in the training data's bounding box */
};

typedef struct cx_probe_params {
    double horizon;    /* time units of each closed-loop run */
    double tail;       /* time units judged at the end, 0 < tail <= horizon */
    int random_starts; /* runs from random starts besides one per task */
    int start_mode;    /* enum cx_start_mode */
    double start_box;
    double drive_time;
    int lyapunov;   /* 1 = estimate the largest Lyapunov exponent of each run */
    int early_stop; /* 1 = end a run that has settled on a fixed point (labels unchanged) */
    double lyapunov_time;
} cx_probe_params;

/* Every parameter of one grid cell, with axis values bound. Zero-initialised by cx_study_bind
 * so that the stage keys (hashes of fields) are stable. */
typedef struct cx_cell_params {
    uint64_t study_seed;
    uint64_t replicate; /* value on the seed axis (0 without one) */
    cx_net_params net;
    cx_res_params res;
    cx_train_params train;
    cx_probe_params probe;
    cx_class_params cls;
    int ntasks;
    int dim;
    cx_task_spec tasks[CX_MAX_TASKS];
} cx_cell_params;

enum cx_axis_kind {
    CX_AXIS_NUMERIC = 0,     /* real values */
    CX_AXIS_INTEGER = 1,     /* integer values (stored as doubles that are whole numbers) */
    CX_AXIS_CATEGORICAL = 2, /* labels; coordinate values are 0..len-1 */
    CX_AXIS_SEED = 3         /* replicate draws; values are the replicate numbers */
};

typedef struct cx_axis_info {
    const char *name;  /* the key as written, e.g. "reservoir.spectral_radius", "seed" */
    const char *units; /* "1", "time units", "nodes", ... */
    int kind;
    cx_idx len;
    const double *values;      /* len values (categorical: 0..len-1) */
    const char *const *labels; /* categorical: len labels; else NULL */
} cx_axis_info;

typedef struct cx_study cx_study;

/* Parse and validate a sweep file. On bad input returns CX_ERR_INVALID with a message of the
 * form "FILE:LINE:COL: KEY: expected ..., got ...". Relative trajectory paths are resolved
 * against the sweep file's directory. OUT: *s. Not collective. */
int cx_study_load(const char *path, cx_study **s /* out */);
/* The same from a buffer; `name` stands for the file name in messages. */
int cx_study_load_buffer(const char *text, size_t len, const char *name, cx_study **s /* out */);
void cx_study_destroy(cx_study **s);

const char *cx_study_name(const cx_study *s);
uint64_t cx_study_seed(const cx_study *s);
/* The sweep file text as read. */
const char *cx_study_source(const cx_study *s);
/* Canonical resolved form: one "key: value" line per parameter and axis with every default
 * filled in, sorted by key. Two studies compute the same cube iff their canonical forms are equal.
 */
const char *cx_study_canonical(const cx_study *s);

int cx_study_naxes(const cx_study *s);
void cx_study_axis(const cx_study *s, int i, cx_axis_info *out /* out */);
/* Axis index by name, or -1. */
int cx_study_axis_find(const cx_study *s, const char *name);
cx_idx cx_study_cells(const cx_study *s);
void cx_study_coords(const cx_study *s, cx_idx cell, cx_idx *coords /* out, naxes */);
cx_idx cx_study_index(const cx_study *s, const cx_idx *coords);

/* The largest task count and run count of any cell (sizes of per-run arrays). */
int cx_study_max_tasks(const cx_study *s);
int cx_study_max_runs(const cx_study *s);

/* Bind the axis values of one cell. Fails with CX_ERR_INVALID when the combination is invalid
 * (e.g. mean degree >= nodes at this point), naming the axes involved. OUT: *p. */
int cx_study_bind(const cx_study *s, cx_idx cell, cx_cell_params *p /* out */);

/* Parse "name=value,name=value" (values matched to the nearest axis value within 1e-9
 * relative, or to a label) into a cell index; every axis must be named. OUT: *cell. */
int cx_study_find_cell(const cx_study *s, const char *at, cx_idx *cell /* out */);

#endif
