/* coexist replay: recompute one cell of a cube from the sweep file stored in it and check that
 * every stored label and metric comes back bit for bit; optionally dump the cell's matrices and
 * trajectories and draw a phase portrait of each run.
 *
 * The comparison goes through the engine's own record encoding (cx_record_encode/decode), so
 * the recomputed result is laid out exactly as the engine stored it (runs beyond the cell's
 * run count not run, distances to absent tasks NaN). Floating values are compared as bit
 * patterns; two NaNs count as equal whatever their payload, because the cube's fill value and a
 * computed NaN need not share one and NaN carries no value.
 */
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "coexist/cell.h"
#include "coexist/engine.h"
#include "coexist/error.h"
#include "coexist/report.h"
#include "coexist/study.h"
#include "cli/args.h"
#include "cli/commands.h"

void openblas_set_num_threads(int num_threads);

static void help(void)
{
    printf(
        "usage: coexist replay CUBE.h5 (--at AXIS=VALUE,... | --index I) [--dump OUT.h5]\n"
        "                      [--overwrite] [--plot DIR] [--coords I,J]\n\n"
        "Recompute one cell of CUBE.h5 from the sweep file stored in the cube, print its runs,\n"
        "and compare every stored label and metric of the cell with the recomputed one bit for\n"
        "bit: the status, multifunctional, the untrained attractors by kind, the unscaled\n"
        "spectral radius, the readout norms, and per run the outcome, the attractor, the\n"
        "untrained attractor, the distances, coverage, roundness, rotation, period, valid time,\n"
        "Lyapunov exponent and stop time.\n\n"
        "  --at AXIS=VALUE,...  choose the cell by its axis values (every axis named)\n"
        "  --index I            choose the cell by its row-major index (0-based)\n"
        "  --dump OUT.h5        write the cell's matrices and run trajectories (as coexist cell)\n"
        "  --overwrite          allow --dump to replace an existing file\n"
        "  --plot DIR           draw DIR/run-<j>.png/.svg/.pdf: each run's tail over the\n"
        "                       training signals\n"
        "  --coords I,J         output coordinates of the portraits (0-based, default 0,1)\n\n"
        "exit status: 0 the cell agrees bit for bit, 1 it differs (or a failure), 2 bad input\n"
        "(not a cube, no such cell, the cell is not done in the cube)\n");
}

typedef struct diff_log {
    int compared, differ, nan_both;
    int shown;
    int labels_differ; /* an integer field (status, outcome, ...) differs */
    double worst_rel;  /* largest relative difference of a floating field */
} diff_log;

static void cmp_int(diff_log *d, const char *what, int run, long long stored, long long now)
{
    d->compared++;
    if (stored == now)
        return;
    d->differ++;
    d->labels_differ = 1;
    if (d->shown++ < 40) {
        if (run >= 0)
            printf("  run %d %s: stored %lld, recomputed %lld\n", run, what, stored, now);
        else
            printf("  %s: stored %lld, recomputed %lld\n", what, stored, now);
    }
}

static void cmp_f64(diff_log *d, const char *what, int run, double stored, double now)
{
    uint64_t a, b;
    memcpy(&a, &stored, 8);
    memcpy(&b, &now, 8);
    d->compared++;
    if (a == b) {
        d->nan_both += isnan(stored) != 0;
        return;
    }
    if (isnan(stored) && isnan(now)) {
        d->nan_both++;
        return;
    }
    d->differ++;
    double rel = fabs(now - stored) / fmax(fabs(stored), fabs(now));
    if (!(rel <= d->worst_rel))
        d->worst_rel = isnan(rel) ? INFINITY : rel;
    if (d->shown++ < 40) {
        char where[64] = "";
        if (run >= 0)
            snprintf(where, sizeof where, "run %d ", run);
        printf("  %s%s: stored %.17g (0x%016llx), recomputed %.17g (0x%016llx), difference "
               "%.3g\n",
               where, what, stored, (unsigned long long)a, now, (unsigned long long)b,
               now - stored);
    }
}

