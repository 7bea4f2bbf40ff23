/* coexist: loading a sweep file into a study (sections study, reservoir, training, probe,
 * classify, tasks or task_sets, axes), and the study's accessors. Parsing is done on a
 * positioned tree (yamltree.c) so that every message names FILE:LINE:COL; the values and
 * ranges come from the one parameter table (params.c). The grid is checked cell by cell at
 * load (bind.c) so that an impossible combination is reported before anything runs. No
 * published numerical method is implemented here. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "study/study_impl.h"

#define TOP_KEYS "study, reservoir, training, tasks, task_sets, probe, classify, axes"

static int parse_study(cx_study *s, const cx_ynode *root)
{
    int rc = CX_OK;
    const cx_ynode *n = cx_ytree_get(root, "study"), *v;
    if (n == NULL)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: study: expected a section study with a name, got none",
                 s->file, root->line, root->col);
    CX_TRY(cx_sv_keys(s->file, n, "study", "name, seed, description"));
    v = cx_ytree_get(n, "name");
    if (v == NULL)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: study.name: expected a name, got none", s->file,
                 n->line, n->col);
    CX_TRY(cx_sv_name(s->file, v, "study.name", 1, s->name, sizeof s->name));
    s->seed = 1;
    if ((v = cx_ytree_get(n, "seed")) != NULL) {
        const char *t = v->text;
        char *end = NULL;
        int digits = v->kind == CX_YN_SCALAR && v->plain && t[0] != '\0' &&
                     strspn(t, "0123456789") == strlen(t);
        errno = 0;
        unsigned long long x = digits ? strtoull(t, &end, 10) : 0;
        if (!digits || errno == ERANGE)
            CX_RAISE(cx_sv_fail(s->file, v, "study.seed", "an integer in [0, 2^64 - 1]"), NULL);
        s->seed = (uint64_t)x;
    }
    if ((v = cx_ytree_get(n, "description")) != NULL) {
        if (v->kind != CX_YN_SCALAR)
            CX_RAISE(cx_sv_fail(s->file, v, "study.description", "a text"), NULL);
        size_t l = strlen(v->text) + 1;
        CX_ALLOC(s->description, l);
        memcpy(s->description, v->text, l);
    }
done:
    return rc;
}

static int parse_weights(cx_study *s, const cx_ynode *v)
{
    int rc = CX_OK;
    const char *what = "a list of 1 to 16 numbers > 0, or equal";
    s->wline = v->line;
    s->wcol = v->col;
    if (v->kind == CX_YN_SCALAR && strcmp(v->text, "equal") == 0) {
        s->weights_mode = CX_W_EQUAL;
        return CX_OK;
    }
    if (v->kind != CX_YN_SEQ || v->n < 1 || v->n > CX_MAX_TASKS)
        CX_RAISE(cx_sv_fail(s->file, v, "training.weights", what), NULL);
    for (cx_idx i = 0; i < v->n; i++) {
        CX_TRY(cx_sv_number(s->file, v->val[i], "training.weights", what, &s->weights[i]));
        if (!(s->weights[i] > 0) || !cx_range_ok(CX_R_GT, 0, 0, s->weights[i]))
            CX_RAISE(cx_sv_fail(s->file, v->val[i], "training.weights", "a weight > 0"), NULL);
    }
    s->nweights = (int)v->n;
    s->weights_mode = CX_W_LISTED;
done:
    return rc;
}

/* One of reservoir, training, probe, classify: every key through the parameter table. */
static int parse_section(cx_study *s, const cx_ynode *root, const char *section)
{
    int rc = CX_OK;
    char allowed[1024], key[128], what[256];
    const cx_ynode *n = cx_ytree_get(root, section);
    if (n == NULL)
        return CX_OK;
    cx_param_section_keys(section, allowed, sizeof allowed - 16);
    if (strcmp(section, "training") == 0)
        strcat(allowed, ", weights");
    CX_TRY(cx_sv_keys(s->file, n, section, allowed));
    for (cx_idx i = 0; i < n->n; i++) {
        const cx_ynode *v = n->val[i];
        snprintf(key, sizeof key, "%s.%s", section, n->key[i]->text);
        if (strcmp(key, "training.weights") == 0) {
            CX_TRY(parse_weights(s, v));
            continue;
        }
        int p = cx_param_find(key);
        const cx_param *d = cx_param_at(p);
        double x = 0;
        int b = 0;
        cx_param_expect(p, what, sizeof what);
        if (d->type == CX_PT_BOOL) {
            CX_TRY(cx_sv_bool(s->file, v, key, &b));
            x = b;
        } else if (d->type == CX_PT_ENUM) {
            if (v->kind != CX_YN_SCALAR || (b = cx_param_label(p, v->text)) < 0)
                CX_RAISE(cx_sv_fail(s->file, v, key, what), NULL);
            x = b;
        } else {
            CX_TRY(cx_sv_number(s->file, v, key, what, &x));
            if (!cx_param_ok(p, x))
                CX_RAISE(cx_sv_fail(s->file, v, key, what), NULL);
        }
        cx_param_write(&s->base, p, x);
        s->given[p] = 1;
        s->pline[p] = v->line;
        s->pcol[p] = v->col;
    }
done:
    return rc;
}

