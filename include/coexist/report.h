/* coexist: from a cube to findings. Serial, read-only access to a cube; Wilson score intervals;
 * per-cell outcome classes and their aggregation over replicate draws and other axes; capacity
 * (the largest task count a network of a given size still holds); region maps and curves drawn
 * with cairo as PNG, SVG and PDF; CSV tables; phase portraits of one cell's runs.
 *
 * Nothing here writes to a cube. Every function is serial and not collective.
 */
#ifndef COEXIST_REPORT_H
#define COEXIST_REPORT_H

#include <stdint.h>
#include <stdio.h>

#include "coexist/config.h"
#include "coexist/cell.h"
#include "coexist/study.h"

/* z of a two-sided 95 % normal interval: the 0.975 quantile of N(0, 1). */
#define CX_Z95 1.959963984540054

/* Wilson score interval for k successes in n trials (Wilson 1927, J. Am. Stat. Assoc. 22, 209):
 * centre (k + z^2/2) / (n + z^2), half-width z sqrt(k (n - k) / n + z^2 / 4) / (n + z^2).
 * n = 0 gives [0, 1]; k = 0 gives lo = 0 and k = n gives hi = 1 exactly. OUT: *lo, *hi. */
void cx_wilson(int64_t k, int64_t n, double z, double *lo /* out */, double *hi /* out */);

/* The outcome class of one cell, as maps and tables count it. A computed cell is
 * multifunctional when every task's own run is reconstructed; otherwise its class is the most
 * frequent failure among its task runs (ties go to the later, more severe one in this list).
 * A cell whose status is a failure (not positive definite, non-finite, invalid) is `failed`.
 * `tied` and `no data` only label aggregates (maps): no single class has the most cells, or no
 * cell is done. Never renumber: CSV files and tests use these names. */
enum cx_class {
    CX_CLASS_MULTI = 0,
    CX_CLASS_OTHER = 1,
    CX_CLASS_FIXED = 2,
    CX_CLASS_CYCLE = 3,
    CX_CLASS_APERIODIC = 4,
    CX_CLASS_DIVERGED = 5,
    CX_CLASS_FAILED = 6,
    CX_CLASS_CELLS = 7, /* classes a single cell can have */
    CX_CLASS_TIED = 7,
    CX_CLASS_NONE = 8,
    CX_CLASS_COUNT = 9
};
/* "multifunctional", "other-trained", "fixed-point", "untrained-cycle", "untrained-aperiodic",
 * "diverged", "failed", "tied", "no-data". */
const char *cx_class_name(int cls);
/* Colour of a class as 0xRRGGBB (Okabe & Ito 2008 palette, our assignment) and its name. */
uint32_t cx_class_colour(int cls);
const char *cx_class_colour_name(int cls);

/* One axis of a cube as stored in its coordinate dataset. */
typedef struct cx_rcube_axis {
    char name[CX_NAME_LEN];  /* attribute axis_name */
    char units[CX_NAME_LEN]; /* attribute units */
    int kind;                /* enum cx_axis_kind (from the stored sweep file when it loads) */
    cx_idx len;
    double *values;
    char **labels; /* categorical: len labels, else NULL */
} cx_rcube_axis;

/* What a report needs of a cube, read once. Per-run arrays are ncells x max_runs, row-major
 * in the cube's own order (axes..., run). */
typedef struct cx_rcube {
    char path[CX_PATH_LEN];
    char name[CX_NAME_LEN];
    char *source;    /* the sweep file text stored in the cube */
    char *canonical; /* its canonical form */
    int naxes;
    cx_rcube_axis axes[CX_MAX_AXES];
    cx_idx ncells;
    int max_runs, max_tasks;
    uint8_t *done;
    signed char *status;
    signed char *multifunctional;
    short *untrained_kinds; /* ncells x 3: distinct fixed points, periodic orbits, aperiodic */
    signed char *outcome;   /* ncells x max_runs */
    int *ntasks;            /* per cell: tasks of the cell (0 where it does not bind) */
    int ntasks_exact;       /* 1 when ntasks came from binding the stored sweep file */
} cx_rcube;

/* Open a cube and read its axes, labels and per-cell outcome data. Fails with CX_ERR_INVALID
 * for a file that is not a coexist cube. OUT: *c. */
int cx_rcube_open(const char *path, cx_rcube **c /* out */);
void cx_rcube_close(cx_rcube **c);
/* Axis index by name (as in the sweep file, or the coordinate dataset's name), or -1. */
int cx_rcube_axis_find(const cx_rcube *c, const char *name);
/* Row-major coordinates of a cell. */
void cx_rcube_coords(const cx_rcube *c, cx_idx cell, cx_idx *coords /* out */);
/* Read every stored result of one cell into *r in the layout the engine writes (runs beyond
 * the cube's max_runs and tasks beyond max_tasks are not run / NaN); *done says whether the
 * cell is in the file. r->ntasks and r->nruns are not stored in a cube and are set from the
 * study (c->ntasks) and the outcomes. OUT: *r, *done. */