static void compare(const cx_cell_result *s, const cx_cell_result *r, int max_runs, int max_tasks,
                    diff_log *d)
{
    cmp_int(d, "status", -1, s->status, r->status);
    cmp_int(d, "multifunctional", -1, s->multifunctional, r->multifunctional);
    cmp_int(d, "untrained", -1, s->untrained, r->untrained);
    cmp_int(d, "untrained_fixed_points", -1, s->untrained_kinds[0], r->untrained_kinds[0]);
    cmp_int(d, "untrained_cycles", -1, s->untrained_kinds[1], r->untrained_kinds[1]);
    cmp_int(d, "untrained_aperiodic", -1, s->untrained_kinds[2], r->untrained_kinds[2]);
    cmp_f64(d, "rho_unscaled", -1, s->rho_unscaled, r->rho_unscaled);
    cmp_f64(d, "wout_norm", -1, s->wout_norm, r->wout_norm);
    cmp_f64(d, "wout_square_norm", -1, s->wout_square_norm, r->wout_square_norm);
    for (int j = 0; j < max_runs; j++) {
        const cx_run_metrics *a = &s->runs[j], *b = &r->runs[j];
        cmp_int(d, "outcome", j, a->outcome, b->outcome);
        cmp_int(d, "attractor", j, a->attractor, b->attractor);
        cmp_int(d, "cluster", j, a->cluster, b->cluster);
        for (int t = 0; t < max_tasks; t++) {
            char name[32];
            snprintf(name, sizeof name, "distance[%d]", t);
            cmp_f64(d, name, j, a->distance[t], b->distance[t]);
        }
        cmp_f64(d, "coverage", j, a->coverage, b->coverage);
        cmp_f64(d, "roundness", j, a->roundness, b->roundness);
        cmp_f64(d, "rotation", j, a->rotation, b->rotation);
        cmp_f64(d, "period", j, a->period, b->period);
        cmp_f64(d, "valid_time", j, a->valid_time, b->valid_time);
        cmp_f64(d, "lyapunov", j, a->lyapunov, b->lyapunov);
        cmp_f64(d, "stop_time", j, a->stop_time, b->stop_time);
    }
}

static void print_runs(const cx_study *s, const cx_cell_params *p, const cx_cell_result *r)
{
    cx_idx coords[CX_MAX_AXES];
    cx_study_coords(s, r->cell, coords);
    printf("cell %lld of %lld", (long long)r->cell, (long long)cx_study_cells(s));
    for (int i = 0; i < cx_study_naxes(s); i++) {
        cx_axis_info a;
        cx_study_axis(s, i, &a);
        if (a.kind == CX_AXIS_CATEGORICAL)
            printf("%s %s=%s", i ? "," : ":", a.name, a.labels[coords[i]]);
        else
            printf("%s %s=%g", i ? "," : ":", a.name, a.values[coords[i]]);
    }
    printf("\nstatus: %s   multifunctional: %s\n", cx_cell_status_name(r->status),
           r->multifunctional == 1 ? "yes" : "no");
    if (r->status != CX_CELL_COMPUTED)
        return;
    printf("%-4s %-20s %-24s %-14s %9s %9s %9s\n", "run", "start", "outcome", "attractor", "period",
           "roundness", "valid");
    for (int j = 0; j < r->nruns; j++) {
        const cx_run_metrics *m = &r->runs[j];
        char start[40], att[40];
        if (j < p->ntasks)
            snprintf(start, sizeof start, "end of %.13s", p->tasks[j].name);
        else
            snprintf(start, sizeof start, "random %d", j - p->ntasks + 1);
        if (m->attractor >= 0 && m->attractor < p->ntasks)
            snprintf(att, sizeof att, "%.14s", p->tasks[m->attractor].name);
        else
            snprintf(att, sizeof att, "-");
        printf("%-4d %-20s %-24s %-14s %9.4g %9.4g %9.4g\n", j, start, cx_outcome_label(m->outcome),
               att, m->period, m->roundness, m->valid_time);
    }
}