static int parse_list(cx_study *s, const cx_ynode *n, const char *prefix, cx_task_list *l)
{
    int rc = CX_OK;
    char what[64];
    snprintf(what, sizeof what, "a list of 1 to %d tasks", CX_MAX_TASKS);
    if (n->kind != CX_YN_SEQ || n->n < 1 || n->n > CX_MAX_TASKS)
        CX_RAISE(cx_sv_fail(s->file, n, prefix, what), NULL);
    l->line = n->line;
    l->col = n->col;
    CX_CALLOC(l->e, n->n);
    for (cx_idx i = 0; i < n->n; i++) {
        CX_TRY(cx_task_entry_parse(s, n->val[i], prefix, (int)i, &l->e[i]));
        l->n++;
        for (int j = 0; j < (int)i; j++)
            if (strcmp(cx_task_entry_name(&l->e[j]), cx_task_entry_name(&l->e[i])) == 0) {
                const cx_ynode *nm = cx_ytree_get(n->val[i], "name");
                if (nm == NULL)
                    nm = n->val[i];
                char key[160];
                snprintf(key, sizeof key, "%s[%lld].name", prefix, (long long)i + 1);
                CX_RAISE(cx_sv_fail(s->file, nm, key, "a task name not used before in the list"),
                         NULL);
            }
    }
done:
    return rc;
}

static int parse_tasks(cx_study *s, const cx_ynode *root)
{
    int rc = CX_OK;
    const cx_ynode *t = cx_ytree_get(root, "tasks"), *ts = cx_ytree_get(root, "task_sets");
    if (t != NULL && ts != NULL)
        CX_RAISE(cx_sv_fail(s->file, ts, "task_sets", "either tasks or task_sets"), NULL);
    if (t == NULL && ts == NULL)
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: tasks: expected a list of tasks (or task_sets), got "
                 "none",
                 s->file, root->line, root->col);
    if (t != NULL) {
        s->tline = t->line;
        s->tcol = t->col;
        CX_CALLOC(s->lists, 1);
        s->nlists = 1;
        CX_TRY(parse_list(s, t, "tasks", &s->lists[0]));
        goto done;
    }
    s->sets = 1;
    s->tline = ts->line;
    s->tcol = ts->col;
    if (ts->kind != CX_YN_MAP || ts->n < 1)
        CX_RAISE(cx_sv_fail(s->file, ts, "task_sets", "a mapping of set names to task lists"),
                 NULL);
    CX_CALLOC(s->lists, ts->n);
    for (cx_idx i = 0; i < ts->n; i++) {
        char prefix[128];
        cx_task_list *l = &s->lists[s->nlists++];
        CX_TRY(cx_sv_name(s->file, ts->key[i], "task_sets", 0, l->name, sizeof l->name));
        snprintf(prefix, sizeof prefix, "task_sets.%s", l->name);
        CX_TRY(parse_list(s, ts->val[i], prefix, l));
    }
    if (cx_ytree_get(cx_ytree_get(root, "axes"), "tasks") == NULL && s->nlists > 1)
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: task_sets: expected an axis tasks choosing among "
                 "the %d sets, got none",
                 s->file, ts->line, ts->col, s->nlists);
done:
    return rc;
}

/* Keys that are required unless an axis provides them. */
static int check_required(const cx_study *s)
{
    int rc = CX_OK;
    for (int l = 0; l < s->nlists; l++)
        for (int i = 0; i < s->lists[l].n; i++) {
            const cx_task_entry *e = &s->lists[l].e[i];
            const char *nm = cx_task_entry_name(e);
            int cyc = (e->family ? e->fam.base.kind : e->spec.kind) == CX_TASK_CYCLE;
            int need[4] = {CX_TK_RADIUS, CX_TK_SPEED, CX_TK_COUNT, CX_TK_SPACING};
            for (int q = 0; q < 4; q++) {
                int k = need[q];
                if ((q < 2 && !cyc) || (q >= 2 && !e->family))
                    continue;
                if ((e->given & (1u << k)) || cx_axes_task_key(s, nm, k, e->family) >= 0)
                    continue;
                CX_RAISE(CX_ERR_INVALID,
                         "%s:%d:%d: %s%s%s%s: expected a key %s (or an axis "
                         "tasks.%s.%s), got none",
                         s->file, e->line, e->col, s->sets ? "task_sets." : "tasks",
                         s->sets ? s->lists[l].name : "", ".", nm, cx_task_key_name(k), nm,
                         cx_task_key_name(k));
            }
        }
done:
    return rc;
}

