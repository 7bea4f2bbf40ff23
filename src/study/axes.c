/* coexist: the axes of a sweep file. An axis is an ordered list of values for one key: an
 * explicit list, an inclusive linear range with a count, a geometric range (equal ratios
 * between neighbours, from and to > 0), or a stepped range that includes `to` when it lands on
 * it. Categorical axes list labels of an enumerated key or names of task_sets; the seed axis
 * lists replicate numbers. The grid is the Cartesian product in file order. No published
 * method is implemented here beyond linear and geometric spacing. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "study/study_impl.h"

/* Axes longer than this are surely a typing error (and would make a useless cube). */
#define CX_AXIS_MAX_LEN 1000000

void cx_axes_free(cx_study *s)
{
    for (int i = 0; i < s->naxes; i++) {
        cx_axis_def *a = &s->axes[i];
        if (a->labels != NULL)
            for (cx_idx j = 0; j < a->len; j++)
                free(a->labels[j]);
        free(a->labels);
        free(a->codes);
        free(a->values);
        a->labels = NULL;
        a->codes = NULL;
        a->values = NULL;
    }
    s->naxes = 0;
}

int cx_axes_task_key(const cx_study *s, const char *name, int k, int family)
{
    for (int i = 0; i < s->naxes; i++) {
        const cx_axis_def *a = &s->axes[i];
        if (a->target == CX_AT_TASK_KEY && a->task_key == k && strcmp(a->task, name) == 0)
            return i;
        if (family && k == CX_TK_SPACING && a->target == CX_AT_OVERLAP)
            return i;
        if (family && k == CX_TK_COUNT && a->target == CX_AT_TASK_COUNT)
            return i;
    }
    return -1;
}

/* What one value of the axis must satisfy. */
typedef struct axis_rule {
    int param;    /* table index, or -1 */
    int task_key; /* enum cx_task_key, or -1 */
    int integer;
} axis_rule;

static int rule_ok(const axis_rule *r, double v)
{
    if (r->integer && v != floor(v))
        return 0;
    if (r->param >= 0)
        return cx_param_ok(r->param, v);
    if (r->task_key >= 0)
        return cx_task_key_ok(r->task_key, v);
    return isfinite(v) && v >= 0 && v <= 18446744073709549568.0; /* seed: a uint64 */
}

