/* coexist: task entries of a sweep file (cycle, flow, file, family) and the per-task keys that
 * an axis tasks.<name>.<key> may sweep.
 *
 * A cycle is x = c + R (cos(w t + phase), e sin(w t + phase)) (task.h); a flow is one of the
 * built-in systems of task.h with its published standard parameters (cx_flow_defaults); a file
 * is a measured trajectory whose shape is read at load (cx_task_file_shape); a family expands
 * into several cycles or flows (cx_family_expand). Rotations are written in degrees and stored
 * in radians. No further published method is implemented here.
 */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "coexist/error.h"
#include "study/study_impl.h"

#define CX_DEG (3.14159265358979323846 / 180.0)

enum { K_CYCLE = 1, K_FLOW = 2, K_FILE = 4, K_FAMILY = 8, K_ANY = 7 };

static const struct {
    const char *name;
    int rule;
    double lo, hi;
    const char *units;
    int kinds; /* entry kinds (a family also counts as its template's kind) */
} task_keys[CX_TK_NKEYS] = {
    {"radius", CX_R_GT, 0, 0, "signal units", K_CYCLE},
    {"speed", CX_R_NONZERO, 0, 0, "rad/time unit", K_CYCLE},
    {"ellipticity", CX_R_OPEN_LO, 0, 1, "1", K_CYCLE},
    {"phase", CX_R_ANY, 0, 0, "rad", K_CYCLE},
    {"scale", CX_R_GT, 0, 0, "1", K_ANY},
    {"rotate", CX_R_ANY, 0, 0, "degrees", K_ANY},
    {"transient", CX_R_GE, 0, 0, "time units", K_FLOW},
    {"spacing", CX_R_GE, 0, 0, "signal units", K_FAMILY},
    {"count", CX_R_CLOSED, 1, CX_MAX_TASKS, "tasks", K_FAMILY},
};

static const char *const arrangements[] = {"cycles-line", "cycles-ring", "flows-shifted",
                                           "flows-mirrored"};

int cx_task_key_find(const char *name)
{
    for (int k = 0; k < CX_TK_NKEYS; k++)
        if (strcmp(task_keys[k].name, name) == 0)
            return k;
    return -1;
}

const char *cx_task_key_name(int k)
{
    return task_keys[k].name;
}

const char *cx_task_key_units(int k)
{
    return task_keys[k].units;
}

int cx_task_key_ok(int k, double v)
{
    if (k == CX_TK_COUNT && v != floor(v))
        return 0;
    return cx_range_ok(task_keys[k].rule, task_keys[k].lo, task_keys[k].hi, v);
}

void cx_task_key_expect(int k, char *buf, size_t n)
{
    char r[64];
    cx_range_text(task_keys[k].rule, task_keys[k].lo, task_keys[k].hi, r, sizeof r);
    snprintf(buf, n, "%s%s", k == CX_TK_COUNT ? "an integer" : "a number", r);
}

static int entry_kind(const cx_task_entry *e)
{
    int base = e->family ? e->fam.base.kind : e->spec.kind;
    return base == CX_TASK_CYCLE ? K_CYCLE : base == CX_TASK_FLOW ? K_FLOW : K_FILE;
}

int cx_task_key_applies(const cx_task_entry *e, int k)
{
    if (task_keys[k].kinds == K_FAMILY)
        return e->family;
    return (task_keys[k].kinds & entry_kind(e)) != 0;
}

const char *cx_task_entry_name(const cx_task_entry *e)
{
    return e->family ? e->fam.base.name : e->spec.name;
}

void cx_task_key_set(cx_task_spec *t, cx_family_spec *f, int k, double v)
{
    switch (k) {
    case CX_TK_RADIUS:
        t->radius = v;
        break;
    case CX_TK_SPEED:
        t->speed = v;
        break;
    case CX_TK_ELLIPTICITY:
        t->ellipticity = v;
        break;
    case CX_TK_PHASE:
        t->phase = v;
        break;
    case CX_TK_SCALE:
        t->scale = v;
        break;
    case CX_TK_ROTATE:
        t->rotate = v * CX_DEG;
        break;
    case CX_TK_TRANSIENT:
        t->transient = v;
        break;
    case CX_TK_SPACING:
        if (f)
            f->spacing = v;
        break;
    case CX_TK_COUNT:
        if (f)
            f->count = (int)v;
        break;
    default:
        break;
    }
}