int cx_study_load_buffer(const char *text, size_t len, const char *name, cx_study **out)
{
    int rc = CX_OK;
    cx_study *s = NULL;
    cx_ynode *root = NULL;
    CX_CALLOC(s, 1);
    cx_param_defaults(&s->base);
    snprintf(s->file, sizeof s->file, "%s", name);
    const char *slash = strrchr(name, '/');
    if (slash != NULL)
        snprintf(s->dir, sizeof s->dir, "%.*s", (int)(slash - name), name);
    if (slash == name)
        snprintf(s->dir, sizeof s->dir, "/");
    CX_ALLOC(s->source, len + 1);
    memcpy(s->source, text, len);
    s->source[len] = '\0';

    CX_TRY(cx_ytree_parse(text, len, name, &root));
    if (root == NULL || root->kind != CX_YN_MAP) {
        char got[256];
        cx_sv_got(root, got, sizeof got);
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: top level: expected a mapping with the sections %s, "
                 "got %s",
                 name, root ? root->line : 1, root ? root->col : 1, TOP_KEYS, got);
    }
    CX_TRY(cx_sv_keys(name, root, "top level", TOP_KEYS));
    CX_TRY(parse_study(s, root));
    CX_TRY(parse_section(s, root, "reservoir"));
    CX_TRY(parse_section(s, root, "training"));
    CX_TRY(parse_section(s, root, "probe"));
    CX_TRY(parse_section(s, root, "classify"));
    CX_TRY(parse_tasks(s, root));
    CX_TRY(cx_axes_parse(s, cx_ytree_get(root, "axes")));
    CX_TRY(check_required(s));
    {
        int md = cx_param_find("reservoir.mean_degree");
        s->degree_set = s->given[md];
        for (int i = 0; i < s->naxes; i++)
            if (s->axes[i].target == CX_AT_PARAM && s->axes[i].param == md)
                s->degree_set = 1;
    }
    CX_TRY(cx_study_validate_grid(s));
    CX_TRY(cx_study_make_canonical(s));
    *out = s;
    s = NULL;
done:
    cx_ytree_free(root);
    cx_study_destroy(&s);
    return rc;
}

int cx_study_load(const char *path, cx_study **out)
{
    int rc = CX_OK;
    FILE *f = NULL;
    char *buf = NULL;
    size_t len = 0, cap = 0;
    f = fopen(path, "rb");
    if (f == NULL)
        CX_RAISE(CX_ERR_INVALID, "cannot open sweep file %s: %s", path, strerror(errno));
    for (;;) {
        if (len == cap) {
            char *nb = NULL;
            cap = cap ? 2 * cap : 65536;
            CX_ALLOC(nb, cap);
            if (len > 0)
                memcpy(nb, buf, len);
            free(buf);
            buf = nb;
        }
        size_t got = fread(buf + len, 1, cap - len, f);
        len += got;
        if (got == 0) {
            if (ferror(f))
                CX_RAISE(CX_ERR_INVALID, "cannot read sweep file %s: %s", path, strerror(errno));
            break;
        }
    }
    CX_TRY(cx_study_load_buffer(buf, len, path, out));
done:
    free(buf);
    if (f != NULL)
        fclose(f);
    return rc;
}

void cx_study_destroy(cx_study **sp)
{
    if (sp == NULL || *sp == NULL)
        return;
    cx_study *s = *sp;
    cx_axes_free(s);
    for (int l = 0; l < s->nlists; l++)
        free(s->lists[l].e);
    free(s->lists);
    free(s->description);
    free(s->source);
    free(s->canonical);
    free(s);
    *sp = NULL;
}

const char *cx_study_name(const cx_study *s)
{
    return s->name;
}

uint64_t cx_study_seed(const cx_study *s)
{
    return s->seed;
}

const char *cx_study_source(const cx_study *s)
{
    return s->source;
}

const char *cx_study_canonical(const cx_study *s)
{
    return s->canonical;
}

int cx_study_naxes(const cx_study *s)
{
    return s->naxes;
}

void cx_study_axis(const cx_study *s, int i, cx_axis_info *out)
{
    const cx_axis_def *a = &s->axes[i];
    out->name = a->name;
    out->units = a->units;
    out->kind = a->kind;
    out->len = a->len;
    out->values = a->values;
    out->labels = (const char *const *)a->labels;
}

int cx_study_axis_find(const cx_study *s, const char *name)
{
    for (int i = 0; i < s->naxes; i++)
        if (strcmp(s->axes[i].name, name) == 0)
            return i;
    return -1;
}

cx_idx cx_study_cells(const cx_study *s)
{
    return s->cells;
}

void cx_study_coords(const cx_study *s, cx_idx cell, cx_idx *coords)
{
    for (int i = s->naxes - 1; i >= 0; i--) {
        coords[i] = cell % s->axes[i].len;
        cell /= s->axes[i].len;
    }
}

cx_idx cx_study_index(const cx_study *s, const cx_idx *coords)
{
    cx_idx cell = 0;
    for (int i = 0; i < s->naxes; i++)
        cell = cell * s->axes[i].len + coords[i];
    return cell;
}

int cx_study_max_tasks(const cx_study *s)
{
    return s->max_tasks;
}

int cx_study_max_runs(const cx_study *s)
{
    return s->max_runs;
}
