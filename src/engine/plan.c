/* coexist engine: the sweep plan, i.e. what the engine needs to know about a study's grid:
 * axis names, values and units, the sizes of per-run arrays, the texts that identify the
 * study, and per cell the stage keys and estimated costs used to form and order work units.
 * Cell indices are row-major over the axes (the first axis varies slowest), as in study.h.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/engine.h"
#include "coexist/error.h"

static char *dup_text(const char *s)
{
    size_t n = strlen(s) + 1;
    char *d = cx_malloc_array(n, 1);
    if (d != NULL)
        memcpy(d, s, n);
    return d;
}

int cx_plan_create(const char *name, int max_runs, int max_tasks, const char *canonical,
                   cx_plan **out)
{
    int rc = CX_OK;
    cx_plan *p = NULL;
    CX_REQUIRE(max_runs >= 1 && max_runs <= CX_MAX_RUNS && max_tasks >= 1 &&
                   max_tasks <= CX_MAX_TASKS,
               CX_ERR_INVALID, "run count %d or task count %d out of range", max_runs, max_tasks);
    CX_CALLOC(p, 1);
    snprintf(p->name, sizeof p->name, "%s", name);
    p->max_runs = max_runs;
    p->max_tasks = max_tasks;
    p->ncells = 1;
    p->canonical = dup_text(canonical);
    p->source = dup_text(canonical);
    if (p->canonical == NULL || p->source == NULL)
        CX_RAISE(CX_ERR_NOMEM, "out of memory copying the study text");
    p->hash = cx_hash64(canonical, strlen(canonical));
    *out = p;
    p = NULL;
done:
    cx_plan_destroy(&p);
    return rc;
}

int cx_plan_add_axis(cx_plan *p, const char *name, const char *units, cx_idx len,
                     const double *values)
{
    int rc = CX_OK;
    CX_REQUIRE(p->naxes < CX_MAX_AXES && len >= 1, CX_ERR_INVALID, "cannot add axis %s", name);
    cx_plan_axis *a = &p->axes[p->naxes];
    memset(a, 0, sizeof *a);
    snprintf(a->name, sizeof a->name, "%s", name);
    snprintf(a->units, sizeof a->units, "%s", units);
    a->kind = CX_AXIS_NUMERIC;
    a->len = len;
    CX_ALLOC(a->values, len);
    memcpy(a->values, values, (size_t)len * sizeof(double));
    p->naxes++;
    p->ncells *= len;
done:
    return rc;
}

int cx_plan_alloc_keys(cx_plan *p)
{
    int rc = CX_OK;
    CX_CALLOC(p->network_key, p->ncells);
    CX_CALLOC(p->drive_key, p->ncells);
    CX_CALLOC(p->block_key, p->ncells);
    CX_CALLOC(p->cost_shared, p->ncells);
    CX_CALLOC(p->cost_own, p->ncells);
done:
    return rc;
}

int cx_plan_from_study(const cx_study *s, cx_plan **out)
{
    int rc = CX_OK;
    cx_plan *p = NULL;
    CX_TRY(cx_plan_create(cx_study_name(s), cx_study_max_runs(s), cx_study_max_tasks(s),
                          cx_study_canonical(s), &p));
    free(p->source);
    p->source = dup_text(cx_study_source(s));
    if (p->source == NULL)
        CX_RAISE(CX_ERR_NOMEM, "out of memory copying the sweep file");
    for (int i = 0; i < cx_study_naxes(s); i++) {
        cx_axis_info ai;
        cx_study_axis(s, i, &ai);
        CX_TRY(cx_plan_add_axis(p, ai.name, ai.units ? ai.units : "1", ai.len, ai.values));
        cx_plan_axis *a = &p->axes[i];
        a->kind = ai.kind;
        if (ai.labels != NULL) {
            CX_CALLOC(a->labels, ai.len);
            for (cx_idx k = 0; k < ai.len; k++) {
                a->labels[k] = dup_text(ai.labels[k]);
                if (a->labels[k] == NULL)
                    CX_RAISE(CX_ERR_NOMEM, "out of memory copying axis labels");
            }
        }
    }
    CX_REQUIRE(p->ncells == cx_study_cells(s), CX_ERR_INTERNAL,
               "grid size %lld differs from the study's %lld", (long long)p->ncells,
               (long long)cx_study_cells(s));
    *out = p;
    p = NULL;
done:
    cx_plan_destroy(&p);
    return rc;
}

int cx_plan_keys(cx_plan *p, const cx_study *s)
{
    int rc = CX_OK;
    cx_cell_params *cp = NULL;
    CX_ALLOC(cp, 1);
    if (p->network_key == NULL)
        CX_TRY(cx_plan_alloc_keys(p));
    for (cx_idx c = 0; c < p->ncells; c++) {
        int brc = cx_study_bind(s, c, cp);
        if (brc == CX_ERR_INVALID) {
            /* An invalid combination is an outcome of the grid, computed as a failed cell. */
            cx_err_clear();
            p->network_key[c] = p->drive_key[c] = p->block_key[c] = 0;
            p->cost_shared[c] = p->cost_own[c] = 0.0;
            continue;
        }
        CX_TRY(brc);
        double net, drive, solve, probe;
        cx_cell_cost_parts(cp, &net, &drive, &solve, &probe);
        p->network_key[c] = cx_cell_network_key(cp);
        p->drive_key[c] = cx_cell_drive_key(cp);
        p->block_key[c] = cx_cell_block_key(cp);
        p->cost_shared[c] = net + drive;
        p->cost_own[c] = solve + probe;
    }
done:
    free(cp);
    return rc;
}

void cx_plan_coords(const cx_plan *p, cx_idx cell, cx_idx *coords)
{
    for (int i = p->naxes - 1; i >= 0; i--) {
        coords[i] = cell % p->axes[i].len;
        cell /= p->axes[i].len;
    }
}

void cx_plan_destroy(cx_plan **pp)
{
    cx_plan *p = *pp;
    if (p == NULL)
        return;
    *pp = NULL;
    for (int i = 0; i < p->naxes; i++) {
        free(p->axes[i].values);
        if (p->axes[i].labels != NULL) {
            for (cx_idx k = 0; k < p->axes[i].len; k++)
                free(p->axes[i].labels[k]);
            free(p->axes[i].labels);
        }
    }
    free(p->network_key);
    free(p->drive_key);
    free(p->block_key);
    free(p->cost_shared);
    free(p->cost_own);
    free(p->source);
    free(p->canonical);
    free(p);
}