/* A numeric task key: parsed, range checked, stored, and marked as given. */
static int read_key(const cx_study *s, const cx_ynode *map, const char *key, int k, cx_task_spec *t,
                    cx_family_spec *f, unsigned *given)
{
    int rc = CX_OK;
    char what[96], full[400];
    const cx_ynode *n = cx_ytree_get(map, cx_task_key_name(k));
    if (n == NULL)
        return CX_OK;
    snprintf(full, sizeof full, "%s.%s", key, cx_task_key_name(k));
    cx_task_key_expect(k, what, sizeof what);
    double v = 0;
    CX_TRY(cx_sv_number(s->file, n, full, what, &v));
    if (!cx_task_key_ok(k, v))
        CX_RAISE(cx_sv_fail(s->file, n, full, what), NULL);
    cx_task_key_set(t, f, k, v);
    *given |= 1u << k;
done:
    return rc;
}

static int parse_cycle(const cx_study *s, const cx_ynode *n, const char *key, cx_task_spec *t,
                       unsigned *given)
{
    int rc = CX_OK;
    char full[400];
    const cx_ynode *c = cx_ytree_get(n, "centre");
    t->kind = CX_TASK_CYCLE;
    t->dim = 2;
    t->ellipticity = 1;
    if (c != NULL) {
        snprintf(full, sizeof full, "%s.centre", key);
        CX_TRY(cx_sv_numbers(s->file, c, full, 2, CX_MAX_DIM, t->centre, &t->dim));
    }
    for (int k = CX_TK_RADIUS; k <= CX_TK_PHASE; k++)
        CX_TRY(read_key(s, n, key, k, t, NULL, given));
done:
    return rc;
}

static int parse_flow(const cx_study *s, const cx_ynode *n, const char *key, cx_task_spec *t,
                      unsigned *given)
{
    int rc = CX_OK;
    char full[400], list[512];
    const cx_ynode *v;
    size_t used = 0;
    t->kind = CX_TASK_FLOW;
    t->dim = 3;
    t->transient = 50;
    t->inner_dt = 0.001;
    snprintf(full, sizeof full, "%s.system", key);
    list[0] = '\0';
    for (int i = 0; i < CX_FLOW_COUNT && used < sizeof list; i++)
        used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "one of ",
                                 cx_flow_name(i));
    v = cx_ytree_get(n, "system");
    if (v == NULL)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a key system (%s), got none", s->file,
                 n->line, n->col, key, list);
    if (v->kind != CX_YN_SCALAR || (t->flow = cx_flow_lookup(v->text)) < 0)
        CX_RAISE(cx_sv_fail(s->file, v, full, list), NULL);
    cx_flow_defaults(t->flow, t->par, t->x0);
    v = cx_ytree_get(n, "parameters");
    if (v != NULL) {
        int np = cx_flow_npar(t->flow);
        used = 0;
        list[0] = '\0';
        for (int i = 0; i < np && used < sizeof list; i++)
            used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "",
                                     cx_flow_par_name(t->flow, i));
        snprintf(full, sizeof full, "%s.parameters", key);
        CX_TRY(cx_sv_keys(s->file, v, full, list));
        for (int i = 0; i < np; i++) {
            const cx_ynode *p = cx_ytree_get(v, cx_flow_par_name(t->flow, i));
            char pk[480];
            snprintf(pk, sizeof pk, "%s.%s", full, cx_flow_par_name(t->flow, i));
            if (p != NULL)
                CX_TRY(cx_sv_number(s->file, p, pk, "a number", &t->par[i]));
        }
    }
    v = cx_ytree_get(n, "start");
    if (v != NULL) {
        int cnt = 0;
        snprintf(full, sizeof full, "%s.start", key);
        CX_TRY(cx_sv_numbers(s->file, v, full, 3, 3, t->x0, &cnt));
    }
    CX_TRY(read_key(s, n, key, CX_TK_TRANSIENT, t, NULL, given));
    v = cx_ytree_get(n, "step");
    if (v != NULL) {
        snprintf(full, sizeof full, "%s.step", key);
        CX_TRY(cx_sv_number(s->file, v, full, "a number > 0", &t->inner_dt));
        if (!(t->inner_dt > 0))
            CX_RAISE(cx_sv_fail(s->file, v, full, "a number > 0"), NULL);
    }
