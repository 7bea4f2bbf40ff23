/* coexist status: progress of a cube and its journals, read-only and without MPI: cells done
 * (in the cube or only in journals so far), failures by status, the recent rate and the time
 * left at that rate, and which ranks and shards wrote journals. Shards of a job array write
 * journals before any cube exists; given the sweep file, status reads them alone and counts
 * the cells of each shard (shards.c).
 */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "coexist/clock.h"
#include "coexist/cell.h"
#include "coexist/engine.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "cli/args.h"
#include "cli/commands.h"

static void help(void)
{
    printf("usage: coexist status CUBE.h5 [--sweep FILE]\n\n"
           "Print the progress of a cube written by coexist run: cells done, failures by\n"
           "status, the rate over the last minutes of journal records and the time left at\n"
           "that rate, and the journals each rank and shard wrote. Reads only; safe while a\n"
           "run goes on.\n\n"
           "  --sweep FILE   the sweep file: needed before the first merge of shards (there is\n"
           "                 no cube yet); with it, cells done are also counted per shard\n");
}

typedef struct status_ctx {
    uint8_t *done;
    cx_idx ncells;
    cx_idx extra;
    cx_idx by_status[8];
    double *times;
    cx_idx ntimes, cap;
} status_ctx;

static int on_record(void *arg, const unsigned char *rec)
{
    status_ctx *c = arg;
    int64_t cell = cx_record_cell(rec);
    if (c->ntimes == c->cap) {
        cx_idx cap = c->cap ? 2 * c->cap : 4096;
        double *t = realloc(c->times, (size_t)cap * sizeof *t);
        if (t == NULL)
            return CX_FAIL(CX_ERR_NOMEM, "out of memory reading journals");
        c->times = t;
        c->cap = cap;
    }
    c->times[c->ntimes++] = cx_record_finished(rec);
    if (cell >= 0 && cell < c->ncells && !c->done[cell]) {
        c->done[cell] = 1;
        c->extra++;
        int s = cx_record_status(rec);
        c->by_status[s >= 0 && s < 8 ? s : 0]++;
    }
    return CX_OK;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int cx_cmd_status(int argc, char **argv)
{
    const char *path = NULL, *sweep = NULL;
    for (int i = 1; i < argc; i++) {
        int k;
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--sweep", &sweep)) != 0) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            continue;
        }
        if (argv[i][0] == '-' || path != NULL) {
            fprintf(stderr, "coexist status: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        path = argv[i];
    }
    if (path == NULL) {
        fprintf(stderr, "coexist status: missing cube (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    cx_cube_summary sum;
    status_ctx ctx;
    cx_study *study = NULL;
    cx_plan *plan = NULL;
    memset(&ctx, 0, sizeof ctx);
    memset(&sum, 0, sizeof sum);
    int kind = CX_CUBE_ABSENT, rc = cx_cube_probe(path, &kind);
    if (rc == CX_OK && sweep != NULL) {
        rc = cx_study_load(sweep, &study);
        if (rc == CX_OK)
            rc = cx_plan_from_study(study, &plan);
        if (rc == CX_OK)
            rc = cx_plan_keys(plan, study);
        if (rc == CX_OK && kind == CX_CUBE_OURS)
            rc = cx_cube_check(path, plan);
    }
    if (rc == CX_OK && kind != CX_CUBE_ABSENT) {
        rc = cx_cube_summarize(path, &sum, &ctx.done);
    } else if (rc == CX_OK && plan == NULL) {
        rc = CX_FAIL(CX_ERR_INVALID,
                     "there is no cube at %s yet (shards write only journals): pass the sweep "
                     "file with --sweep FILE, or run `coexist merge`",
                     path);
    } else if (rc == CX_OK) {
        /* No cube yet: the sweep file gives the grid. */
        snprintf(sum.name, sizeof sum.name, "%s", plan->name);
        sum.ncells = plan->ncells;
        sum.hash = plan->hash;
        sum.max_runs = plan->max_runs;
        sum.max_tasks = plan->max_tasks;
        ctx.done = cx_calloc_array((size_t)plan->ncells + 1, 1);
        if (ctx.done == NULL)
            rc = CX_FAIL(CX_ERR_NOMEM, "out of memory");
    }
    if (rc != CX_OK) {
        cx_plan_destroy(&plan);
        cx_study_destroy(&study);
        return cx_cli_fail("coexist status", rc);
    }
    ctx.ncells = sum.ncells;
    int parts[16], nparts = 0;

    char jdir[CX_PATH_LEN];
    cx_journal_dir(path, jdir, sizeof jdir);
    DIR *d = opendir(jdir);
    int njournals = 0;
    char lines[64][160];
    if (d != NULL) {
        struct dirent *e;
        while ((e = readdir(d)) != NULL) {
            size_t len = strlen(e->d_name);
            if (len <= 4 || strcmp(e->d_name + len - 4, ".jnl") != 0)
                continue;
            char p[CX_PATH_LEN + 300];
            snprintf(p, sizeof p, "%s/%s", jdir, e->d_name);
            cx_replay_stats st;
            int jrc =
                cx_journal_replay(p, sum.hash, sum.max_runs, sum.max_tasks, on_record, &ctx, &st);
            if (jrc != CX_OK) {
                cx_err_print("coexist status", 0);
                cx_err_clear();
                continue;
            }
            int si, sn;
            char who[64];
            if (cx_journal_shard_parse(e->d_name, &si, &sn) == 0) {
                snprintf(who, sizeof who, "shard %d/%d rank %d", si, sn, st.rank);
                int k = 0;
                while (k < nparts && parts[k] != sn)
                    k++;
                if (k == nparts && nparts < 16)
                    parts[nparts++] = sn;
            } else {
                snprintf(who, sizeof who, "rank %d", st.rank);
            }
            if (njournals < 64)
                snprintf(lines[njournals], sizeof lines[0], "  %s: %lld records%s%s", who,
                         (long long)st.records, st.torn ? ", a torn tail" : "",
                         st.bad_crc ? ", bad CRCs" : "");
            njournals++;
        }
        closedir(d);
    }
    cx_idx done = sum.done + ctx.extra;
    printf("cube %s%s: study \"%s\", %lld cells\n", path,
           kind == CX_CUBE_ABSENT ? " (not merged yet)" : "", sum.name, (long long)sum.ncells);
    printf("done: %lld of %lld (%.1f %%); %lld in the cube, %lld only in journals so far%s\n",
           (long long)done, (long long)sum.ncells,
           sum.ncells ? 100.0 * (double)done / (double)sum.ncells : 100.0, (long long)sum.done,
           (long long)ctx.extra, sum.complete ? "; complete" : "");
    printf("by status:");
    for (int k = 1; k <= CX_CELL_SKIPPED; k++)
        printf("%s %lld %s", k > 1 ? "," : "", (long long)(sum.by_status[k] + ctx.by_status[k]),
               cx_cell_status_name(k));
    printf("\n");
    cx_idx failed = 0;
    for (int k = CX_CELL_FAILED_NOT_PD; k <= CX_CELL_FAILED_INVALID; k++)
        failed += sum.by_status[k] + ctx.by_status[k];
    printf("failed cells: %lld\n", (long long)failed);
    if (ctx.ntimes >= 2 && done < sum.ncells) {
        qsort(ctx.times, (size_t)ctx.ntimes, sizeof(double), cmp_double);
        /* The rate over the most recent records (up to the last 10 minutes of them). */
        double last = ctx.times[ctx.ntimes - 1];
        cx_idx first = ctx.ntimes - 1;
        while (first > 0 && last - ctx.times[first - 1] <= 600.0)
            first--;
        double span = last - ctx.times[first];
        if (span > 0) {
            double rate = (double)(ctx.ntimes - 1 - first) / span;
            double left = (double)(sum.ncells - done) / rate;
            printf("rate: %.4g cells/s over the last %.0f s of records (last record %.0f s "
                   "ago); time left at that rate: %.0f s\n",
                   rate, span, cx_clock_wall() - last, left);
        }
    } else if (done < sum.ncells) {
        printf("rate: unknown (too few journal records)\n");
    }
    if (njournals == 0)
        printf("journals: none%s\n", sum.complete ? " (merged into the cube and removed)" : "");
    else {
        printf("journals (%d):\n", njournals);
        for (int k = 0; k < njournals && k < 64; k++)
            printf("%s\n", lines[k]);
    }
    if (plan != NULL && nparts > 0) {
        uint8_t *mine = cx_calloc_array((size_t)plan->ncells + 1, 1);
        for (int k = 0; k < nparts && mine != NULL; k++) {
            for (int i = 0; i < parts[k]; i++) {
                if (cx_shard_mask(plan, i, parts[k], mine, NULL) != CX_OK) {
                    cx_err_print("coexist status", 0);
                    cx_err_clear();
                    break;
                }
                cx_idx own = 0, got = 0;
                for (cx_idx c = 0; c < plan->ncells; c++) {
                    own += mine[c];
                    got += mine[c] && ctx.done[c];
                }
                printf("shard %d/%d: %lld of %lld cells done%s\n", i, parts[k], (long long)got,
                       (long long)own, got == own ? " (done)" : "");
            }
        }
        free(mine);
    }
    cx_plan_destroy(&plan);
    cx_study_destroy(&study);
    free(ctx.done);
    free(ctx.times);
    return CX_EXIT_OK;
}
