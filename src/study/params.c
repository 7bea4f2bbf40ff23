/* coexist: the one table of sweep-file parameters (reservoir, training, probe, classify): key,
 * type, range, default, units and where the value lives in cx_cell_params. Parsing, axis
 * validation, binding and the canonical form all read this table, so a default or a range is
 * written exactly once. Classify defaults are not repeated here: they come from
 * cx_class_defaults(). No published method is implemented here. */
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>

#include "study/study_impl.h"

static const char *const model_labels[] = {"continuous", "discrete", NULL};
static const char *const topo_labels[] = {"erdos-renyi", "ring", "delay-line", "small-world", NULL};
static const char *const weight_labels[] = {"uniform", "normal", NULL};
static const char *const layout_labels[] = {"one-per-node", "dense", NULL};
static const char *const feature_labels[] = {"linear-and-squares", "linear",
                                             "linear-squares-constant", NULL};
static const char *const start_labels[] = {"box", "drive-point", NULL};
static const char *const tanh_labels[] = {"libm", "vector", "expm1", NULL};

#define OFF(field) offsetof(cx_cell_params, field)
#define REAL(k, f, rule, lo, hi, def, units, cross)                                                \
    {                                                                                              \
        k, CX_PT_REAL, CX_PS_DOUBLE, OFF(f), rule, lo, hi, def, 0, NULL, units, cross              \
    }
#define CLASSREAL(k, f, rule, lo, hi)                                                              \
    {                                                                                              \
        k, CX_PT_REAL, CX_PS_DOUBLE, OFF(f), rule, lo, hi, 0, 1, NULL, "1", 0                      \
    }
#define INTEGER(k, f, store, lo, def, units, cross)                                                \
    {                                                                                              \
        k, CX_PT_INT, store, OFF(f), CX_R_GE, lo, 0, def, 0, NULL, units, cross                    \
    }
#define BOOLEAN(k, f, def)                                                                         \
    {                                                                                              \
        k, CX_PT_BOOL, CX_PS_INT, OFF(f), CX_R_ANY, 0, 0, def, 0, NULL, "1", 0                     \
    }
#define ENUMERATED(k, f, labels, cross)                                                            \
    {                                                                                              \
        k, CX_PT_ENUM, CX_PS_INT, OFF(f), CX_R_ANY, 0, 0, 0, 0, labels, "1", cross                 \
    }

/* The enum labels are listed in the order of the enum values in net.h, reservoir.h and
 * study.h, so that a label's index is its value. */