typedef struct replay_opts {
    const char *cube, *at, *index, *dump, *plot;
    int overwrite, cx, cy;
} replay_opts;

static int replay(const replay_opts *o, int *agree)
{
    int rc = CX_OK;
    cx_rcube *c = NULL;
    cx_study *s = NULL;
    cx_cell_ws *ws = NULL;
    cx_cell_params *p = NULL;
    cx_cell_result *stored = NULL, *now = NULL, *norm = NULL;
    unsigned char *rec = NULL;
    char tmp_dump[CX_PATH_LEN + 64] = "";
    *agree = 0;
    CX_TRY(cx_rcube_open(o->cube, &c));
    CX_TRY(cx_study_load_buffer(c->source, strlen(c->source), o->cube, &s));
    CX_REQUIRE(strcmp(cx_study_canonical(s), c->canonical) == 0, CX_ERR_MISMATCH,
               "%s: the stored sweep file no longer gives the stored canonical form (made by "
               "another version of coexist?); a replay would not compute the same cell",
               o->cube);
    cx_idx cell = 0;
    if (o->at != NULL) {
        CX_TRY(cx_study_find_cell(s, o->at, &cell));
    } else if (o->index != NULL) {
        long long v;
        CX_REQUIRE(cx_arg_long("--index", o->index, &v) == 0 && v >= 0 && v < c->ncells,
                   CX_ERR_INVALID, "--index must be in 0..%lld", (long long)c->ncells - 1);
        cell = (cx_idx)v;
    } else {
        CX_REQUIRE(c->ncells == 1, CX_ERR_INVALID,
                   "the cube has %lld cells: choose one with --at or --index",
                   (long long)c->ncells);
    }
    CX_CALLOC(p, 1);
    CX_CALLOC(stored, 1);
    CX_CALLOC(now, 1);
    CX_CALLOC(norm, 1);
    int done_flag = 0;
    CX_TRY(cx_rcube_read_cell(c, cell, stored, &done_flag));
    CX_REQUIRE(done_flag, CX_ERR_INVALID,
               "cell %lld is not done in %s: nothing to compare (coexist run computes it, "
               "coexist cell shows it)",
               (long long)cell, o->cube);
    if (o->dump != NULL)
        CX_TRY(cx_cell_dump_check(o->dump, o->overwrite));
    openblas_set_num_threads(1);
    int keep = o->dump != NULL || o->plot != NULL;
    int brc = cx_study_bind(s, cell, p);
    if (brc == CX_ERR_INVALID) {
        /* as the engine records a cell whose parameters do not bind (src/engine/cellops.c) */
        cx_err_clear();
        memset(now, 0, sizeof *now);
        now->cell = cell;
        now->status = CX_CELL_FAILED_INVALID;
        now->rho_unscaled = now->wout_norm = now->wout_square_norm = NAN;
        keep = 0;
    } else {
        CX_TRY(brc);
        CX_TRY(cx_cell_ws_create(&ws));
        cx_cell_ws_keep(ws, keep);
        CX_TRY(cx_cell_compute(ws, p, cell, now));
        now->cell = cell;
    }
    print_runs(s, p, now);
    size_t rs = cx_record_size(c->max_runs, c->max_tasks);
    CX_ALLOC(rec, rs);
    cx_record_encode(now, 0.0, 0.0, 0, c->max_runs, c->max_tasks, rec);
    double wall, fin;
    CX_REQUIRE(cx_record_decode(rec, c->max_runs, c->max_tasks, norm, &wall, &fin) == 0,
               CX_ERR_INTERNAL, "a fresh record failed its CRC");
    diff_log d = {0, 0, 0, 0, 0, 0.0};
    printf("\ncomparison with %s:\n", o->cube);
    compare(stored, norm, c->max_runs, c->max_tasks, &d);
    if (d.differ == 0) {
        printf("exact agreement: %d stored values equal bit for bit (%d of them NaN in both)\n",
               d.compared, d.nan_both);
        *agree = 1;
    } else {
        printf("DIFFERENT: %d of %d stored values differ%s\n", d.differ, d.compared,
               d.shown > 40 ? " (the first 40 shown)" : "");
        if (!d.labels_differ && d.worst_rel < 1e-9)
            printf("every label agrees and the metrics differ by at most %.2g relative: the "
                   "rounding of another CPU type or BLAS build (OpenBLAS picks its kernels by "
                   "CPU), or a tool such as valgrind, rather than another computation\n",
                   d.worst_rel);
    }
    if (o->dump != NULL && keep) {
        CX_TRY(cx_cell_dump(ws, p, now, o->dump, o->overwrite));
        printf("dumped matrices and trajectories to %s\n", o->dump);
    }
    if (o->plot != NULL) {
        if (!keep || now->status != CX_CELL_COMPUTED) {
            printf("no portraits: the cell was not computed (%s)\n",
                   cx_cell_status_name(now->status));
        } else {
            CX_REQUIRE(mkdir(o->plot, 0777) == 0 || errno == EEXIST, CX_ERR_IO,
                       "cannot create %s: %s", o->plot, strerror(errno));
            const char *src = o->dump;
            if (src == NULL) {
                snprintf(tmp_dump, sizeof tmp_dump, "%s/.cell-%lld.h5", o->plot, (long long)cell);
                CX_TRY(cx_cell_dump(ws, p, now, tmp_dump, 1));
                src = tmp_dump;
            }
            char title[128];
            snprintf(title, sizeof title, "%s, cell %lld", c->name, (long long)cell);
            CX_TRY(cx_portrait_write(src, title, o->cx, o->cy,
                                     (cx_idx)floor(p->probe.tail / p->train.dt + 0.5), o->plot));
            printf("portraits of %d runs in %s (run-<j>.png, .svg, .pdf)\n", now->nruns, o->plot);
        }
    }
done:
    if (tmp_dump[0])
        unlink(tmp_dump);
    free(rec);
    free(norm);
    free(now);
    free(stored);
    free(p);
    cx_cell_ws_destroy(&ws);
    cx_study_destroy(&s);
    cx_rcube_close(&c);
    return rc;
}

