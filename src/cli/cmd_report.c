/* coexist report: turn a cube into findings. A summary of the cube; ensemble statistics over the
 * replicate axis with Wilson score intervals (src/report/stats.c); capacity when the grid has a
 * task-count axis (src/report/capacity.c); and, with an output directory, CSV tables, region
 * maps (src/report/map.c) and the capacity curve (src/report/plot.c). Everything printed also
 * goes to DIR/report.txt.
 */
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "coexist/error.h"
#include "coexist/report.h"
#include "cli/args.h"
#include "cli/commands.h"

static void help(void)
{
    printf(
        "usage: coexist report CUBE.h5 [--by AXIS[,AXIS...]] [--where AXIS=VALUE,...]\n"
        "                      [--over AXIS] [--threshold P] [--rows N] [-o DIR]\n\n"
        "Summarise a cube: cells done, the outcome class of the cells, the fraction that is\n"
        "multifunctional (every task's own run reconstructed), and what the random starts found.\n"
        "Then, for every point of the grouping axes, the probability of multifunctionality and\n"
        "of each outcome class with a 95 %% Wilson score interval, pooled over the replicate\n"
        "axis and every other axis that is neither grouped nor fixed. With a task_count axis\n"
        "among the grouping axes: the capacity, the largest task count whose probability of\n"
        "multifunctionality stays at or above P there and at every smaller task count, with\n"
        "lower and upper estimates from the interval bounds.\n\n"
        "A cell's outcome class is multifunctional, or else the most frequent failure among its\n"
        "task runs (other-trained, fixed-point, untrained-cycle, untrained-aperiodic, diverged;\n"
        "a tie goes to the later one), or failed when it could not be computed.\n\n"
        "  --by AXES       grouping axes (default: every axis except the replicate axis and\n"
        "                  the fixed ones); two axes also give region maps\n"
        "  --where A=V,... keep only the cells with these axis values\n"
        "  --over AXIS     the replicate axis (default: seed; none: no replicate axis)\n"
        "  --threshold P   success probability that defines capacity (default 0.5)\n"
        "  --rows N        table rows printed on the console (default 60; CSV has all)\n"
        "  -o, --output DIR  write report.txt, ensemble.csv, capacity.csv and capacity.png/\n"
        "                  .svg/.pdf, and with two grouping axes map-classes and\n"
        "                  map-multifunctional as .png/.svg/.pdf with a .csv of the pixels\n\n"
        "exit status: 0 done, 1 failure (I/O), 2 bad input (not a cube, unknown axis or value)\n");
}

static FILE *echo_file = NULL;

#if defined(__GNUC__)
__attribute__((format(printf, 1, 2)))
#endif
static void
say(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vprintf(fmt, ap);
    va_end(ap);
    if (echo_file != NULL) {
        va_start(ap, fmt);
        vfprintf(echo_file, fmt, ap);
        va_end(ap);
    }
}

static void value_text(const cx_rcube_axis *a, cx_idx k, char *buf, size_t n)
{
    if (a->labels != NULL)
        snprintf(buf, n, "%s", a->labels[k]);
    else
        snprintf(buf, n, "%g", a->values[k]);
}