static void rule_expect(const axis_rule *r, char *buf, size_t n)
{
    if (r->param >= 0)
        cx_param_expect(r->param, buf, n);
    else if (r->task_key >= 0)
        cx_task_key_expect(r->task_key, buf, n);
    else
        snprintf(buf, n, "an integer >= 0");
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* OUT: *found = 1 and *dup = the value when two values agree within 1e-9 relative. The
 * answer is not folded into the return code, which is an error code (CX_ERR_NOMEM is 1). */
static int find_duplicate(const double *v, cx_idx n, double *dup, int *found_out)
{
    int rc = CX_OK, found = 0;
    double *c = NULL;
    *found_out = 0;
    CX_ALLOC(c, n);
    memcpy(c, v, (size_t)n * sizeof *c);
    qsort(c, (size_t)n, sizeof *c, cmp_double);
    for (cx_idx i = 1; i < n && !found; i++)
        if (fabs(c[i] - c[i - 1]) <= 1e-9 * fmax(fabs(c[i]), fabs(c[i - 1]))) {
            *dup = c[i];
            found = 1;
        }
    *found_out = found;
done:
    free(c);
    return rc;
}

static int range_count(const char *file, const cx_ynode *n, const char *key, cx_idx *len)
{
    int rc = CX_OK;
    double c = 0;
    CX_TRY(cx_sv_number(file, n, key, "an integer >= 1", &c));
    if (c != floor(c) || c < 1 || c > CX_AXIS_MAX_LEN)
        CX_RAISE(cx_sv_fail(file, n, key, "an integer in [1, 1000000]"), NULL);
    *len = (cx_idx)c;
done:
    return rc;
}

/* The values of a range mapping {from, to, count | step, log}. */
static int range_values(const cx_study *s, const cx_ynode *n, const char *key, const axis_rule *r,
                        const char *what, cx_axis_def *a)
{
    int rc = CX_OK;
    char sub[160];
    double from = 0, to = 0, step = 0;
    int logr = 0;
    const cx_ynode *f = cx_ytree_get(n, "from"), *t = cx_ytree_get(n, "to");
    const cx_ynode *c = cx_ytree_get(n, "count"), *st = cx_ytree_get(n, "step");
    const cx_ynode *lg = cx_ytree_get(n, "log");
    CX_TRY(cx_sv_keys(s->file, n, key, "from, to, count, step, log"));
    if ((c == NULL) == (st == NULL))
        CX_RAISE(cx_sv_fail(s->file, n, key, "a range with either count or step"), NULL);
    if (c != NULL) {
        snprintf(sub, sizeof sub, "%s.count", key);
        CX_TRY(range_count(s->file, c, sub, &a->len));
    }
    if (f == NULL || (t == NULL && !(c != NULL && a->len == 1)))
        CX_RAISE(cx_sv_fail(s->file, n, key, "a range with from and to"), NULL);
    snprintf(sub, sizeof sub, "%s.from", key);
    CX_TRY(cx_sv_number(s->file, f, sub, "a number", &from));
    to = from;
    if (t != NULL) {
        snprintf(sub, sizeof sub, "%s.to", key);
        CX_TRY(cx_sv_number(s->file, t, sub, "a number", &to));
    }
    if (lg != NULL) {
        snprintf(sub, sizeof sub, "%s.log", key);
        CX_TRY(cx_sv_bool(s->file, lg, sub, &logr));
    }
    if (c != NULL) {
        if (logr && !(from > 0 && to > 0)) {
            snprintf(sub, sizeof sub, "%s.%s", key, from > 0 ? "to" : "from");
            CX_RAISE(cx_sv_fail(s->file, from > 0 ? t : f, sub,
                                "a number > 0 (a log range needs from, to > 0)"),
                     NULL);
        }
        CX_ALLOC(a->values, a->len);
        for (cx_idx i = 0; i < a->len; i++) {
            double u = a->len > 1 ? (double)i / (double)(a->len - 1) : 0;
            a->values[i] =
                logr ? exp(log(from) + u * (log(to) - log(from))) : from + u * (to - from);
        }
        if (a->len > 1)
            a->values[a->len - 1] = to; /* exact end, not a rounded sum */
        a->values[0] = from;
    } else {
        snprintf(sub, sizeof sub, "%s.step", key);
        if (logr)
            CX_RAISE(cx_sv_fail(s->file, lg, key, "log only with count, not with step"), NULL);
        CX_TRY(cx_sv_number(s->file, st, sub, "a number other than 0", &step));
        double m = step != 0 ? (to - from) / step : -1;
        if (step == 0 || !(m > -1e-9) || m + 1 > CX_AXIS_MAX_LEN)
            CX_RAISE(cx_sv_fail(s->file, st, sub,
                                "a step other than 0 that leads from `from` towards `to`"),
                     NULL);
        a->len = (cx_idx)floor(m + 1e-9) + 1;
        CX_ALLOC(a->values, a->len);
        for (cx_idx i = 0; i < a->len; i++)
            a->values[i] = from + (double)i * step;
        if (fabs(a->values[a->len - 1] - to) <= 1e-9 * fabs(step))
            a->values[a->len - 1] = to;
    }
    for (cx_idx i = 0; i < a->len; i++) {
        double v = a->values[i];
        /* Integer keys: a range value within rounding of a whole number is that number. */
        if (r->integer && fabs(v - nearbyint(v)) <= 1e-9 * fmax(1, fabs(v)))
            a->values[i] = v = nearbyint(v);
        if (!rule_ok(r, v)) {
            char got[64];
            snprintf(got, sizeof got, "%.17g", v);
            CX_RAISE(CX_ERR_INVALID,
                     "%s:%d:%d: %s: expected %s, got %s (value %lld of the "
                     "range)",
                     s->file, a->line, a->col, key, what, got, (long long)i + 1);
        }
    }
done:
    return rc;
}

/* The values of a numeric axis (list or range). */
static int numeric_values(const cx_study *s, const cx_ynode *n, const char *key, const axis_rule *r,
                          cx_axis_def *a)
{
    int rc = CX_OK;
    char what[160];
    rule_expect(r, what, sizeof what);
    if (n->kind == CX_YN_SEQ) {
        if (n->n == 0)
            CX_RAISE(cx_sv_fail(s->file, n, key, "a list of at least one value"), NULL);
        a->len = n->n;
        CX_ALLOC(a->values, a->len);
        for (cx_idx i = 0; i < n->n; i++) {
            CX_TRY(cx_sv_number(s->file, n->val[i], key, what, &a->values[i]));
            if (!rule_ok(r, a->values[i]))
                CX_RAISE(cx_sv_fail(s->file, n->val[i], key, what), NULL);
        }
    } else if (n->kind == CX_YN_MAP) {
        CX_TRY(range_values(s, n, key, r, what, a));
    } else {
        CX_RAISE(cx_sv_fail(s->file, n, key, "a list of values or a range mapping"), NULL);
    }
    double dup = 0;
    int found = 0;
    CX_TRY(find_duplicate(a->values, a->len, &dup, &found));
    if (found) {
        char got[64];
        snprintf(got, sizeof got, "%.17g twice", dup);
        rc = CX_FAIL(CX_ERR_INVALID, "%s:%d:%d: %s: expected distinct values, got %s", s->file,
                     a->line, a->col, key, got);
    }
done:
    return rc;
}

static int seed_values(const cx_study *s, const cx_ynode *n, cx_axis_def *a)
{
    int rc = CX_OK;
    axis_rule r = {-1, -1, 1};
    if (n->kind == CX_YN_MAP) {
        double from = 0;
        const cx_ynode *f = cx_ytree_get(n, "from");
        CX_TRY(cx_sv_keys(s->file, n, "seed", "from, count"));
        if (cx_ytree_get(n, "count") == NULL)
            CX_RAISE(cx_sv_fail(s->file, n, "seed", "a mapping with count"), NULL);
        CX_TRY(range_count(s->file, cx_ytree_get(n, "count"), "seed.count", &a->len));
        if (f != NULL) {
            CX_TRY(cx_sv_number(s->file, f, "seed.from", "an integer >= 0", &from));
            if (!rule_ok(&r, from) || from + (double)a->len > 9007199254740992.0)
                CX_RAISE(cx_sv_fail(s->file, f, "seed.from", "an integer >= 0"), NULL);
        }
        CX_ALLOC(a->values, a->len);
        for (cx_idx i = 0; i < a->len; i++)
            a->values[i] = from + (double)i;
        goto done;
    }
    CX_TRY(numeric_values(s, n, "seed", &r, a));
done:
    return rc;
}

/* Labels of a categorical axis; code_of returns the code of a label or -1. */
static int categorical_values(const cx_study *s, const cx_ynode *n, const char *key,
                              const char *what, int (*code_of)(const cx_study *, int, const char *),
                              int param, cx_axis_def *a)
{
    int rc = CX_OK;
    if (n->kind != CX_YN_SEQ || n->n == 0)
        CX_RAISE(cx_sv_fail(s->file, n, key, "a list of at least one label"), NULL);
    a->len = n->n;
    CX_ALLOC(a->values, a->len);
    CX_CALLOC(a->codes, a->len);
    CX_CALLOC(a->labels, a->len);
    for (cx_idx i = 0; i < n->n; i++) {
        const cx_ynode *v = n->val[i];
        if (v->kind != CX_YN_SCALAR || (a->codes[i] = code_of(s, param, v->text)) < 0)
            CX_RAISE(cx_sv_fail(s->file, v, key, what), NULL);
        for (cx_idx j = 0; j < i; j++)
            if (a->codes[j] == a->codes[i])
                CX_RAISE(cx_sv_fail(s->file, v, key, "distinct labels"), NULL);
        size_t l = strlen(v->text) + 1;
        CX_ALLOC(a->labels[i], l);
        memcpy(a->labels[i], v->text, l);
        a->values[i] = (double)i;
    }
done:
    return rc;
}

static int param_code(const cx_study *s, int param, const char *label)
{
    (void)s;
    return cx_param_label(param, label);
}

static int set_code(const cx_study *s, int param, const char *label)
{
    (void)param;
    for (int i = 0; i < s->nlists; i++)
        if (strcmp(s->lists[i].name, label) == 0)
            return i;
    return -1;
}

static int any_family(const cx_study *s)
{
    for (int l = 0; l < s->nlists; l++)
        for (int i = 0; i < s->lists[l].n; i++)
            if (s->lists[l].e[i].family)
                return 1;
    return 0;
}

/* tasks.<name>.<key>: the named entries exist and take the key. */
static int task_key_axis(const cx_study *s, const cx_ynode *kn, const char *key, cx_axis_def *a)
{
    int rc = CX_OK, found = 0;
    const char *dot = strrchr(key + 6, '.');
    char names[512];
    size_t used = 0;
    if (dot == NULL || dot == key + 6 || (size_t)(dot - (key + 6)) >= CX_NAME_LEN)
        CX_RAISE(cx_sv_fail(s->file, kn, "axes", "tasks.<task name>.<key>"), NULL);
    memcpy(a->task, key + 6, (size_t)(dot - (key + 6)));
    a->task[dot - (key + 6)] = '\0';
    a->task_key = cx_task_key_find(dot + 1);
    if (a->task_key < 0)
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: %s: expected a task key among radius, speed, ellipticity, phase, "
                 "scale, rotate, transient, spacing, count, got %s",
                 s->file, kn->line, kn->col, key, dot + 1);
    names[0] = '\0';
    for (int l = 0; l < s->nlists; l++)
        for (int i = 0; i < s->lists[l].n; i++) {
            const cx_task_entry *e = &s->lists[l].e[i];
            const char *nm = cx_task_entry_name(e);
            if (used < sizeof names)
                used += (size_t)snprintf(names + used, sizeof names - used, "%s%s",
                                         used ? ", " : "", nm);
            if (strcmp(nm, a->task) != 0)
                continue;
            found = 1;
            if (!cx_task_key_applies(e, a->task_key))
                CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a key that task %s takes, got %s",
                         s->file, kn->line, kn->col, key, a->task, dot + 1);
        }
    if (!found)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a task name among %s, got %s", s->file,
                 kn->line, kn->col, key, names, a->task);
    a->target = CX_AT_TASK_KEY;
    a->kind = a->task_key == CX_TK_COUNT ? CX_AXIS_INTEGER : CX_AXIS_NUMERIC;
    a->units = cx_task_key_units(a->task_key);