done:
    return rc;
}

static int parse_file(const cx_study *s, const cx_ynode *n, const char *key, cx_task_spec *t,
                      char *written)
{
    int rc = CX_OK;
    char full[400], inner[1024];
    const cx_ynode *v = cx_ytree_get(n, "path");
    cx_idx rows = 0;
    t->kind = CX_TASK_FILE;
    snprintf(full, sizeof full, "%s.path", key);
    if (v == NULL)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a key path, got none", s->file, n->line,
                 n->col, key);
    CX_TRY(cx_sv_string(s->file, v, full, written, CX_PATH_LEN));
    if (written[0] == '\0')
        CX_RAISE(cx_sv_fail(s->file, v, full, "a file name"), NULL);
    if (written[0] == '/' || s->dir[0] == '\0')
        snprintf(t->path, sizeof t->path, "%s", written);
    else if ((size_t)snprintf(t->path, sizeof t->path, "%s/%s", s->dir, written) >= sizeof t->path)
        CX_RAISE(cx_sv_fail(s->file, v, full, "a shorter path"), NULL);
    const cx_ynode *d = cx_ytree_get(n, "dataset");
    if (d != NULL) {
        snprintf(full, sizeof full, "%s.dataset", key);
        CX_TRY(cx_sv_string(s->file, d, full, t->dataset, sizeof t->dataset));
    }
    d = cx_ytree_get(n, "dt");
    snprintf(full, sizeof full, "%s.dt", key);
    /* An HDF5 dataset may carry its own sample interval (file_dt 0 = read it, see task.h's
     * reader); a CSV file cannot. */
    if (d == NULL && t->dataset[0] == '\0')
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: %s: expected a key dt (the file's sample interval), "
                 "got none",
                 s->file, n->line, n->col, key);
    if (d != NULL) {
        CX_TRY(cx_sv_number(s->file, d, full, "a number > 0", &t->file_dt));
        if (!(t->file_dt > 0))
            CX_RAISE(cx_sv_fail(s->file, d, full, "a number > 0"), NULL);
    }
    if (cx_task_file_shape(t, &rows, &t->dim) != CX_OK) {
        /* Keep the reader's reason but put the sweep-file position first. */
        snprintf(inner, sizeof inner, "%s", cx_err_message());
        cx_err_clear();
        snprintf(full, sizeof full, "%s.path", key);
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a readable trajectory file, got %s (%s)",
                 s->file, v->line, v->col, full, written, inner);
    }
    if (t->dim < 1 || t->dim > CX_MAX_DIM || rows < 2)
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: %s.path: expected a trajectory of 1 to %d columns and at least 2 "
                 "rows, got %d columns and %lld rows",
                 s->file, v->line, v->col, key, CX_MAX_DIM, t->dim, (long long)rows);
done:
    return rc;
}

static int parse_transforms(const cx_study *s, const cx_ynode *n, const char *key, cx_task_spec *t,
                            unsigned *given)
{
    int rc = CX_OK;
    char full[400];
    const cx_ynode *v;
    t->scale = 1;
    CX_TRY(read_key(s, n, key, CX_TK_SCALE, t, NULL, given));
    CX_TRY(read_key(s, n, key, CX_TK_ROTATE, t, NULL, given));
    if ((v = cx_ytree_get(n, "rotate")) != NULL && t->dim < 2) {
        snprintf(full, sizeof full, "%s.rotate", key);
        CX_RAISE(cx_sv_fail(s->file, v, full, "no rotation for a one-dimensional task"), NULL);
    }
    if ((v = cx_ytree_get(n, "mirror")) != NULL) {
        snprintf(full, sizeof full, "%s.mirror", key);
        CX_TRY(cx_sv_bool(s->file, v, full, &t->mirror));
    }
    if ((v = cx_ytree_get(n, "reverse")) != NULL) {
        snprintf(full, sizeof full, "%s.reverse", key);
        CX_TRY(cx_sv_bool(s->file, v, full, &t->reverse));
    }
    if ((v = cx_ytree_get(n, "shift")) != NULL) {
        int cnt = 0;
        snprintf(full, sizeof full, "%s.shift", key);
        CX_TRY(cx_sv_numbers(s->file, v, full, t->dim, t->dim, t->shift, &cnt));
    }
done:
    return rc;
}

