/* coexist: binding the axis values of one grid cell into a complete cx_cell_params, the
 * cell-level rules that no single key can check alone, the load-time sweep over the grid that
 * applies them, and the "name=value,..." lookup of a cell. Cells are numbered row-major with
 * the first axis varying slowest. No published numerical method is implemented here. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "study/study_impl.h"

/* Bind every cell of the sub-grid that can break a cell-level rule when it has at most this
 * many cells; otherwise only its corners. */
#define CX_BIND_ALL_MAX 2000000

/* Pseudo-key for rules that depend on the task list (task_sets, task_count, family counts). */
#define TASKS_KEY "#tasks"

static int axis_involved(const cx_axis_def *a, const char *key)
{
    if (strcmp(key, TASKS_KEY) == 0)
        return a->target == CX_AT_TASK_SET || a->target == CX_AT_TASK_COUNT ||
               (a->target == CX_AT_TASK_KEY && a->task_key == CX_TK_COUNT);
    return a->target == CX_AT_PARAM && strcmp(cx_param_at(a->param)->key, key) == 0;
}

static void axis_value_text(const cx_axis_def *a, cx_idx c, char *buf, size_t n)
{
    if (a->labels != NULL)
        snprintf(buf, n, "%s", a->labels[c]);
    else
        snprintf(buf, n, "%.10g", a->values[c]);
}

/* A broken cell-level rule. With axes among `keys`: "FILE:L:C: at AXIS=V, ...: MSG" pointing
 * at the first such axis; without: "FILE:L:C: KEY: expected WHAT, got GOT" pointing at the
 * first key written in the file. */
static int cell_fail(const cx_study *s, const cx_idx *coords, const char *const *keys, int nkeys,
                     const char *what, const char *got, const char *msg)
{
    char at[768], v[128];
    size_t used = 0;
    int line = 0, col = 0;
    at[0] = '\0';
    for (int i = 0; i < s->naxes; i++) {
        int inv = 0;
        for (int k = 0; k < nkeys; k++)
            inv |= axis_involved(&s->axes[i], keys[k]);
        if (!inv || used >= sizeof at)
            continue;
        axis_value_text(&s->axes[i], coords[i], v, sizeof v);
        used += (size_t)snprintf(at + used, sizeof at - used, "%s%s=%s", used ? ", " : "",
                                 s->axes[i].name, v);
        if (line == 0) {
            line = s->axes[i].line;
            col = s->axes[i].col;
        }
    }
    if (used > 0)
        return CX_FAIL(CX_ERR_INVALID, "%s:%d:%d: at %s: %s", s->file, line, col, at, msg);
    for (int k = 0; k < nkeys && line == 0; k++) {
        int p = cx_param_find(keys[k]);
        if (p >= 0 && s->given[p]) {
            line = s->pline[p];
            col = s->pcol[p];
        } else if (strcmp(keys[k], TASKS_KEY) == 0) {
            line = s->tline;
            col = s->tcol;
        } else if (strcmp(keys[k], "training.weights") == 0) {
            line = s->wline;
            col = s->wcol;
        }
    }
    if (line == 0)
        line = col = 1;
    const char *key = strcmp(keys[0], TASKS_KEY) == 0 ? (s->sets ? "task_sets" : "tasks") : keys[0];
    return CX_FAIL(CX_ERR_INVALID, "%s:%d:%d: %s: expected %s, got %s", s->file, line, col, key,
                   what, got);
}

