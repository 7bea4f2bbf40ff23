/* coexist: private structures of the study module (the parsed sweep file, its parameter table
 * and its axes). Only src/study/ includes this. */
#ifndef CX_STUDY_IMPL_H
#define CX_STUDY_IMPL_H

#include <stddef.h>
#include <stdint.h>

#include "coexist/study.h"
#include "study/yamltree_impl.h"

/* Value types of sweep-file keys. */
enum cx_ptype { CX_PT_REAL = 0, CX_PT_INT = 1, CX_PT_BOOL = 2, CX_PT_ENUM = 3 };
/* How a value is stored in cx_cell_params. */
enum cx_pstore { CX_PS_DOUBLE = 0, CX_PS_INT = 1, CX_PS_IDX = 2 };
/* Range rules (lo, hi from the table entry). */
enum cx_prule {
    CX_R_ANY = 0,
    CX_R_GT = 1,      /* x > lo */
    CX_R_GE = 2,      /* x >= lo */
    CX_R_OPEN_LO = 3, /* lo < x <= hi */
    CX_R_CLOSED = 4,  /* lo <= x <= hi */
    CX_R_NONZERO = 5  /* x != 0 */
};

/* One key of the reservoir, training, probe and classify sections. */
typedef struct cx_param {
    const char *key; /* "reservoir.nodes" */
    int type;        /* enum cx_ptype */
    int store;       /* enum cx_pstore */
    size_t offset;   /* into cx_cell_params */
    int rule;        /* enum cx_prule */
    double lo, hi;
    double def;                /* default (unused when from_class) */
    int from_class;            /* default taken from cx_class_defaults() */
    const char *const *labels; /* CX_PT_ENUM: labels, index = enum value; NULL-terminated */
    const char *units;
    int cross; /* takes part in a cell-level rule, so axes on it must be checked per cell */
} cx_param;

#define CX_PARAM_MAX 64

int cx_param_count(void);
const cx_param *cx_param_at(int i);
/* Index of a dotted key, or -1. */
int cx_param_find(const char *key);
/* Every table default written into p (p is zeroed first; classify defaults come from
 * cx_class_defaults). */
void cx_param_defaults(cx_cell_params *p /* out */);
double cx_param_read(const cx_cell_params *p, int i);
void cx_param_write(cx_cell_params *p, int i, double v);
/* 1 when v satisfies the type (whole number for integers) and range rule of parameter i. */
int cx_param_ok(int i, double v);
/* "an integer >= 2", "a number in (0, 1]", "one of continuous, discrete", ... */
void cx_param_expect(int i, char *buf, size_t n);
/* Enum value of a label, or -1. */
int cx_param_label(int i, const char *label);
/* The keys of one section ("reservoir"), comma separated, into buf. */
void cx_param_section_keys(const char *section, char *buf, size_t n);
/* Range check shared by parameters and task keys. */
int cx_range_ok(int rule, double lo, double hi, double v);
void cx_range_text(int rule, double lo, double hi, char *buf, size_t n);

/* Keys of one task entry that an axis tasks.<name>.<key> may sweep. */
enum cx_task_key {
    CX_TK_RADIUS = 0,
    CX_TK_SPEED,
    CX_TK_ELLIPTICITY,
    CX_TK_PHASE,
    CX_TK_SCALE,
    CX_TK_ROTATE,
    CX_TK_TRANSIENT,
    CX_TK_SPACING,
    CX_TK_COUNT,
    CX_TK_NKEYS
};

enum cx_axis_target {
    CX_AT_PARAM = 0,  /* a key of the parameter table */
    CX_AT_SEED,       /* replicate number */
    CX_AT_OVERLAP,    /* spacing of every family of the cell's task list */
    CX_AT_TASK_COUNT, /* count of every family */
    CX_AT_TASK_SET,   /* which task_sets list */
    CX_AT_TASK_KEY    /* tasks.<name>.<key> */
};

typedef struct cx_axis_def {
    char name[CX_NAME_LEN];
    int kind;   /* enum cx_axis_kind */
    int target; /* enum cx_axis_target */
    int param;  /* CX_AT_PARAM: table index */
    char task[CX_NAME_LEN];
    int task_key; /* CX_AT_TASK_KEY: enum cx_task_key */
    const char *units;
    cx_idx len;
    double *values;
    int *codes;    /* categorical: enum value or task list index per label */
    char **labels; /* categorical: len strings */
    int line, col;
} cx_axis_def;

