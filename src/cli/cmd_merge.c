/* coexist merge: build a sweep's cube from the journals that shards (coexist run --shard I/N,
 * one per task of a job array) or interrupted runs left behind. It takes the sweep file like
 * run, creates the cube when absent, refuses a cube of a different study, replays every
 * journal of the cube's journal directory, and says which cells are still missing and which
 * shards they belong to. The work is the engine's with nothing to compute (merge_only). Exit
 * status 0 when every cell is done, 3 when cells are missing (rerun the shards, then merge).
 */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <mpi.h>

#include "coexist/engine.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "cli/estimate.h"

#define MAX_PARTITIONS 16

static void help(void)
{
    printf("usage: coexist merge FILE -o CUBE.h5 [--keep-journals]\n\n"
           "Assemble the cube of the sweep file FILE from the journals in CUBE.h5.journal/:\n"
           "those of shards (coexist run --shard I/N, or the tasks of a SLURM job array) and\n"
           "of interrupted runs. The cube is created when absent; a cube of another sweep is\n"
           "refused. Cells still missing are counted by the shard that owns them.\n\n"
           "  -o, --output CUBE   the cube to build or complete (required)\n"
           "  --keep-journals     keep the journals even when the cube is complete\n\n"
           "exit status: 0 complete, 1 failure, 2 bad input, 3 cells missing (rerun the\n"
           "shards that look incomplete, then merge again)\n");
}

typedef struct partition {
    int count;
    uint8_t seen[4096]; /* shard indexes with a journal (first 4096) */
} partition;

/* The shard partitions whose journals are in the directory. */
static int scan_partitions(const char *cube, partition *p, int *np)
{
    char dir[CX_PATH_LEN];
    cx_journal_dir(cube, dir, sizeof dir);
    *np = 0;
    DIR *d = opendir(dir);
    if (d == NULL)
        return 0;
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        int i, n, k;
        if (cx_journal_shard_parse(e->d_name, &i, &n) != 0)
            continue;
        for (k = 0; k < *np && p[k].count != n; k++)
            ;
        if (k == *np) {
            if (*np == MAX_PARTITIONS)
                continue;
            memset(&p[k], 0, sizeof p[k]);
            p[k].count = n;
            (*np)++;
        }
        if (i < 4096)
            p[k].seen[i] = 1;
    }
    closedir(d);
    return 0;
}

static int report_missing(const cx_plan *plan, const char *cube, const partition *parts, int np)
{
    int rc = CX_OK;
    cx_cube_summary sum;
    uint8_t *done = NULL, *mine = NULL;
    CX_TRY(cx_cube_summarize(cube, &sum, &done));
    cx_idx missing = sum.ncells - sum.done;
    fprintf(stderr, "coexist merge: %lld of %lld cells missing\n", (long long)missing,
            (long long)sum.ncells);
    CX_ALLOC(mine, (size_t)plan->ncells + 1);
    for (int k = 0; k < np; k++) {
        for (int i = 0; i < parts[k].count; i++) {
            double cost = 0;
            CX_TRY(cx_shard_mask(plan, i, parts[k].count, mine, &cost));
            cx_idx own = 0, miss = 0;
            for (cx_idx c = 0; c < plan->ncells; c++) {
                own += mine[c];
                miss += mine[c] && !done[c];
            }
            if (miss > 0)
                fprintf(stderr,
                        "  shard %d/%d looks incomplete: %lld of its %lld cells missing%s\n", i,
                        parts[k].count, (long long)miss, (long long)own,
                        i < 4096 && !parts[k].seen[i] ? " (no journal from it)" : "");
        }
    }
    if (np == 0)
        fprintf(stderr, "  no shard journals found; rerun `coexist run` to compute the rest\n");
done:
    free(mine);
    free(done);
    return rc;
}

int cx_cmd_merge(int argc, char **argv)
{
    const char *file = NULL, *out = NULL;
    cx_engine_opts o;
    cx_engine_opts_default(&o);
    o.merge_only = 1;
    o.quiet = 1; /* its own summary follows; damaged journal records are counted in it */
    for (int i = 1; i < argc; i++) {
        int k;
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
        if ((k = cx_arg_value(argc, argv, &i, "-o", &out)) != 0 ||
            (k = cx_arg_value(argc, argv, &i, "--output", &out)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if (strcmp(argv[i], "--keep-journals") == 0) {
            o.keep_journals = 1;
            continue;
        }
        if (argv[i][0] == '-' || file != NULL) {
            fprintf(stderr, "coexist merge: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        file = argv[i];
    }
    if (file == NULL || out == NULL) {
        fprintf(stderr, "coexist merge: need a sweep file and -o CUBE.h5 (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    o.cube = out;

    int provided = 0, rank = 0, size = 1, code = CX_EXIT_OK, rc = CX_OK;
    if (MPI_Init_thread(&argc, &argv, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS) {
        fprintf(stderr, "coexist merge: MPI_Init_thread failed\n");
        return CX_EXIT_FAILURE;
    }
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    MPI_Comm_set_errhandler(MPI_COMM_WORLD, MPI_ERRORS_RETURN);
    cx_study *s = NULL;
    cx_plan *plan = NULL;
    cx_engine_stats st;
    partition parts[MAX_PARTITIONS];
    int np = 0;
    memset(&st, 0, sizeof st);
    if (size != 1)
        rc = CX_FAIL(CX_ERR_INVALID, "merge runs as one process (started with %d)", size);
    if (rc == CX_OK)
        rc = cx_study_load(file, &s);
    if (rc == CX_OK)
        rc = cx_estimate_memory_check(file, s);
    if (rc == CX_OK)
        rc = cx_plan_from_study(s, &plan);
    if (rc == CX_OK)
        rc = cx_plan_keys(plan, s);
    if (rc == CX_OK)
        scan_partitions(out, parts, &np);
    if (rc == CX_OK)
        rc = cx_engine_run(MPI_COMM_WORLD, plan, s, cx_engine_cell_ops(), &o, &st);
    if (rc == CX_OK) {
        fprintf(stderr, "coexist merge: %lld cells were in the cube, %lld merged from journals%s\n",
                (long long)st.done_in_cube, (long long)st.replayed,
                st.dropped ? " (damaged journal records were dropped)" : "");
        if (st.complete) {
            fprintf(stderr, "coexist merge: %s is complete (%lld cells)%s\n", out,
                    (long long)plan->ncells, o.keep_journals ? "" : "; journals removed");
        } else {
            rc = report_missing(plan, out, parts, np);
            code = CX_EXIT_INCOMPLETE;
        }
    }
    if (rc != CX_OK)
        code = cx_cli_fail("coexist merge", rc);
    cx_plan_destroy(&plan);
    cx_study_destroy(&s);
    MPI_Finalize();
    return code;
}
