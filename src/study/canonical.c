/* coexist: the canonical resolved form of a study: one "key: value" line per parameter (every
 * default filled in, doubles as %.17g so that equal values print equally), per task key
 * (tasks.<name>.<key>, or task_sets.<set>.<name>.<key>), per axis (axis.<i>.<key>: v1, v2, ...),
 * sorted bytewise. A key set by an axis prints "axis" instead of its overridden fixed value.
 * Comments, formatting, key order and written-out defaults do not change it, so two sweep files
 * describe the same cube exactly when their canonical forms are equal, and a line-by-line diff
 * names the keys that differ. The free-text study.description is left out on purpose. No
 * published method is implemented here. */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "study/study_impl.h"

typedef struct lines {
    char **v;
    cx_idx n, cap;
} lines;

static int push(void *ctx, const char *line)
{
    int rc = CX_OK;
    lines *l = ctx;
    if (l->n == l->cap) {
        char **nv = NULL;
        cx_idx cap = l->cap ? 2 * l->cap : 128;
        CX_ALLOC(nv, cap);
        if (l->n > 0)
            memcpy(nv, l->v, (size_t)l->n * sizeof *nv);
        free(l->v);
        l->v = nv;
        l->cap = cap;
    }
    size_t len = strlen(line) + 1;
    CX_ALLOC(l->v[l->n], len);
    memcpy(l->v[l->n], line, len);
    l->n++;
done:
    return rc;
}

static int pushf(lines *l, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static int pushf(lines *l, const char *fmt, ...)
{
    char buf[4096];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    return push(l, buf);
}

static int cmp_line(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

static int on_axis(const cx_study *s, int param)
{
    for (int i = 0; i < s->naxes; i++)
        if (s->axes[i].target == CX_AT_PARAM && s->axes[i].param == param)
            return 1;
    return 0;
}

static int param_lines(const cx_study *s, lines *l)
{
    int rc = CX_OK;
    for (int i = 0; i < cx_param_count(); i++) {
        const cx_param *p = cx_param_at(i);
        double v = cx_param_read(&s->base, i);
        if (on_axis(s, i)) {
            CX_TRY(pushf(l, "%s: axis", p->key));
        } else if (strcmp(p->key, "reservoir.mean_degree") == 0 && !s->degree_set) {
            int topo = cx_param_find("reservoir.topology");
            if (on_axis(s, topo))
                CX_TRY(pushf(l, "%s: default (3; small-world 4)", p->key));
            else
                CX_TRY(pushf(l, "%s: %d", p->key,
                             s->base.net.topology == CX_TOPO_SMALL_WORLD ? 4 : 3));
        } else if (p->type == CX_PT_ENUM) {
            CX_TRY(pushf(l, "%s: %s", p->key, p->labels[(int)v]));
        } else if (p->type == CX_PT_BOOL) {
            CX_TRY(pushf(l, "%s: %s", p->key, v != 0 ? "true" : "false"));
        } else if (p->type == CX_PT_INT) {
            CX_TRY(pushf(l, "%s: %lld", p->key, (long long)v));
        } else {
            CX_TRY(pushf(l, "%s: %.17g", p->key, v));
        }
    }
done:
    return rc;
}

static int axis_lines(const cx_study *s, lines *l)
{
    int rc = CX_OK;
    for (int i = 0; i < s->naxes; i++) {
        const cx_axis_def *a = &s->axes[i];
        size_t cap = 64 + (size_t)a->len * 32, used = 0;
        char *buf = NULL;
        if (a->labels != NULL)
            for (cx_idx k = 0; k < a->len; k++)
                cap += strlen(a->labels[k]);
        CX_ALLOC(buf, cap);
        used = (size_t)snprintf(buf, cap, "axis.%d.%s: ", i, a->name);
        for (cx_idx k = 0; k < a->len; k++) {
            if (a->labels != NULL)
                used +=
                    (size_t)snprintf(buf + used, cap - used, "%s%s", k ? ", " : "", a->labels[k]);
            else
                used += (size_t)snprintf(buf + used, cap - used, "%s%.17g", k ? ", " : "",
                                         a->values[k]);
        }
        rc = push(l, buf);
        free(buf);
        if (rc != CX_OK)
            CX_RAISE(rc, NULL);
    }
done:
    return rc;
}

int cx_study_make_canonical(cx_study *s)
{
    int rc = CX_OK;
    lines l = {NULL, 0, 0};
    char *out = NULL;
    CX_TRY(pushf(&l, "study.name: %s", s->name));
    CX_TRY(pushf(&l, "study.seed: %llu", (unsigned long long)s->seed));
    CX_TRY(param_lines(s, &l));
    if (s->weights_mode == CX_W_BLEND) {
        CX_TRY(pushf(&l, "training.weights: blend"));
    } else if (s->weights_mode == CX_W_EQUAL) {
        CX_TRY(pushf(&l, "training.weights: equal"));
    } else {
        char buf[1024];
        size_t used = 0;
        for (int i = 0; i < s->nweights; i++)
            used += (size_t)snprintf(buf + used, sizeof buf - used, "%s%.17g", i ? ", " : "",
                                     s->weights[i]);
        CX_TRY(pushf(&l, "training.weights: %s", buf));
    }
    for (int k = 0; k < s->nlists; k++) {
        char prefix[128];
        snprintf(prefix, sizeof prefix, "%s%s", s->sets ? "task_sets." : "tasks",
                 s->sets ? s->lists[k].name : "");
        for (int i = 0; i < s->lists[k].n; i++)
            CX_TRY(cx_task_entry_canon(s, &s->lists[k].e[i], prefix, i, push, &l));
    }
    CX_TRY(axis_lines(s, &l));
    qsort(l.v, (size_t)l.n, sizeof *l.v, cmp_line);
    size_t total = 1;
    for (cx_idx i = 0; i < l.n; i++)
        total += strlen(l.v[i]) + 1;
    CX_ALLOC(out, total);
    size_t used = 0;
    for (cx_idx i = 0; i < l.n; i++) {
        size_t len = strlen(l.v[i]);
        memcpy(out + used, l.v[i], len);
        used += len;
        out[used++] = '\n';
    }
    out[used] = '\0';
    free(s->canonical);
    s->canonical = out;
    out = NULL;
done:
    for (cx_idx i = 0; i < l.n; i++)
        free(l.v[i]);
    free(l.v);
    free(out);
    return rc;
}