done:
    return rc;
}

static int parse_axis(cx_study *s, const cx_ynode *kn, const cx_ynode *v, cx_axis_def *a)
{
    int rc = CX_OK;
    const char *key = kn->text;
    char what[512];
    axis_rule r = {-1, -1, 0};
    a->line = kn->line;
    a->col = kn->col;
    if (strlen(key) >= CX_NAME_LEN)
        CX_RAISE(cx_sv_fail(s->file, kn, "axes", "an axis key of fewer than 64 characters"), NULL);
    snprintf(a->name, sizeof a->name, "%s", key);
    if (strcmp(key, "seed") == 0) {
        a->target = CX_AT_SEED;
        a->kind = CX_AXIS_SEED;
        a->units = "replicate";
        CX_TRY(seed_values(s, v, a));
    } else if (strcmp(key, "overlap") == 0 || strcmp(key, "task_count") == 0) {
        int count = key[0] == 't';
        if (!any_family(s))
            CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a task list with a family, got none",
                     s->file, kn->line, kn->col, key);
        a->target = count ? CX_AT_TASK_COUNT : CX_AT_OVERLAP;
        a->kind = count ? CX_AXIS_INTEGER : CX_AXIS_NUMERIC;
        r.task_key = count ? CX_TK_COUNT : CX_TK_SPACING;
        r.integer = count;
        a->units = cx_task_key_units(r.task_key);
        CX_TRY(numeric_values(s, v, key, &r, a));
    } else if (strcmp(key, "tasks") == 0) {
        if (!s->sets)
            CX_RAISE(CX_ERR_INVALID,
                     "%s:%d:%d: tasks: expected task_sets to choose from, got a "
                     "single tasks list",
                     s->file, kn->line, kn->col);
        size_t used = (size_t)snprintf(what, sizeof what, "one of ");
        for (int i = 0; i < s->nlists && used < sizeof what; i++)
            used += (size_t)snprintf(what + used, sizeof what - used, "%s%s", i ? ", " : "",
                                     s->lists[i].name);
        a->target = CX_AT_TASK_SET;
        a->kind = CX_AXIS_CATEGORICAL;
        a->units = "1";
        CX_TRY(categorical_values(s, v, key, what, set_code, -1, a));
    } else if (strncmp(key, "tasks.", 6) == 0) {
        CX_TRY(task_key_axis(s, kn, key, a));
        r.task_key = a->task_key;
        r.integer = a->kind == CX_AXIS_INTEGER;
        CX_TRY(numeric_values(s, v, key, &r, a));
    } else if ((a->param = cx_param_find(key)) >= 0) {
        const cx_param *p = cx_param_at(a->param);
        a->target = CX_AT_PARAM;
        a->units = p->units;
        if (p->type == CX_PT_BOOL)
            CX_RAISE(CX_ERR_INVALID,
                     "%s:%d:%d: axes: expected a numeric or enumerated key, got "
                     "the true/false key %s",
                     s->file, kn->line, kn->col, key);
        if (p->type == CX_PT_ENUM) {
            a->kind = CX_AXIS_CATEGORICAL;
            cx_param_expect(a->param, what, sizeof what);
            CX_TRY(categorical_values(s, v, key, what, param_code, a->param, a));
        } else {
            a->kind = p->type == CX_PT_INT ? CX_AXIS_INTEGER : CX_AXIS_NUMERIC;
            r.param = a->param;
            r.integer = p->type == CX_PT_INT;
            CX_TRY(numeric_values(s, v, key, &r, a));
        }
    } else {
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: axes: expected seed, overlap, task_count, tasks, "
                 "tasks.<name>.<key> or a numeric or enumerated key of reservoir, training, "
                 "probe or classify, got %s",
                 s->file, kn->line, kn->col, key);
    }