/* Tasks of one cell: the chosen list with its axis values applied, families expanded. */
static int bind_tasks(const cx_study *s, const cx_idx *coords, int list, cx_cell_params *p)
{
    int rc = CX_OK;
    const cx_task_list *l = &s->lists[list];
    static const char *const tk[] = {TASKS_KEY};
    char what[160], got[256];
    int nt = 0;
    for (int i = 0; i < l->n; i++) {
        const cx_task_entry *e = &l->e[i];
        const char *nm = cx_task_entry_name(e);
        if (!e->family) {
            if (nt == CX_MAX_TASKS) {
                nt++;
                break;
            }
            /* memcpy, not assignment: padding bytes stay zero for stable stage keys. */
            memcpy(&p->tasks[nt], &e->spec, sizeof e->spec);
            for (int a = 0; a < s->naxes; a++)
                if (s->axes[a].target == CX_AT_TASK_KEY && strcmp(s->axes[a].task, nm) == 0)
                    cx_task_key_set(&p->tasks[nt], NULL, s->axes[a].task_key,
                                    s->axes[a].values[coords[a]]);
            nt++;
            continue;
        }
        cx_family_spec f;
        memcpy(&f, &e->fam, sizeof f);
        for (int a = 0; a < s->naxes; a++) {
            const cx_axis_def *ax = &s->axes[a];
            double v = ax->values[coords[a]];
            if (ax->target == CX_AT_OVERLAP)
                f.spacing = v;
            else if (ax->target == CX_AT_TASK_COUNT)
                f.count = (int)v;
            else if (ax->target == CX_AT_TASK_KEY && strcmp(ax->task, nm) == 0)
                cx_task_key_set(&f.base, &f, ax->task_key, v);
        }
        if (nt + f.count > CX_MAX_TASKS) {
            nt += f.count;
            break;
        }
        if (!f.alternate && e->nsenses > 0 && e->nsenses < f.count) {
            snprintf(what, sizeof what, "senses for each of the %d members of family %s", f.count,
                     nm);
            snprintf(got, sizeof got, "%d", e->nsenses);
            snprintf(got + strlen(got), sizeof got - strlen(got), " senses");
            char msg[320];
            snprintf(msg, sizeof msg, "family %s has %d members but %d senses", nm, f.count,
                     e->nsenses);
            CX_RAISE(cell_fail(s, coords, tk, 1, what, got, msg), NULL);
        }
        if (!f.alternate && e->nsenses == 0)
            for (int k = 0; k < f.count; k++)
                f.senses[k] = 1;
        CX_TRY(cx_family_expand(&f, p->tasks + nt));
        nt += f.count;
    }
    if (nt > CX_MAX_TASKS) {
        char msg[128];
        snprintf(what, sizeof what, "at most %d tasks after family expansion", CX_MAX_TASKS);
        snprintf(got, sizeof got, "%d or more", nt);
        snprintf(msg, sizeof msg,
                 "the cell has %d or more tasks after family expansion, more "
                 "than %d",
                 nt, CX_MAX_TASKS);
        CX_RAISE(cell_fail(s, coords, tk, 1, what, got, msg), NULL);
    }
    p->ntasks = nt;
    for (int i = 0; i < nt; i++)
        for (int j = 0; j < i; j++)
            if (strcmp(p->tasks[i].name, p->tasks[j].name) == 0) {
                char msg[256];
                snprintf(got, sizeof got, "%s twice", p->tasks[i].name);
                snprintf(msg, sizeof msg, "two tasks named %s", p->tasks[i].name);
                CX_RAISE(cell_fail(s, coords, tk, 1, "distinct task names after family expansion",
                                   got, msg),
                         NULL);
            }
    p->dim = p->tasks[0].dim;
    for (int i = 1; i < nt; i++)
        if (p->tasks[i].dim != p->dim) {
            char msg[320];
            snprintf(msg, sizeof msg, "tasks of different dimension: %s has %d, %s has %d",
                     p->tasks[0].name, p->dim, p->tasks[i].name, p->tasks[i].dim);
            CX_RAISE(cell_fail(s, coords, tk, 1, "tasks of one dimension", msg, msg), NULL);
        }
done:
    return rc;
}

/* training.weights against the cell's task count. */
static int bind_weights(const cx_study *s, const cx_idx *coords, cx_cell_params *p)
{
    int rc = CX_OK;
    char what[256], got[256], msg[512];
    if (s->weights_mode == CX_W_LISTED) {
        if (s->nweights != p->ntasks) {
            static const char *const k[] = {"training.weights", TASKS_KEY};
            int naxis = 0;
            for (int i = 0; i < s->naxes; i++)
                naxis += axis_involved(&s->axes[i], TASKS_KEY);
            snprintf(what, sizeof what, "one weight per task (%d)", p->ntasks);
            snprintf(got, sizeof got, "%d weights", s->nweights);
            snprintf(msg, sizeof msg, "training.weights lists %d weights but the cell has %d tasks",
                     s->nweights, p->ntasks);
            if (naxis > 0) {
                /* "the cell at AXIS=V" reads better than "at AXIS=V: the cell" here. */
                char at[512];
                size_t used = 0;
                int line = 0, col = 0;
                for (int i = 0; i < s->naxes; i++)
                    if (axis_involved(&s->axes[i], TASKS_KEY) && used < sizeof at) {
                        char v[128];
                        axis_value_text(&s->axes[i], coords[i], v, sizeof v);
                        used += (size_t)snprintf(at + used, sizeof at - used, "%s%s=%s",
                                                 used ? ", " : "", s->axes[i].name, v);
                        if (line == 0) {
                            line = s->axes[i].line;
                            col = s->axes[i].col;
                        }
                    }
                CX_RAISE(CX_ERR_INVALID,
                         "%s:%d:%d: training.weights lists %d weights but the cell at %s has %d "
                         "tasks",
                         s->file, line, col, s->nweights, at, p->ntasks);
            }
            CX_RAISE(cell_fail(s, coords, k, 2, what, got, msg), NULL);
        }
        p->train.weights_listed = 1;
        memcpy(p->train.weights, s->weights, (size_t)s->nweights * sizeof *s->weights);
    } else if (s->weights_mode == CX_W_EQUAL) {
        /* 1/K each, the same normalisation as the default (blend 0.5 for two tasks), so that the
         * ridge acts alike whatever the task count */
        p->train.weights_listed = 1;
        for (int i = 0; i < p->ntasks; i++)
            p->train.weights[i] = 1.0 / (double)p->ntasks;
    }

done:
    return rc;
}