static void summary(const cx_rcube *c)
{
    int64_t done = 0, by_status[CX_CELL_SKIPPED + 1] = {0}, by_class[CX_CLASS_COUNT] = {0};
    int64_t own[CX_OUT_COUNT] = {0}, rnd[CX_OUT_COUNT] = {0}, cells_untrained = 0;
    for (cx_idx cell = 0; cell < c->ncells; cell++) {
        by_class[cx_rcube_cell_class(c, cell)]++;
        if (!c->done[cell])
            continue;
        done++;
        if (c->status[cell] >= 0 && c->status[cell] <= CX_CELL_SKIPPED)
            by_status[(int)c->status[cell]]++;
        if (c->status[cell] != CX_CELL_COMPUTED)
            continue;
        int found = 0;
        for (int j = 0; j < c->max_runs; j++) {
            int o = c->outcome[cell * c->max_runs + j];
            if (o <= CX_OUT_NOT_RUN || o >= CX_OUT_COUNT)
                continue;
            if (j < c->ntasks[cell]) {
                own[o]++;
            } else {
                rnd[o]++;
                found |= o == CX_OUT_UNTRAINED_CYCLE || o == CX_OUT_UNTRAINED_APERIODIC;
            }
        }
        cells_untrained += found;
    }
    say("study %s: %s\n", c->name, c->path);
    say("cells: %lld of %lld done", (long long)done, (long long)c->ncells);
    for (int s = CX_CELL_COMPUTED; s <= CX_CELL_SKIPPED; s++)
        if (by_status[s] > 0)
            say(", %lld %s", (long long)by_status[s], cx_cell_status_name(s));
    say("\naxes:");
    for (int i = 0; i < c->naxes; i++)
        say(" %s[%lld]", c->axes[i].name, (long long)c->axes[i].len);
    say("\n");
    double lo, hi;
    cx_wilson(by_class[CX_CLASS_MULTI], done, CX_Z95, &lo, &hi);
    say("multifunctional: %lld of %lld done cells = %.3f (95 %% Wilson interval %.3f .. %.3f)\n",
        (long long)by_class[CX_CLASS_MULTI], (long long)done,
        done ? (double)by_class[CX_CLASS_MULTI] / (double)done : NAN, lo, hi);
    say("cell outcome classes:");
    for (int k = 0; k < CX_CLASS_CELLS; k++)
        say("%s %s %lld", k ? "," : "", cx_class_name(k), (long long)by_class[k]);
    say("\nruns from the end of training:");
    for (int o = 1; o < CX_OUT_COUNT; o++)
        say("%s %s %lld", o > 1 ? "," : "", cx_outcome_name(o), (long long)own[o]);
    say("\nruns from random starts:");
    for (int o = 1; o < CX_OUT_COUNT; o++)
        say("%s %s %lld", o > 1 ? "," : "", cx_outcome_name(o), (long long)rnd[o]);
    say("\n");
    /* Distinct untrained attractors per cell (the cell pipeline groups runs that end on the
     * same one: src/cell/untrained.c), and how often each kind turns up across the grid. */
    static const char *const kind_names[3] = {"fixed points", "untrained periodic orbits",
                                              "untrained aperiodic attractors"};
    say("distinct untrained attractors found (any start), in %lld computed cells:\n",
        (long long)by_status[CX_CELL_COMPUTED]);
    for (int k = 0; k < 3; k++) {
        int64_t total = 0, cells_with = 0, most = 0;
        for (cx_idx cell = 0; cell < c->ncells; cell++) {
            if (!c->done[cell] || c->status[cell] != CX_CELL_COMPUTED)
                continue;
            int64_t v = c->untrained_kinds[cell * 3 + k];
            if (v > 0) {
                total += v;
                cells_with++;
                if (v > most)
                    most = v;
            }
        }
        double lo2, hi2;
        cx_wilson(cells_with, by_status[CX_CELL_COMPUTED], CX_Z95, &lo2, &hi2);
        say("  %-31s %6lld in all; in %lld cells = %.3f of them (95 %% %.3f .. %.3f), at most "
            "%lld in one cell\n",
            kind_names[k], (long long)total, (long long)cells_with,
            by_status[CX_CELL_COMPUTED] ? (double)cells_with / (double)by_status[CX_CELL_COMPUTED]
                                        : NAN,
            lo2, hi2, (long long)most);
    }
    say("  (random-start runs that reached an untrained cycle or aperiodic motion: %lld cells)\n",
        (long long)cells_untrained);
    if (!c->ntasks_exact)
        say("warning: the sweep file stored in the cube did not load here, so every cell is "
            "taken to have %d tasks; runs are split into task and random starts by that\n",
            c->max_tasks);
}