#define COMMON_KEYS     "kind, name, shift, scale, rotate, mirror, reverse"
#define COMMON_TEMPLATE "kind, shift, scale, rotate, mirror, reverse"

/* A cycle, flow or file task at node n (kind already read). */
static int parse_task(const cx_study *s, const cx_ynode *n, const char *key, const char *kind,
                      int template, cx_task_spec *t, unsigned *given, char *written)
{
    int rc = CX_OK;
    char allowed[256];
    const char *common = template ? COMMON_TEMPLATE : COMMON_KEYS;
    if (strcmp(kind, "cycle") == 0) {
        snprintf(allowed, sizeof allowed, "%s, centre, radius, speed, ellipticity, phase", common);
        CX_TRY(cx_sv_keys(s->file, n, key, allowed));
        CX_TRY(parse_cycle(s, n, key, t, given));
    } else if (strcmp(kind, "flow") == 0) {
        snprintf(allowed, sizeof allowed, "%s, system, parameters, start, transient, step", common);
        CX_TRY(cx_sv_keys(s->file, n, key, allowed));
        CX_TRY(parse_flow(s, n, key, t, given));
    } else {
        snprintf(allowed, sizeof allowed, "%s, path, dataset, dt", common);
        CX_TRY(cx_sv_keys(s->file, n, key, allowed));
        CX_TRY(parse_file(s, n, key, t, written));
    }
    CX_TRY(parse_transforms(s, n, key, t, given));
done:
    return rc;
}

static int parse_family(const cx_study *s, const cx_ynode *n, const char *key, cx_task_entry *e)
{
    int rc = CX_OK;
    char full[400], kind[16];
    const cx_ynode *v;
    cx_family_spec *f = &e->fam;
    CX_TRY(cx_sv_keys(s->file, n, key,
                      "kind, name, arrangement, count, spacing, alternate, senses, template"));
    snprintf(full, sizeof full, "%s.arrangement", key);
    v = cx_ytree_get(n, "arrangement");
    f->kind = -1;
    for (int i = 0; v != NULL && v->kind == CX_YN_SCALAR && i < 4; i++)
        if (strcmp(v->text, arrangements[i]) == 0)
            f->kind = i;
    if (f->kind < 0) {
        const char *what = "one of cycles-line, cycles-ring, flows-shifted, flows-mirrored";
        if (v == NULL)
            CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a key arrangement (%s), got none",
                     s->file, n->line, n->col, key, what);
        CX_RAISE(cx_sv_fail(s->file, v, full, what), NULL);
    }
    CX_TRY(read_key(s, n, key, CX_TK_COUNT, &f->base, f, &e->given));
    CX_TRY(read_key(s, n, key, CX_TK_SPACING, &f->base, f, &e->given));
    if ((v = cx_ytree_get(n, "alternate")) != NULL) {
        snprintf(full, sizeof full, "%s.alternate", key);
        CX_TRY(cx_sv_bool(s->file, v, full, &f->alternate));
    }
    if ((v = cx_ytree_get(n, "senses")) != NULL) {
        double sv[CX_MAX_TASKS];
        snprintf(full, sizeof full, "%s.senses", key);
        if (f->alternate)
            CX_RAISE(cx_sv_fail(s->file, v, full, "either senses or alternate: true"), NULL);
        CX_TRY(cx_sv_numbers(s->file, v, full, 1, CX_MAX_TASKS, sv, &e->nsenses));
        for (int i = 0; i < e->nsenses; i++) {
            if (sv[i] != 1 && sv[i] != -1)
                CX_RAISE(cx_sv_fail(s->file, v->val[i], full, "1 or -1"), NULL);
            f->senses[i] = (int)sv[i];
        }
    }
    v = cx_ytree_get(n, "template");
    snprintf(full, sizeof full, "%s.template", key);
    if (v == NULL)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s: expected a key template, got none", s->file,
                 n->line, n->col, key);
    if (v->kind != CX_YN_MAP)
        CX_RAISE(cx_sv_fail(s->file, v, full, "a mapping"), NULL);
    const cx_ynode *k = cx_ytree_get(v, "kind");
    const char *want = f->kind <= CX_FAMILY_CYCLES_RING ? "cycle" : "flow";
    char what[64];
    snprintf(what, sizeof what, "%s (the arrangement's kind)", want);
    snprintf(full, sizeof full, "%s.template.kind", key);
    if (k == NULL)
        CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: %s.template: expected a key kind (%s), got none",
                 s->file, v->line, v->col, key, want);
    CX_TRY(cx_sv_string(s->file, k, full, kind, sizeof kind));
    if (strcmp(kind, want) != 0)
        CX_RAISE(cx_sv_fail(s->file, k, full, what), NULL);
    snprintf(full, sizeof full, "%s.template", key);
    CX_TRY(parse_task(s, v, full, kind, 1, &f->base, &e->given, e->path_written));