static const cx_param table[] = {
    ENUMERATED("reservoir.model", res.model, model_labels, 0),
    INTEGER("reservoir.nodes", net.nodes, CX_PS_IDX, 2, 500, "nodes", 1),
    ENUMERATED("reservoir.topology", net.topology, topo_labels, 1),
    REAL("reservoir.mean_degree", net.mean_degree, CX_R_GT, 0, 0, 3, "edges per node", 1),
    REAL("reservoir.rewire", net.rewire, CX_R_CLOSED, 0, 1, 0.1, "1", 0),
    ENUMERATED("reservoir.weights", net.weight_law, weight_labels, 0),
    REAL("reservoir.weight_scale", net.weight_scale, CX_R_GT, 0, 0, 1, "1", 0),
    BOOLEAN("reservoir.self_loops", net.self_loops, 0),
    REAL("reservoir.spectral_radius", res.spectral_radius, CX_R_GT, 0, 0, 1, "1", 0),
    REAL("reservoir.rate", res.rate, CX_R_GT, 0, 0, 5, "1/time unit", 0),
    REAL("reservoir.leak_rate", res.leak, CX_R_OPEN_LO, 0, 1, 1, "1", 0),
    REAL("reservoir.input_scaling", res.input_scaling, CX_R_GT, 0, 0, 0.1, "1", 0),
    ENUMERATED("reservoir.input_layout", res.input_layout, layout_labels, 0),
    REAL("reservoir.bias", res.bias, CX_R_GE, 0, 0, 0, "1", 0),
    ENUMERATED("reservoir.features", res.features, feature_labels, 0),
    /* The one enum whose default is not its first label: our own tanh is the fastest. */
    {"reservoir.tanh", CX_PT_ENUM, CX_PS_INT, OFF(res.tanh_mode), CX_R_ANY, 0, 0, 2, 0, tanh_labels,
     "1", 0},
    REAL("training.dt", train.dt, CX_R_GT, 0, 0, 0.01, "time units", 1),
    REAL("training.washout", train.washout, CX_R_GE, 0, 0, 20, "time units", 1),
    REAL("training.length", train.length, CX_R_GT, 0, 0, 100, "time units", 1),
    REAL("training.ridge", train.ridge, CX_R_GE, 0, 0, 1e-6, "1", 0),
    REAL("training.blend", train.blend, CX_R_CLOSED, 0, 1, 0.5, "1", 0),
    INTEGER("training.stride", train.stride, CX_PS_IDX, 1, 1, "samples", 0),
    REAL("probe.horizon", probe.horizon, CX_R_GT, 0, 0, 200, "time units", 1),
    REAL("probe.tail", probe.tail, CX_R_GT, 0, 0, 50, "time units", 1),
    INTEGER("probe.random_starts", probe.random_starts, CX_PS_INT, 0, 4, "runs", 1),
    ENUMERATED("probe.start_mode", probe.start_mode, start_labels, 0),
    REAL("probe.start_box", probe.start_box, CX_R_GT, 0, 0, 1, "1", 0),
    REAL("probe.drive_time", probe.drive_time, CX_R_GT, 0, 0, 10, "time units", 0),
    BOOLEAN("probe.lyapunov", probe.lyapunov, 0),
    BOOLEAN("probe.early_stop", probe.early_stop, 1),
    REAL("probe.lyapunov_time", probe.lyapunov_time, CX_R_GT, 0, 0, 100, "time units", 0),
    CLASSREAL("classify.bound", cls.bound, CX_R_GT, 1, 0),
    CLASSREAL("classify.fixed_tol", cls.fixed_tol, CX_R_GT, 0, 0),
    CLASSREAL("classify.match_tol", cls.match_tol, CX_R_GT, 0, 0),
    CLASSREAL("classify.coverage_radius", cls.coverage_radius, CX_R_GT, 0, 0),
    CLASSREAL("classify.coverage_min", cls.coverage_min, CX_R_CLOSED, 0, 1),
    CLASSREAL("classify.period_tol", cls.period_tol, CX_R_GT, 0, 0),
    CLASSREAL("classify.valid_error", cls.valid_error, CX_R_GT, 0, 0),
    {"classify.cloud_points", CX_PT_INT, CX_PS_IDX, OFF(cls.cloud_points), CX_R_GE, 10, 0, 0, 1,
     NULL, "points", 0},
    {"classify.tail_points", CX_PT_INT, CX_PS_IDX, OFF(cls.tail_points), CX_R_GE, 10, 0, 0, 1, NULL,
     "points", 0},
};

#define NTABLE ((int)(sizeof table / sizeof table[0]))
_Static_assert(sizeof table / sizeof table[0] <= CX_PARAM_MAX, "raise CX_PARAM_MAX");

/* Integers are stored as int or cx_idx; beyond these they would not survive the store. */
#define CX_INT_STORE_MAX 2147483647.0
#define CX_IDX_STORE_MAX 9007199254740992.0 /* 2^53: every integer below is exact in a double */

int cx_param_count(void)
{
    return NTABLE;
}

const cx_param *cx_param_at(int i)
{
    return &table[i];
}

int cx_param_find(const char *key)
{
    for (int i = 0; i < NTABLE; i++)
        if (strcmp(table[i].key, key) == 0)
            return i;
    return -1;
}

double cx_param_read(const cx_cell_params *p, int i)
{
    const char *base = (const char *)p + table[i].offset;
    switch (table[i].store) {
    case CX_PS_INT: {
        int v;
        memcpy(&v, base, sizeof v);
        return (double)v;
    }
    case CX_PS_IDX: {
        cx_idx v;
        memcpy(&v, base, sizeof v);
        return (double)v;
    }
    default: {
        double v;
        memcpy(&v, base, sizeof v);
        return v;
    }
    }
}