static void describe_view(const cx_rcube *c, const cx_table *t, int over, char *buf, size_t n)
{
    size_t len = 0;
    buf[0] = '\0';
    for (int i = 0; i < c->naxes; i++) {
        if (!t->fixed[i])
            continue;
        char v[64];
        value_text(&c->axes[i], t->at[i], v, sizeof v);
        len += (size_t)snprintf(buf + len, len < n ? n - len : 0, "%s%s=%s", len ? ", " : "fixed ",
                                c->axes[i].name, v);
    }
    int first = 1;
    for (int i = 0; i < c->naxes; i++) {
        int grouped = 0;
        for (int g = 0; g < t->ngroup; g++)
            grouped |= t->group_axis[g] == i;
        if (grouped || t->fixed[i])
            continue;
        len += (size_t)snprintf(buf + len, len < n ? n - len : 0, "%s%s (%lld%s)",
                                first ? (len ? "; pooled over " : "pooled over ") : ", ",
                                c->axes[i].name, (long long)c->axes[i].len,
                                i == over ? " draws" : " values");
        first = 0;
    }
    if (len == 0)
        snprintf(buf, n, "one cell per point");
}

static void print_table(const cx_rcube *c, const cx_table *t, long long rows)
{
    say("\n%-*s", 0, "");
    for (int g = 0; g < t->ngroup; g++)
        say("%-14.14s ", c->axes[t->group_axis[g]].name);
    say("%6s  %-24s", "done", "P(multifunctional) 95%");
    static const char *const short_names[CX_CLASS_CELLS] = {"",        "other",   "fixed", "cycle",
                                                            "aperiod", "diverge", "failed"};
    for (int k = 1; k < CX_CLASS_CELLS; k++)
        say(" %7s", short_names[k]);
    say("  majority\n");
    for (cx_idx gi = 0; gi < t->ngroups && gi < rows; gi++) {
        const cx_group *g = &t->groups[gi];
        char v[64], iv[64];
        for (int a = 0; a < t->ngroup; a++) {
            value_text(&c->axes[t->group_axis[a]], g->coords[a], v, sizeof v);
            say("%-14.14s ", v);
        }
        double lo, hi;
        cx_wilson(g->multi, g->done, CX_Z95, &lo, &hi);
        if (g->done > 0)
            snprintf(iv, sizeof iv, "%.3f [%.3f, %.3f]", (double)g->multi / (double)g->done, lo,
                     hi);
        else
            snprintf(iv, sizeof iv, "-");
        say("%6lld  %-24s", (long long)g->done, iv);
        for (int k = 1; k < CX_CLASS_CELLS; k++) {
            if (g->done > 0)
                say(" %7.3f", (double)g->by_class[k] / (double)g->done);
            else
                say(" %7s", "-");
        }
        say("  %s\n", cx_class_name(cx_group_majority(g)));
    }
    if (t->ngroups > rows)
        say("... %lld more rows (all of them in ensemble.csv with -o)\n",
            (long long)(t->ngroups - rows));
    say("(class columns: fraction of done cells of each class; their Wilson intervals are in "
        "ensemble.csv)\n");
}

static void print_capacity(const cx_rcube *c, const cx_table *t, const cx_capacity *cap)
{
    say("\ncapacity (largest task count with P(multifunctional) >= %g there and at every smaller "
        "one; bounds from the 95 %% Wilson interval ends):\n",
        cap->threshold);
    for (int g = 0; g < t->ngroup; g++)
        if (g != cap->k_pos)
            say("%-18.18s ", c->axes[t->group_axis[g]].name);
    say("%8s %8s %8s %8s\n", "capacity", "lower", "upper", "cells");
    for (cx_idx i = 0; i < cap->nrows; i++) {
        const cx_capacity_row *r = &cap->rows[i];
        char v[64];
        for (int g = 0; g < t->ngroup; g++) {
            if (g == cap->k_pos)
                continue;
            value_text(&c->axes[t->group_axis[g]], r->coords[g], v, sizeof v);
            say("%-18.18s ", v);
        }
        say("%8g %8g %8g %8lld\n", r->capacity, r->lower, r->upper, (long long)r->done_min);
    }
    say("(cells: the fewest done cells at any task count of the row)\n");
}