/* The rules that involve several keys of one cell. */
static int check_rules(const cx_study *s, const cx_idx *coords, const cx_cell_params *p)
{
    int rc = CX_OK;
    char what[256], got[256], msg[512];
    double d = p->net.mean_degree, n = (double)p->net.nodes;
    int topo = p->net.topology;
    if (topo == CX_TOPO_ERDOS_RENYI || topo == CX_TOPO_SMALL_WORLD) {
        static const char *const k[] = {"reservoir.mean_degree", "reservoir.nodes",
                                        "reservoir.topology"};
        if (topo == CX_TOPO_SMALL_WORLD && (d != floor(d) || fmod(d, 2) != 0 || d < 2)) {
            snprintf(got, sizeof got, "%.10g", d);
            snprintf(msg, sizeof msg,
                     "a small world needs an even integer mean degree >= 2, "
                     "got %.10g",
                     d);
            CX_RAISE(cell_fail(s, coords, k, 3, "an even integer >= 2 for a small world", got, msg),
                     NULL);
        }
        if (!(d < n)) {
            snprintf(what, sizeof what, "a number < reservoir.nodes (%.10g)", n);
            snprintf(got, sizeof got, "%.10g", d);
            snprintf(msg, sizeof msg, "mean degree must be < nodes (%.10g >= %.10g)", d, n);
            CX_RAISE(cell_fail(s, coords, k, 3, what, got, msg), NULL);
        }
    }
    {
        static const char *const k[] = {"probe.tail", "probe.horizon"};
        if (p->probe.tail > p->probe.horizon) {
            snprintf(what, sizeof what, "a number <= probe.horizon (%.10g)", p->probe.horizon);
            snprintf(got, sizeof got, "%.10g", p->probe.tail);
            snprintf(msg, sizeof msg, "tail must be <= horizon (%.10g > %.10g)", p->probe.tail,
                     p->probe.horizon);
            CX_RAISE(cell_fail(s, coords, k, 2, what, got, msg), NULL);
        }
    }
    {
        const char *names[] = {"training.length", "training.washout", "probe.horizon",
                               "probe.tail"};
        double vals[] = {p->train.length, p->train.washout, p->probe.horizon, p->probe.tail};
        for (int i = 0; i < 4; i++) {
            /* washout may be 0 (no washout); otherwise every duration covers a step. */
            if (vals[i] >= p->train.dt || (i == 1 && vals[i] == 0))
                continue;
            const char *k[] = {names[i], "training.dt"};
            snprintf(what, sizeof what, "%sa number >= training.dt (%.10g)", i == 1 ? "0 or " : "",
                     p->train.dt);
            snprintf(got, sizeof got, "%.10g", vals[i]);
            snprintf(msg, sizeof msg, "%s must be at least one training.dt (%.10g < %.10g)",
                     names[i], vals[i], p->train.dt);
            CX_RAISE(cell_fail(s, coords, k, 2, what, got, msg), NULL);
        }
    }
    if (p->ntasks + p->probe.random_starts > CX_MAX_RUNS) {
        static const char *const k[] = {"probe.random_starts", TASKS_KEY};
        snprintf(what, sizeof what, "an integer <= %d (%d runs at most, %d tasks)",
                 CX_MAX_RUNS - p->ntasks, CX_MAX_RUNS, p->ntasks);
        snprintf(got, sizeof got, "%d", p->probe.random_starts);
        snprintf(msg, sizeof msg, "too many runs: %d tasks + %d random starts > %d", p->ntasks,
                 p->probe.random_starts, CX_MAX_RUNS);
        CX_RAISE(cell_fail(s, coords, k, 2, what, got, msg), NULL);
    }
done:
    return rc;
}