done:
    return rc;
}

int cx_task_entry_parse(const cx_study *s, const cx_ynode *n, const char *prefix, int index,
                        cx_task_entry *e)
{
    int rc = CX_OK;
    char key[256], name[CX_NAME_LEN], kind[16], full[320];
    const cx_ynode *v;
    memset(e, 0, sizeof *e);
    snprintf(key, sizeof key, "%s[%d]", prefix, index + 1);
    if (n->kind != CX_YN_MAP)
        CX_RAISE(cx_sv_fail(s->file, n, key, "a task (a mapping with a key kind)"), NULL);
    e->line = n->line;
    e->col = n->col;
    snprintf(name, sizeof name, "task-%d", index + 1);
    if ((v = cx_ytree_get(n, "name")) != NULL) {
        snprintf(full, sizeof full, "%s.name", key);
        /* Room for the "-16" that family expansion appends. */
        CX_TRY(cx_sv_name(s->file, v, full, 0, name, CX_NAME_LEN - 4));
    }
    snprintf(key, sizeof key, "%s.%s", prefix, name);
    v = cx_ytree_get(n, "kind");
    snprintf(full, sizeof full, "%s.kind", key);
    if (v == NULL)
        CX_RAISE(CX_ERR_INVALID,
                 "%s:%d:%d: %s: expected a key kind (cycle, flow, file or family), got none",
                 s->file, n->line, n->col, key);
    if (v->kind != CX_YN_SCALAR || strlen(v->text) >= sizeof kind ||
        (strcmp(v->text, "cycle") && strcmp(v->text, "flow") && strcmp(v->text, "file") &&
         strcmp(v->text, "family")))
        CX_RAISE(cx_sv_fail(s->file, v, full, "one of cycle, flow, file, family"), NULL);
    snprintf(kind, sizeof kind, "%s", v->text);
    if (strcmp(kind, "family") == 0) {
        e->family = 1;
        snprintf(e->fam.base.name, sizeof e->fam.base.name, "%s", name);
        CX_TRY(parse_family(s, n, key, e));
    } else {
        snprintf(e->spec.name, sizeof e->spec.name, "%s", name);
        CX_TRY(parse_task(s, n, key, kind, 0, &e->spec, &e->given, e->path_written));
    }
done:
    return rc;
}