int cx_cmd_replay(int argc, char **argv)
{
    replay_opts o = {NULL, NULL, NULL, NULL, NULL, 0, 0, 1};
    const char *coords = NULL;
    for (int i = 1; i < argc; i++) {
        int k;
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--at", &o.at)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--index", &o.index)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--dump", &o.dump)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--plot", &o.plot)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--coords", &coords)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if (strcmp(argv[i], "--overwrite") == 0) {
            o.overwrite = 1;
            continue;
        }
        if (argv[i][0] == '-' || o.cube != NULL) {
            fprintf(stderr, "coexist replay: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        o.cube = argv[i];
    }
    if (o.cube == NULL) {
        fprintf(stderr, "coexist replay: missing cube (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    if (o.at != NULL && o.index != NULL) {
        fprintf(stderr, "coexist replay: give --at or --index, not both\n");
        return CX_EXIT_BAD_INPUT;
    }
    if (coords != NULL) {
        char extra;
        if (sscanf(coords, "%d,%d%c", &o.cx, &o.cy, &extra) != 2 || o.cx < 0 || o.cy < 0) {
            fprintf(stderr, "coexist replay: --coords expects I,J (two 0-based coordinates)\n");
            return CX_EXIT_BAD_INPUT;
        }
    }
    int agree = 0;
    int rc = replay(&o, &agree);
    if (rc != CX_OK)
        return cx_cli_fail("coexist replay", rc);
    return agree ? CX_EXIT_OK : CX_EXIT_FAILURE;
}