static int bind_coords(const cx_study *s, const cx_idx *coords, cx_cell_params *p)
{
    int rc = CX_OK;
    int list = 0;
    memcpy(p, &s->base, sizeof *p);
    p->study_seed = s->seed;
    for (int i = 0; i < s->naxes; i++) {
        const cx_axis_def *a = &s->axes[i];
        cx_idx c = coords[i];
        if (a->target == CX_AT_PARAM)
            cx_param_write(p, a->param, a->codes ? (double)a->codes[c] : a->values[c]);
        else if (a->target == CX_AT_SEED)
            p->replicate = (uint64_t)a->values[c];
        else if (a->target == CX_AT_TASK_SET)
            list = a->codes[c];
    }
    if (!s->degree_set)
        p->net.mean_degree = p->net.topology == CX_TOPO_SMALL_WORLD ? 4 : 3;
    CX_TRY(bind_tasks(s, coords, list, p));

    CX_TRY(bind_weights(s, coords, p));
    CX_TRY(check_rules(s, coords, p));
done:
    return rc;
}

int cx_study_bind(const cx_study *s, cx_idx cell, cx_cell_params *p)
{
    int rc = CX_OK;
    cx_idx coords[CX_MAX_AXES];
    if (cell < 0 || cell >= s->cells)
        CX_RAISE(CX_ERR_INVALID, "cell: expected an index in [0, %lld], got %lld",
                 (long long)s->cells - 1, (long long)cell);
    cx_study_coords(s, cell, coords);
    memset(p, 0, sizeof *p);
    CX_TRY(bind_coords(s, coords, p));
done:
    return rc;
}

/* Can an axis break a cell-level rule? (Others only need their values range checked.) */
static int axis_relevant(const cx_axis_def *a)
{
    if (a->target == CX_AT_PARAM)
        return cx_param_at(a->param)->cross;
    return a->target == CX_AT_TASK_SET || a->target == CX_AT_TASK_COUNT ||
           (a->target == CX_AT_TASK_KEY && a->task_key == CX_TK_COUNT);
}

/* Largest axis value of a target (or -1 when no axis sets it). */
static double axis_max(const cx_study *s, int target, int param, const char *task, int key)
{
    double m = -1;
    for (int i = 0; i < s->naxes; i++) {
        const cx_axis_def *a = &s->axes[i];
        int hit = a->target == target && (target != CX_AT_PARAM || a->param == param) &&
                  (target != CX_AT_TASK_KEY || (a->task_key == key && strcmp(a->task, task) == 0));
        for (cx_idx k = 0; hit && k < a->len; k++)
            m = fmax(m, a->values[k]);
    }
    return m;
}

/* When only the corners were bound, the per-run array sizes come from bounds that hold for
 * every cell: the largest family counts and the largest number of random starts. */
static void upper_bounds(cx_study *s)
{
    int most = 0;
    for (int l = 0; l < s->nlists; l++) {
        int n = 0;
        for (int i = 0; i < s->lists[l].n; i++) {
            const cx_task_entry *e = &s->lists[l].e[i];
            if (!e->family) {
                n++;
                continue;
            }
            double c = e->fam.count;
            c = fmax(c, axis_max(s, CX_AT_TASK_COUNT, -1, NULL, 0));
            c = fmax(c, axis_max(s, CX_AT_TASK_KEY, -1, e->fam.base.name, CX_TK_COUNT));
            n += (int)c;
        }
        if (n > most)
            most = n;
    }
    int rs = cx_param_find("probe.random_starts");
    double starts = fmax(cx_param_read(&s->base, rs), axis_max(s, CX_AT_PARAM, rs, NULL, 0));
    s->max_tasks = most < CX_MAX_TASKS ? most : CX_MAX_TASKS;
    s->max_runs = s->max_tasks + (int)starts;
    if (s->max_runs > CX_MAX_RUNS)
        s->max_runs = CX_MAX_RUNS;
}