done:
    return rc;
}

int cx_axes_parse(cx_study *s, const cx_ynode *n)
{
    int rc = CX_OK;
    s->cells = 1;
    if (n == NULL)
        return CX_OK;
    if (n->kind != CX_YN_MAP)
        CX_RAISE(cx_sv_fail(s->file, n, "axes", "a mapping of axis keys to values"), NULL);
    if (n->n > CX_MAX_AXES)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: axes: expected at most %d axes, got %lld", s->file,
                 n->key[CX_MAX_AXES]->line, n->key[CX_MAX_AXES]->col, CX_MAX_AXES, (long long)n->n);
    for (cx_idx i = 0; i < n->n; i++) {
        cx_axis_def *a = &s->axes[s->naxes++];
        CX_TRY(parse_axis(s, n->key[i], n->val[i], a));
        if (s->cells > INT64_MAX / 4 / a->len)
            CX_RAISE(CX_ERR_INVALID,
                     "%s:%d:%d: axes: expected a grid of fewer than 2^61 cells, "
                     "got more",
                     s->file, a->line, a->col);
        s->cells *= a->len;
    }
    /* Two axes must not set the same thing. */
    for (int i = 0; i < s->naxes; i++)
        for (int j = 0; j < i; j++) {
            const cx_axis_def *a = &s->axes[i], *b = &s->axes[j];
            int clash = 0;
            if (a->target == CX_AT_TASK_KEY && b->target == CX_AT_TASK_KEY)
                clash = a->task_key == b->task_key && strcmp(a->task, b->task) == 0;
            if (a->target == CX_AT_TASK_KEY &&
                (b->target == CX_AT_OVERLAP || b->target == CX_AT_TASK_COUNT))
                clash = a->task_key == (b->target == CX_AT_OVERLAP ? CX_TK_SPACING : CX_TK_COUNT);
            if (b->target == CX_AT_TASK_KEY &&
                (a->target == CX_AT_OVERLAP || a->target == CX_AT_TASK_COUNT))
                clash = b->task_key == (a->target == CX_AT_OVERLAP ? CX_TK_SPACING : CX_TK_COUNT);
            if (clash)
                CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected one axis per key, got %s as well",
                         s->file, a->line, a->col, a->name, b->name);
        }
done:
    return rc;
}
