/* coexist check: validate a sweep file and print the grid, its reuse structure, and cost and
 * memory estimates. Never computes a cell and never writes a file. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/cell.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "cli/commands.h"
#include "cli/estimate.h"

static void help(void)
{
    printf(
        "usage: coexist check FILE\n\n"
        "Validate the sweep file FILE and print its grid (axes, cells, runs per cell), the number\n"
        "of distinct networks and drives the grid needs, the estimated cost in core-hours and\n"
        "the peak memory of one cell. Exit status 0 when valid, 2 when not (the message gives\n"
        "file:line:column, the key and what was expected).\n");
}

static void print_axis(const cx_axis_info *a)
{
    printf("  %-28s %6lld ", a->name, (long long)a->len);
    if (a->kind == CX_AXIS_CATEGORICAL) {
        printf("labels: ");
        for (cx_idx i = 0; i < a->len; i++)
            printf("%s%s", i ? ", " : "", a->labels[i]);
    } else if (a->kind == CX_AXIS_SEED) {
        printf("replicates %g .. %g", a->values[0], a->values[a->len - 1]);
    } else if (a->len <= 6) {
        printf("values: ");
        for (cx_idx i = 0; i < a->len; i++)
            printf("%s%g", i ? ", " : "", a->values[i]);
    } else {
        printf("values %g, %g, ... %g", a->values[0], a->values[1], a->values[a->len - 1]);
    }
    printf("  [%s]\n", a->units);
}

int cx_cmd_check(int argc, char **argv)
{
    const char *path = NULL;
    for (int i = 1; i < argc; i++) {
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
        if (argv[i][0] == '-' || path != NULL) {
            fprintf(stderr, "coexist check: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        path = argv[i];
    }
    if (path == NULL) {
        fprintf(stderr, "coexist check: missing sweep file (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    cx_study *s = NULL;
    int rc = cx_study_load(path, &s);
    if (rc == CX_OK)
        rc = cx_estimate_memory_check(path, s);
    if (rc != CX_OK) {
        cx_study_destroy(&s);
        return cx_cli_fail("coexist check", rc);
    }

    int naxes = cx_study_naxes(s);
    cx_idx cells = cx_study_cells(s);
    printf("study %s (seed %llu): %s is valid\n", cx_study_name(s),
           (unsigned long long)cx_study_seed(s), path);
    printf("axes (%d):\n", naxes);
    for (int i = 0; i < naxes; i++) {
        cx_axis_info a;
        cx_study_axis(s, i, &a);
        print_axis(&a);
    }
    printf("grid: ");
    for (int i = 0; i < naxes; i++) {
        cx_axis_info a;
        cx_study_axis(s, i, &a);
        printf("%s%lld", i ? " x " : "", (long long)a.len);
    }
    printf("%s%lld cells, up to %d tasks and %d closed-loop runs per cell\n", naxes ? " = " : "",
           (long long)cells, cx_study_max_tasks(s), cx_study_max_runs(s));

    cx_estimate e;
    rc = cx_estimate_study(s, &e);
    if (rc != CX_OK) {
        cx_study_destroy(&s);
        return cx_cli_fail("coexist check", rc);
    }
    printf("reuse: %lld distinct networks, %lld distinct drives (work units) and %lld block "
           "groups (up to %d cells of one group advance their closed-loop runs together)%s\n",
           (long long)e.networks, (long long)e.drives, (long long)e.blocks, CX_CELL_GROUP,
           e.sampled ? " (estimated from a sample)" : "");
    printf("cost: %.3g GFLOP in all (%.3g per cell): about %.3g core-hours at an assumed "
           "%.2g GFLOP/s per core\n",
           e.flops * 1e-9, e.flops * 1e-9 / (double)cells, e.flops / CX_ASSUMED_FLOP_RATE / 3600.0,
           CX_ASSUMED_FLOP_RATE * 1e-9);
    printf("memory: at most %.1f MiB per rank (a rank computes one cell, or up to %d cells of "
           "one block group, at a time)\n",
           e.memory_max / 1048576.0, CX_CELL_GROUP);
    cx_study_destroy(&s);
    return CX_EXIT_OK;
}