/* One entry of a task list as written: a task, or a family that expands into several. */
typedef struct cx_task_entry {
    int family;
    cx_task_spec spec; /* a task, or (family) unused */
    cx_family_spec fam;
    int nsenses;
    unsigned given; /* bit (1 << enum cx_task_key) per key written in the file */
    char path_written[CX_PATH_LEN];
    int line, col;
} cx_task_entry;

typedef struct cx_task_list {
    char name[CX_NAME_LEN]; /* task_sets key, or "" for a plain tasks list */
    int n;
    cx_task_entry *e;
    int line, col;
} cx_task_list;

enum cx_weights_mode { CX_W_BLEND = 0, CX_W_EQUAL = 1, CX_W_LISTED = 2 };

struct cx_study {
    char name[CX_NAME_LEN];
    uint64_t seed;
    char *description;
    char *source;
    char *canonical;
    char file[CX_PATH_LEN];
    char dir[CX_PATH_LEN];
    cx_cell_params base; /* defaults and fixed values; no tasks */
    int given[CX_PARAM_MAX];
    int pline[CX_PARAM_MAX], pcol[CX_PARAM_MAX];
    int weights_mode;
    int nweights;
    double weights[CX_MAX_TASKS];
    int wline, wcol;
    int sets; /* 1 when the lists come from task_sets */
    int nlists;
    cx_task_list *lists;
    int tline, tcol; /* position of tasks / task_sets */
    int degree_set;  /* mean_degree given or on an axis (else 3, small world 4) */
    int naxes;
    cx_axis_def axes[CX_MAX_AXES];
    cx_idx cells;
    int max_tasks, max_runs;
};


/* Scalar helpers shared by the parsers (values.c). Each failing helper pushes
 * "FILE:LINE:COL: KEY: expected WHAT, got VALUE" and returns CX_ERR_INVALID. */
void cx_sv_got(const cx_ynode *n, char *buf, size_t len);
int cx_sv_fail(const char *file, const cx_ynode *n, const char *key, const char *what);
int cx_sv_number(const char *file, const cx_ynode *n, const char *key, const char *what,
                 double *v /* out */);
int cx_sv_bool(const char *file, const cx_ynode *n, const char *key, int *v /* out */);
int cx_sv_string(const char *file, const cx_ynode *n, const char *key, char *buf, size_t cap);
/* A plain name [A-Za-z0-9_-]+ shorter than `cap` (dot allowed when `dots`). */
int cx_sv_name(const char *file, const cx_ynode *n, const char *key, int dots, char *buf,
               size_t cap);
/* n must be a mapping whose keys are all in `allowed` (comma-and-space separated). */
int cx_sv_keys(const char *file, const cx_ynode *n, const char *section, const char *allowed);
/* A list of 1..max numbers. OUT: v, *count. */
int cx_sv_numbers(const char *file, const cx_ynode *n, const char *key, int min, int max,
                  double *v /* out */, int *count /* out */);

/* Task entries (tasks.c). */
int cx_task_entry_parse(const cx_study *s, const cx_ynode *n, const char *prefix, int index,
                        cx_task_entry *e /* out */);
int cx_task_key_find(const char *name);
const char *cx_task_key_name(int k);
const char *cx_task_key_units(int k);
int cx_task_key_ok(int k, double v);
void cx_task_key_expect(int k, char *buf, size_t n);
/* 1 when key k can be set on entry e (radius on a cycle or a cycle family, ...). */
int cx_task_key_applies(const cx_task_entry *e, int k);
/* Entry name: the family's or the task's. */
const char *cx_task_entry_name(const cx_task_entry *e);
/* Set key k on a task (degrees for rotate are converted to radians) or on a family. */
void cx_task_key_set(cx_task_spec *t, cx_family_spec *f, int k, double v);
/* Canonical lines of one entry: appends "PREFIX.key: value" strings through `emit`. */
int cx_task_entry_canon(const cx_study *s, const cx_task_entry *e, const char *prefix, int index,
                        int (*emit)(void *ctx, const char *line), void *ctx);

/* Axes (axes.c). */
int cx_axes_parse(cx_study *s, const cx_ynode *n);
void cx_axes_free(cx_study *s);
/* Index of the axis that sets key k of the task named `name` (also overlap / task_count for
 * spacing / count of a family), or -1. */
int cx_axes_task_key(const cx_study *s, const char *name, int k, int family);

/* Grid (bind.c). */
int cx_study_validate_grid(cx_study *s);
/* Canonical form (canonical.c). */
int cx_study_make_canonical(cx_study *s);

#endif
