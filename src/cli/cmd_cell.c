/* coexist cell: compute one grid cell of a sweep file and print its runs, outcomes, metrics and
 * a per-stage timing line; optionally dump its matrices and trajectories to HDF5. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/cell.h"
#include "coexist/classify.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "cli/args.h"
#include "cli/commands.h"

void openblas_set_num_threads(int num_threads);

static void help(void)
{
    printf(
        "usage: coexist cell FILE (--at AXIS=VALUE,... | --index I) [--dump OUT.h5] "
        "[--overwrite]\n\n"
        "Compute one cell of the sweep file FILE and print a table of its closed-loop runs:\n"
        "where each run started (the end of a task's training, or a random start), its\n"
        "outcome, the trained attractor it landed on, its distance to every trained attractor,\n"
        "coverage, roundness, rotation sense, period, valid prediction time and Lyapunov\n"
        "exponent, then the time spent in each stage.\n\n"
        "  --at AXIS=VALUE,...  choose the cell by its axis values (every axis must be named)\n"
        "  --index I            choose the cell by its row-major index (0-based)\n"
        "  --dump OUT.h5        write M, W_in, W_out, end states and run trajectories to OUT.h5\n"
        "  --overwrite          allow --dump to replace an existing file\n\n"
        "A sweep without axes has a single cell; then neither --at nor --index is needed.\n");
}

static void fmt(char *buf, size_t len, double v, const char *f)
{
    if (isnan(v))
        snprintf(buf, len, "-");
    else
        snprintf(buf, len, f, v);
}

static void print_cell(const cx_study *s, const cx_cell_params *p, const cx_cell_result *r)
{
    int naxes = cx_study_naxes(s);
    cx_idx coords[CX_MAX_AXES];
    cx_study_coords(s, r->cell, coords);
    printf("cell %lld of %lld", (long long)r->cell, (long long)cx_study_cells(s));
    for (int i = 0; i < naxes; i++) {
        cx_axis_info a;
        cx_study_axis(s, i, &a);
        if (a.kind == CX_AXIS_CATEGORICAL)
            printf("%s %s=%s", i ? "," : ":", a.name, a.labels[coords[i]]);
        else
            printf("%s %s=%g", i ? "," : ":", a.name, a.values[coords[i]]);
    }
    printf("\n");
    printf("status: %s   multifunctional: %s   |lambda|max(M) before scaling: %.6g   "
           "||W_out||: %.4g   ||W_out on r^2||: %.4g\n",
           cx_cell_status_name(r->status), r->multifunctional ? "yes" : "no", r->rho_unscaled,
           r->wout_norm, r->wout_square_norm);
    if (r->status != CX_CELL_COMPUTED)
        return;
    printf("\n%-4s %-20s %-24s %-14s", "run", "start", "outcome", "attractor");
    for (int k = 0; k < p->ntasks; k++) {
        char h[32];
        snprintf(h, sizeof h, "d(%.10s)", p->tasks[k].name);
        printf(" %10s", h);
    }
    printf(" %8s %9s %4s %8s %8s %8s\n", "coverage", "roundness", "rot", "period", "valid", "lyap");
    for (int j = 0; j < r->nruns; j++) {
        const cx_run_metrics *m = &r->runs[j];
        char start[40], att[40], b[6][32];
        if (j < p->ntasks)
            snprintf(start, sizeof start, "end of %.13s", p->tasks[j].name);
        else
            snprintf(start, sizeof start, "random %d", j - p->ntasks + 1);
        if (m->attractor >= 0)
            snprintf(att, sizeof att, "%.14s", p->tasks[m->attractor].name);
        else
            snprintf(att, sizeof att, "-");
        printf("%-4d %-20s %-24s %-14s", j, start, cx_outcome_label(m->outcome), att);
        for (int k = 0; k < p->ntasks; k++) {
            fmt(b[0], sizeof b[0], m->distance[k], "%.4g");
            printf(" %10s", b[0]);
        }
        fmt(b[0], sizeof b[0], m->coverage, "%.3f");
        fmt(b[1], sizeof b[1], m->roundness, "%.4g");
        fmt(b[2], sizeof b[2], m->rotation, "%+.0f");
        fmt(b[3], sizeof b[3], m->period, "%.4g");
        fmt(b[4], sizeof b[4], m->valid_time, "%.4g");
        fmt(b[5], sizeof b[5], m->lyapunov, "%.3g");
        printf(" %8s %9s %4s %8s %8s %8s\n", b[0], b[1], b[2], b[3], b[4], b[5]);
    }
}

int cx_cmd_cell(int argc, char **argv)
{
    const char *path = NULL, *at = NULL, *index = NULL, *dump = NULL;
    int overwrite = 0;
    for (int i = 1; i < argc; i++) {
        int k;
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--at", &at)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--index", &index)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--dump", &dump)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if (strcmp(argv[i], "--overwrite") == 0) {
            overwrite = 1;
            continue;
        }
        if (argv[i][0] == '-' || path != NULL) {
            fprintf(stderr, "coexist cell: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        path = argv[i];
    }
    if (path == NULL) {
        fprintf(stderr, "coexist cell: missing sweep file (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    if (at != NULL && index != NULL) {
        fprintf(stderr, "coexist cell: give --at or --index, not both\n");
        return CX_EXIT_BAD_INPUT;
    }
    cx_study *s = NULL;
    cx_cell_ws *ws = NULL;
    int rc = cx_study_load(path, &s);
    if (rc != CX_OK)
        return cx_cli_fail("coexist cell", rc);
    cx_idx cell = 0;
    if (at != NULL) {
        rc = cx_study_find_cell(s, at, &cell);
        if (rc != CX_OK)
            goto fail;
    } else if (index != NULL) {
        long long v;
        if (cx_arg_long("--index", index, &v) != 0 || v < 0 || v >= cx_study_cells(s)) {
            fprintf(stderr, "coexist cell: --index must be in 0..%lld\n",
                    (long long)cx_study_cells(s) - 1);
            cx_study_destroy(&s);
            return CX_EXIT_BAD_INPUT;
        }
        cell = (cx_idx)v;
    } else if (cx_study_cells(s) != 1) {
        fprintf(stderr, "coexist cell: the sweep has %lld cells: choose one with --at or --index\n",
                (long long)cx_study_cells(s));
        cx_study_destroy(&s);
        return CX_EXIT_BAD_INPUT;
    }
    if (dump != NULL && (rc = cx_cell_dump_check(dump, overwrite)) != CX_OK)
        goto fail;
    openblas_set_num_threads(1);
    cx_cell_params p;
    cx_cell_result r;
    rc = cx_study_bind(s, cell, &p);
    if (rc != CX_OK)
        goto fail;
    rc = cx_cell_ws_create(&ws);
    if (rc != CX_OK)
        goto fail;
    cx_cell_ws_keep(ws, dump != NULL);
    rc = cx_cell_compute(ws, &p, cell, &r);
    if (rc != CX_OK)
        goto fail;
    print_cell(s, &p, &r);
    printf("\ntime: network %.3f s, drive %.3f s (of which Gram %.3f s), solve %.3f s, "
           "probes %.3f s, classify %.3f s, total %.3f s\n",
           r.time.network, r.time.drive, r.time.gram, r.time.solve, r.time.probes, r.time.classify,
           r.time.total);
    if (dump != NULL) {
        rc = cx_cell_dump(ws, &p, &r, dump, overwrite);
        if (rc != CX_OK)
            goto fail;
        printf("dumped matrices and trajectories to %s\n", dump);
    }
    cx_cell_ws_destroy(&ws);
    cx_study_destroy(&s);
    return CX_EXIT_OK;
fail:
    cx_cell_ws_destroy(&ws);
    cx_study_destroy(&s);
    return cx_cli_fail("coexist cell", rc);
}