void cx_param_write(cx_cell_params *p, int i, double v)
{
    char *base = (char *)p + table[i].offset;
    if (table[i].store == CX_PS_INT) {
        int x = (int)v;
        memcpy(base, &x, sizeof x);
    } else if (table[i].store == CX_PS_IDX) {
        cx_idx x = (cx_idx)v;
        memcpy(base, &x, sizeof x);
    } else {
        memcpy(base, &v, sizeof v);
    }
}

void cx_param_defaults(cx_cell_params *p)
{
    memset(p, 0, sizeof *p);
    cx_class_defaults(&p->cls);
    for (int i = 0; i < NTABLE; i++)
        if (!table[i].from_class)
            cx_param_write(p, i, table[i].def);
}

int cx_range_ok(int rule, double lo, double hi, double v)
{
    if (!isfinite(v))
        return 0;
    switch (rule) {
    case CX_R_GT:
        return v > lo;
    case CX_R_GE:
        return v >= lo;
    case CX_R_OPEN_LO:
        return v > lo && v <= hi;
    case CX_R_CLOSED:
        return v >= lo && v <= hi;
    case CX_R_NONZERO:
        return v != 0;
    default:
        return 1;
    }
}

void cx_range_text(int rule, double lo, double hi, char *buf, size_t n)
{
    switch (rule) {
    case CX_R_GT:
        snprintf(buf, n, " > %g", lo);
        break;
    case CX_R_GE:
        snprintf(buf, n, " >= %g", lo);
        break;
    case CX_R_OPEN_LO:
        snprintf(buf, n, " in (%g, %g]", lo, hi);
        break;
    case CX_R_CLOSED:
        snprintf(buf, n, " in [%g, %g]", lo, hi);
        break;
    case CX_R_NONZERO:
        snprintf(buf, n, " other than 0");
        break;
    default:
        buf[0] = '\0';
    }
}

int cx_param_ok(int i, double v)
{
    const cx_param *p = &table[i];
    if (p->type == CX_PT_INT) {
        double max = p->store == CX_PS_INT ? CX_INT_STORE_MAX : CX_IDX_STORE_MAX;
        if (!isfinite(v) || v != floor(v) || fabs(v) > max)
            return 0;
    }
    if (p->type == CX_PT_BOOL)
        return v == 0 || v == 1;
    if (p->type == CX_PT_ENUM) {
        for (int k = 0; p->labels[k] != NULL; k++)
            if (v == k)
                return 1;
        return 0;
    }
    return cx_range_ok(p->rule, p->lo, p->hi, v);
}

void cx_param_expect(int i, char *buf, size_t n)
{
    const cx_param *p = &table[i];
    char r[64];
    if (p->type == CX_PT_BOOL) {
        snprintf(buf, n, "true or false");
    } else if (p->type == CX_PT_ENUM) {
        size_t used = (size_t)snprintf(buf, n, "one of ");
        for (int k = 0; p->labels[k] != NULL && used < n; k++)
            used += (size_t)snprintf(buf + used, n - used, "%s%s", k ? ", " : "", p->labels[k]);
    } else {
        cx_range_text(p->rule, p->lo, p->hi, r, sizeof r);
        snprintf(buf, n, "%s%s", p->type == CX_PT_INT ? "an integer" : "a number", r);
    }
}

int cx_param_label(int i, const char *label)
{
    const cx_param *p = &table[i];
    if (p->type != CX_PT_ENUM)
        return -1;
    for (int k = 0; p->labels[k] != NULL; k++)
        if (strcmp(p->labels[k], label) == 0)
            return k;
    return -1;
}

void cx_param_section_keys(const char *section, char *buf, size_t n)
{
    size_t len = strlen(section), used = 0;
    buf[0] = '\0';
    for (int i = 0; i < NTABLE && used < n; i++)
        if (strncmp(table[i].key, section, len) == 0 && table[i].key[len] == '.')
            used += (size_t)snprintf(buf + used, n - used, "%s%s", used ? ", " : "",
                                     table[i].key + len + 1);
}