/* Canonical lines. */
static int emitf(int (*emit)(void *, const char *), void *ctx, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static int emitf(int (*emit)(void *, const char *), void *ctx, const char *fmt, ...)
{
    char line[2048];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(line, sizeof line, fmt, ap);
    va_end(ap);
    return emit(ctx, line);
}

static void join(char *buf, size_t n, const double *v, int count)
{
    size_t used = 0;
    buf[0] = '\0';
    for (int i = 0; i < count && used < n; i++)
        used += (size_t)snprintf(buf + used, n - used, "%s%.17g", i ? ", " : "", v[i]);
}

/* "axis" when an axis sets key k of this entry, else the value. */
static int key_line(const cx_study *s, const cx_task_entry *e, const char *p, int k, double v,
                    int (*emit)(void *, const char *), void *ctx)
{
    if (cx_axes_task_key(s, cx_task_entry_name(e), k, e->family) >= 0)
        return emitf(emit, ctx, "%s.%s: axis", p, cx_task_key_name(k));
    return emitf(emit, ctx, "%s.%s: %.17g", p, cx_task_key_name(k), v);
}

static int spec_canon(const cx_study *s, const cx_task_entry *e, const cx_task_spec *t,
                      const char *p, int (*emit)(void *, const char *), void *ctx)
{
    int rc = CX_OK;
    char buf[1024];
    if (t->kind == CX_TASK_CYCLE) {
        CX_TRY(emitf(emit, ctx, "%s.kind: cycle", p));
        join(buf, sizeof buf, t->centre, t->dim);
        CX_TRY(emitf(emit, ctx, "%s.centre: %s", p, buf));
        CX_TRY(key_line(s, e, p, CX_TK_RADIUS, t->radius, emit, ctx));
        CX_TRY(key_line(s, e, p, CX_TK_SPEED, t->speed, emit, ctx));
        CX_TRY(key_line(s, e, p, CX_TK_ELLIPTICITY, t->ellipticity, emit, ctx));
        CX_TRY(key_line(s, e, p, CX_TK_PHASE, t->phase, emit, ctx));
    } else if (t->kind == CX_TASK_FLOW) {
        CX_TRY(emitf(emit, ctx, "%s.kind: flow", p));
        CX_TRY(emitf(emit, ctx, "%s.system: %s", p, cx_flow_name(t->flow)));
        for (int i = 0; i < cx_flow_npar(t->flow); i++)
            CX_TRY(emitf(emit, ctx, "%s.parameters.%s: %.17g", p, cx_flow_par_name(t->flow, i),
                         t->par[i]));
        join(buf, sizeof buf, t->x0, 3);
        CX_TRY(emitf(emit, ctx, "%s.start: %s", p, buf));
        CX_TRY(key_line(s, e, p, CX_TK_TRANSIENT, t->transient, emit, ctx));
        CX_TRY(emitf(emit, ctx, "%s.step: %.17g", p, t->inner_dt));
    } else {
        CX_TRY(emitf(emit, ctx, "%s.kind: file", p));
        CX_TRY(emitf(emit, ctx, "%s.path: %s", p, e->path_written));
        CX_TRY(emitf(emit, ctx, "%s.dataset: %s", p, t->dataset));
        CX_TRY(emitf(emit, ctx, "%s.dt: %.17g", p, t->file_dt));
        CX_TRY(emitf(emit, ctx, "%s.dim: %d", p, t->dim));
    }
    join(buf, sizeof buf, t->shift, t->dim);
    CX_TRY(emitf(emit, ctx, "%s.shift: %s", p, buf));
    CX_TRY(key_line(s, e, p, CX_TK_SCALE, t->scale, emit, ctx));
    if (cx_axes_task_key(s, cx_task_entry_name(e), CX_TK_ROTATE, e->family) >= 0)
        CX_TRY(emitf(emit, ctx, "%s.rotate: axis", p));
    else
        CX_TRY(emitf(emit, ctx, "%s.rotate: %.17g", p, t->rotate / CX_DEG));
    CX_TRY(emitf(emit, ctx, "%s.mirror: %s", p, t->mirror ? "true" : "false"));
    CX_TRY(emitf(emit, ctx, "%s.reverse: %s", p, t->reverse ? "true" : "false"));
done:
    return rc;
}

int cx_task_entry_canon(const cx_study *s, const cx_task_entry *e, const char *prefix, int index,
                        int (*emit)(void *ctx, const char *line), void *ctx)
{
    int rc = CX_OK;
    char p[512], t[600];
    snprintf(p, sizeof p, "%s.%s", prefix, cx_task_entry_name(e));
    CX_TRY(emitf(emit, ctx, "%s.index: %d", p, index));
    if (!e->family) {
        CX_TRY(spec_canon(s, e, &e->spec, p, emit, ctx));
        goto done;
    }
    const cx_family_spec *f = &e->fam;
    CX_TRY(emitf(emit, ctx, "%s.kind: family", p));
    CX_TRY(emitf(emit, ctx, "%s.arrangement: %s", p, arrangements[f->kind]));
    CX_TRY(key_line(s, e, p, CX_TK_COUNT, f->count, emit, ctx));
    CX_TRY(key_line(s, e, p, CX_TK_SPACING, f->spacing, emit, ctx));
    CX_TRY(emitf(emit, ctx, "%s.alternate: %s", p, f->alternate ? "true" : "false"));
    {
        double sv[CX_MAX_TASKS];
        char buf[512];
        for (int i = 0; i < e->nsenses; i++)
            sv[i] = f->senses[i];
        join(buf, sizeof buf, sv, e->nsenses);
        CX_TRY(emitf(emit, ctx, "%s.senses: %s", p, buf));
    }
    snprintf(t, sizeof t, "%s.template", p);
    CX_TRY(spec_canon(s, e, &f->base, t, emit, ctx));
done:
    return rc;
}