int cx_rcube_read_cell(const cx_rcube *c, cx_idx cell, cx_cell_result *r /* out */,
                       int *done /* out */);
/* The class of one cell (enum cx_class; CX_CLASS_NONE when it is not done). */
int cx_rcube_cell_class(const cx_rcube *c, cx_idx cell);

/* "axis=value,axis=value" -> a selection: fixed[i] = 1 and at[i] = the value's index for each
 * named axis (numbers match within 1e-9 relative, categorical axes by label). */
int cx_report_parse_where(const cx_rcube *c, const char *text, int *fixed /* out, naxes */,
                          cx_idx *at /* out, naxes */);

/* Counts of one group of cells: those sharing the values of the group axes, restricted to the
 * fixed axes' values, pooled over every other axis. */
typedef struct cx_group {
    cx_idx coords[CX_MAX_AXES]; /* index on each group axis, in group-axis order */
    int64_t cells;              /* cells of the group in the grid */
    int64_t done;               /* of them done: the trials n */
    int64_t multi;              /* of them multifunctional: k */
    int64_t by_class[CX_CLASS_CELLS];
} cx_group;

typedef struct cx_table {
    int ngroup; /* number of group axes */
    int group_axis[CX_MAX_AXES];
    int fixed[CX_MAX_AXES]; /* per cube axis */
    cx_idx at[CX_MAX_AXES];
    cx_idx ngroups;   /* product of the group axes' lengths (1 with none) */
    cx_group *groups; /* row-major over the group axes */
} cx_table;

/* Aggregate the cube into groups. group_axis: ngroup cube axis indices (distinct, none fixed).
 * OUT: *t. */
int cx_table_build(const cx_rcube *c, const int *group_axis, int ngroup, const int *fixed,
                   const cx_idx *at, cx_table **t /* out */);
void cx_table_destroy(cx_table **t);
/* The majority class of a group (CX_CLASS_TIED when two or more classes share the largest
 * count, CX_CLASS_NONE when no cell is done). */
int cx_group_majority(const cx_group *g);

/* Capacity: for each combination of the group axes other than the task-count axis, the largest
 * task count K such that the success (multifunctional) probability is at or above `threshold`
 * at K and at every smaller task count of the grid; 0 when it fails already at the smallest.
 * `lower` uses the Wilson lower bounds, `upper` the upper bounds instead of k/n (z = CX_Z95),
 * so lower <= capacity <= upper. A task count with no done cell counts as a failure for the
 * estimate and the lower bound, and as a success for the upper bound (its interval is [0, 1]). */
typedef struct cx_capacity_row {
    cx_idx coords[CX_MAX_AXES]; /* on the group axes; the task-count entry is unused */
    double capacity, lower, upper;
    int64_t done_min; /* fewest done cells at any task count of this row */
} cx_capacity_row;

typedef struct cx_capacity {
    int k_pos; /* position of the task-count axis among the table's group axes */
    double threshold;
    cx_idx nrows;
    cx_capacity_row *rows; /* row-major over the other group axes */
} cx_capacity;

int cx_capacity_compute(const cx_rcube *c, const cx_table *t, int k_pos, double threshold,
                        cx_capacity **cap /* out */);
void cx_capacity_destroy(cx_capacity **cap);

/* Output files. `base` is a path without extension; figures are written as base.png, base.svg
 * and base.pdf. */
typedef struct cx_map_opts {
    int probability;   /* 1: probability of multifunctionality; 0: majority class */
    const char *title; /* first line (the study name) */
    const char *note;  /* second line: what was fixed and what aggregated */
} cx_map_opts;

/* A region map of a two-axis table (x = its first group axis, y = its second): one rectangle
 * per pair of grid values, equal widths, labelled with the values. Also writes base.csv with
 * one line per rectangle: the axis values, the counts, the class or probability, the colour
 * and the centre of the rectangle in PNG pixels. */
int cx_map_write(const cx_rcube *c, const cx_table *t, const cx_map_opts *o, const char *base);

/* Capacity against the first other axis (network size when it is one), error bars from lower to
 * upper, one line per combination of the remaining axes; log x when the values span a factor of
 * 4 or more. */
int cx_capacity_plot(const cx_rcube *c, const cx_table *t, const cx_capacity *cap,
                     const char *base);

/* CSV tables. */
int cx_table_write_csv(const cx_rcube *c, const cx_table *t, FILE *f);
int cx_capacity_write_csv(const cx_rcube *c, const cx_table *t, const cx_capacity *cap, FILE *f);

/* Phase portraits of one cell from a cell dump (cx_cell_dump's file): for each run, its tail
 * (the last n_tail samples) on coordinates (cx, cy) over the training signals of every task.
 * Writes DIR/run-<j>.png, .svg, .pdf. */
int cx_portrait_write(const char *dump_path, const char *title, int cx, int cy, cx_idx n_tail,
                      const char *dir);

#endif