static int parse_by(const cx_rcube *c, const char *text, int *axes, int *n)
{
    int rc = CX_OK;
    char buf[1024];
    snprintf(buf, sizeof buf, "%s", text);
    char *save = NULL;
    *n = 0;
    for (char *tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
        int i = cx_rcube_axis_find(c, tok);
        CX_REQUIRE(i >= 0, CX_ERR_INVALID, "--by: %s is not an axis of %s", tok, c->path);
        CX_REQUIRE(*n < CX_MAX_AXES, CX_ERR_INVALID, "--by: too many axes");
        axes[(*n)++] = i;
    }
    CX_REQUIRE(*n > 0, CX_ERR_INVALID, "--by needs at least one axis");
done:
    return rc;
}

static int open_out(const char *dir, const char *name, FILE **f)
{
    int rc = CX_OK;
    char path[CX_PATH_LEN + 64];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    *f = fopen(path, "w");
    CX_REQUIRE(*f != NULL, CX_ERR_IO, "cannot write %s: %s", path, strerror(errno));
done:
    return rc;
}

static int close_out(FILE **f)
{
    int bad = *f != NULL && (ferror(*f) || fclose(*f) != 0);
    *f = NULL;
    return bad ? CX_FAIL(CX_ERR_IO, "writing a report file failed") : CX_OK;
}

static int report(const char *cube, const char *by, const char *where, const char *over_name,
                  double threshold, long long rows, const char *dir)
{
    int rc = CX_OK;
    cx_rcube *c = NULL;
    cx_table *t = NULL;
    cx_capacity *cap = NULL;
    FILE *f = NULL;
    int fixed[CX_MAX_AXES] = {0}, group[CX_MAX_AXES], ngroup = 0;
    cx_idx at[CX_MAX_AXES] = {0};
    char path[CX_PATH_LEN + 64], note[1024];
    CX_TRY(cx_rcube_open(cube, &c));
    if (where != NULL)
        CX_TRY(cx_report_parse_where(c, where, fixed, at));
    int over = -1;
    if (over_name != NULL && strcmp(over_name, "none") == 0) {
        over = -1;
    } else if (over_name != NULL) {
        over = cx_rcube_axis_find(c, over_name);
        CX_REQUIRE(over >= 0, CX_ERR_INVALID, "--over: %s is not an axis of %s", over_name, cube);
    } else {
        for (int i = 0; i < c->naxes && over < 0; i++)
            if (c->axes[i].kind == CX_AXIS_SEED)
                over = i;
    }
    if (by != NULL) {
        CX_TRY(parse_by(c, by, group, &ngroup));
        for (int g = 0; g < ngroup; g++) {
            CX_REQUIRE(group[g] != over, CX_ERR_INVALID,
                       "--by: %s is the replicate axis, which is pooled (choose another with "
                       "--over)",
                       c->axes[group[g]].name);
            CX_REQUIRE(!fixed[group[g]], CX_ERR_INVALID, "--by: %s is fixed by --where",
                       c->axes[group[g]].name);
        }
    } else {
        for (int i = 0; i < c->naxes; i++)
            if (i != over && !fixed[i])
                group[ngroup++] = i;
    }
    if (dir != NULL) {
        CX_REQUIRE(mkdir(dir, 0777) == 0 || errno == EEXIST, CX_ERR_IO, "cannot create %s: %s", dir,
                   strerror(errno));
        snprintf(path, sizeof path, "%s/report.txt", dir);
        echo_file = fopen(path, "w");
        CX_REQUIRE(echo_file != NULL, CX_ERR_IO, "cannot write %s: %s", path, strerror(errno));
    }
    summary(c);
    CX_TRY(cx_table_build(c, group, ngroup, fixed, at, &t));
    describe_view(c, t, over, note, sizeof note);
    say("\nensemble statistics (%s; 95 %% Wilson score intervals):", note);
    print_table(c, t, rows);
    if (dir != NULL) {
        CX_TRY(open_out(dir, "ensemble.csv", &f));
        CX_TRY(cx_table_write_csv(c, t, f));
        CX_TRY(close_out(&f));
    }
    int kaxis = cx_rcube_axis_find(c, "task_count"), kpos = -1;
    for (int g = 0; g < ngroup; g++)
        if (group[g] == kaxis)
            kpos = g;
    if (kpos >= 0) {
        CX_TRY(cx_capacity_compute(c, t, kpos, threshold, &cap));
        print_capacity(c, t, cap);
        if (dir != NULL) {
            CX_TRY(open_out(dir, "capacity.csv", &f));
            CX_TRY(cx_capacity_write_csv(c, t, cap, f));
            CX_TRY(close_out(&f));
            snprintf(path, sizeof path, "%s/capacity", dir);
            CX_TRY(cx_capacity_plot(c, t, cap, path));
        }
    } else if (kaxis >= 0) {
        say("\n(no capacity: the task_count axis is %s, not a grouping axis)\n",
            fixed[kaxis] ? "fixed by --where" : "pooled");
    }
    if (ngroup == 2 && dir != NULL) {
        cx_map_opts mo = {0, c->name, note};
        snprintf(path, sizeof path, "%s/map-classes", dir);
        CX_TRY(cx_map_write(c, t, &mo, path));
        mo.probability = 1;
        snprintf(path, sizeof path, "%s/map-multifunctional", dir);
        CX_TRY(cx_map_write(c, t, &mo, path));
    }
    if (dir != NULL) {
        say("\nwritten to %s: report.txt, ensemble.csv%s%s\n", dir,
            cap ? ", capacity.csv, capacity.png/.svg/.pdf" : "",
            ngroup == 2 ? ", map-classes.png/.svg/.pdf/.csv, map-multifunctional.png/.svg/.pdf/.csv"
                        : "");
    } else if (ngroup == 2 || cap) {
        say("\n(give -o DIR for CSV tables%s%s)\n", ngroup == 2 ? ", region maps" : "",
            cap ? ", the capacity plot" : "");
    }
done:
    if (f != NULL)
        fclose(f);
    if (echo_file != NULL) {
        if (fclose(echo_file) != 0 && rc == CX_OK)
            rc = CX_FAIL(CX_ERR_IO, "writing report.txt failed");
        echo_file = NULL;
    }
    cx_capacity_destroy(&cap);
    cx_table_destroy(&t);
    cx_rcube_close(&c);
    return rc;
}