int cx_study_validate_grid(cx_study *s)
{
    int rc = CX_OK;
    cx_cell_params *p = NULL;
    cx_idx coords[CX_MAX_AXES] = {0}, sub = 1;
    int rel[CX_MAX_AXES], nrel = 0, corners = 0;
    CX_ALLOC(p, 1);
    for (int i = 0; i < s->naxes; i++)
        if (axis_relevant(&s->axes[i])) {
            rel[nrel++] = i;
            if (sub <= CX_BIND_ALL_MAX)
                sub *= s->axes[i].len;
        }
    corners = sub > CX_BIND_ALL_MAX;
    s->max_tasks = 0;
    s->max_runs = 0;
    cx_idx total = corners ? ((cx_idx)1 << nrel) : sub;
    for (cx_idx c = 0; c < total; c++) {
        cx_idx r = c;
        for (int j = nrel - 1; j >= 0; j--) {
            cx_idx len = s->axes[rel[j]].len;
            if (corners) {
                coords[rel[j]] = (r & 1) ? len - 1 : 0;
                r >>= 1;
            } else {
                coords[rel[j]] = r % len;
                r /= len;
            }
        }
        memset(p, 0, sizeof *p);
        CX_TRY(bind_coords(s, coords, p));
        if (p->ntasks > s->max_tasks)
            s->max_tasks = p->ntasks;
        if (p->ntasks + p->probe.random_starts > s->max_runs)
            s->max_runs = p->ntasks + p->probe.random_starts;
    }
    if (corners)
        upper_bounds(s);
done:
    free(p);
    return rc;
}

/* "name=value,name=value" -> cell. */
int cx_study_find_cell(const cx_study *s, const char *at, cx_idx *cell)
{
    int rc = CX_OK;
    cx_idx coords[CX_MAX_AXES];
    int seen[CX_MAX_AXES] = {0};
    char *buf = NULL, *save = NULL;
    size_t len = strlen(at) + 1;
    CX_ALLOC(buf, len);
    memcpy(buf, at, len);
    for (char *item = buf; item != NULL; item = save) {
        save = strchr(item, ',');
        if (save != NULL)
            *save++ = '\0';
        while (*item == ' ')
            item++;
        if (*item == '\0' && save == NULL && s->naxes == 0)
            break;
        char *eq = strchr(item, '=');
        if (eq == NULL)
            CX_RAISE(CX_ERR_INVALID, "%s: expected name=value, got %s", at, item);
        *eq = '\0';
        char *name = item, *val = eq + 1;
        for (char *e = eq - 1; e >= name && *e == ' '; e--)
            *e = '\0';
        while (*val == ' ')
            val++;
        for (char *e = val + strlen(val) - 1; e >= val && *e == ' '; e--)
            *e = '\0';
        int i = cx_study_axis_find(s, name);
        char list[1024];
        size_t used = 0;
        list[0] = '\0';
        for (int k = 0; k < s->naxes && used < sizeof list; k++)
            used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", k ? ", " : "",
                                     s->axes[k].name);
        if (i < 0)
            CX_RAISE(CX_ERR_INVALID, "%s: expected an axis among %s, got %s", at,
                     s->naxes ? list : "(none: the study has no axes)", name);
        if (seen[i])
            CX_RAISE(CX_ERR_INVALID, "%s: expected each axis once, got %s twice", at, name);
        seen[i] = 1;
        const cx_axis_def *a = &s->axes[i];
        cx_idx found = -1;
        if (a->labels != NULL) {
            for (cx_idx k = 0; k < a->len; k++)
                if (strcmp(a->labels[k], val) == 0)
                    found = k;
        } else {
            char *end = NULL;
            double v = strtod(val, &end);
            if (end != val && *end == '\0')
                for (cx_idx k = 0; k < a->len && found < 0; k++)
                    if (v == a->values[k] ||
                        fabs(v - a->values[k]) <= 1e-9 * fmax(fabs(v), fabs(a->values[k])))
                        found = k;
        }
        if (found < 0) {
            used = 0;
            list[0] = '\0';
            for (cx_idx k = 0; k < a->len && used < sizeof list - 8; k++) {
                char v[128];
                axis_value_text(a, k, v, sizeof v);
                used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", k ? ", " : "", v);
            }
            CX_RAISE(CX_ERR_INVALID, "%s: %s: expected one of %s, got %s", at, a->name, list, val);
        }
        coords[i] = found;
    }
    for (int i = 0; i < s->naxes; i++)
        if (!seen[i])
            CX_RAISE(CX_ERR_INVALID, "%s: expected a value for every axis, got none for %s", at,
                     s->axes[i].name);
    *cell = cx_study_index(s, coords);
done:
    free(buf);
    return rc;
}