int cx_cmd_report(int argc, char **argv)
{
    const char *cube = NULL, *by = NULL, *where = NULL, *over = NULL, *dir = NULL, *v = NULL;
    double threshold = 0.5;
    long long rows = 60;
    for (int i = 1; i < argc; i++) {
        int k;
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
        if ((k = cx_arg_value(argc, argv, &i, "-o", &dir)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--output", &dir)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--by", &by)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--where", &where)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--over", &over)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--threshold", &v)) != 0) {
            if (k < 0 || cx_arg_double("--threshold", v, &threshold) != 0)
                return CX_EXIT_BAD_INPUT;
            if (!(threshold > 0 && threshold <= 1)) {
                fprintf(stderr, "coexist report: --threshold must be in (0, 1]\n");
                return CX_EXIT_BAD_INPUT;
            }
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--rows", &v)) != 0) {
            if (k < 0 || cx_arg_long("--rows", v, &rows) != 0)
                return CX_EXIT_BAD_INPUT;
            if (rows < 0) {
                fprintf(stderr, "coexist report: --rows must be >= 0\n");
                return CX_EXIT_BAD_INPUT;
            }
            continue;
        }
        if (argv[i][0] == '-' || cube != NULL) {
            fprintf(stderr, "coexist report: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        cube = argv[i];
    }
    if (cube == NULL) {
        fprintf(stderr, "coexist report: missing cube (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    int rc = report(cube, by, where, over, threshold, rows, dir);
    if (rc != CX_OK)
        return cx_cli_fail("coexist report", rc);
    return CX_EXIT_OK;
}
