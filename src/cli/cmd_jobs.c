/* coexist jobs: write a SLURM batch script for a sweep, with resources taken from the study's
 * cost and memory estimates. The script validates the sweep file first (so a bad file fails at
 * the start of the job with the validation message in its log), runs the sweep under
 * `srun --mpi=pmix` (Debian's Open MPI starts under SLURM through PMIx), and requeues itself
 * when the run stops at its time limit (exit status 3). With --array K it writes an array job
 * whose tasks each run one shard, and the command that submits the merge job after it. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/cell.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "cli/estimate.h"

static void help(void)
{
    printf(
        "usage: coexist jobs FILE [-o SCRIPT] [--cube CUBE.h5] [--nodes N] [--tasks-per-node K]\n"
        "                   [--time HH:MM:SS] [--partition P] [--array K] [--rate GFLOPS]\n\n"
        "Write a SLURM batch script that runs the sweep FILE. Its ranks, time and memory come\n"
        "from the study's cost estimate; the script checks the sweep file first, runs\n"
        "`srun --mpi=pmix coexist run`, and requeues itself when the run stops at the time\n"
        "limit (exit status 3) until every cell is done.\n\n"
        "  -o SCRIPT            where to write the script (default: print it)\n"
        "  --cube CUBE.h5       the cube to write (default: the study name + .h5)\n"
        "  --nodes N            nodes to ask for (default 1)\n"
        "  --tasks-per-node K   MPI ranks per node (default 2)\n"
        "  --time HH:MM:SS      time limit (default: 1.5 x the estimate, at least 10 minutes)\n"
        "  --partition P        partition (default: the cluster's default)\n"
        "  --array K            an array of K shards instead of one MPI job; the script's\n"
        "                       header says how to submit the merge job after it\n"
        "  --rate GFLOPS        sustained rate per core assumed by the estimate (default %.1f)\n\n"
        "It warns when the estimate does not fit the time asked for.\n",
        CX_ASSUMED_FLOP_RATE * 1e-9);
}

static int parse_time(const char *s, long *seconds)
{
    int h = 0, m = 0, sec = 0;
    char extra;
    int n = sscanf(s, "%d:%d:%d%c", &h, &m, &sec, &extra);
    if (n != 3 || h < 0 || m < 0 || m > 59 || sec < 0 || sec > 59)
        return -1;
    *seconds = (long)h * 3600 + m * 60 + sec;
    return 0;
}

static int parse_count(const char *name, const char *v, long *out)
{
    long long n;
    if (cx_arg_long(name, v, &n) != 0)
        return -1;
    if (n < 1 || n > 1000000) {
        fprintf(stderr, "coexist jobs: %s needs a whole number from 1 to 1000000\n", name);
        return -1;
    }
    *out = (long)n;
    return 0;
}

static void fmt_time(long s, char *buf, size_t n)
{
    snprintf(buf, n, "%02ld:%02ld:%02ld", s / 3600, (s / 60) % 60, s % 60);
}

typedef struct jobs_opts {
    const char *sweep, *script, *cube, *partition;
    long nodes, per_node, array, time_limit;
    double rate;
} jobs_opts;

static void write_header(FILE *f, const jobs_opts *o, const char *name, long limit, long mem_mb,
                         int array)
{
    char t[32];
    fmt_time(limit, t, sizeof t);
    fprintf(f, "#!/bin/bash\n");
    fprintf(f, "# Written by `coexist jobs %s`. Lines to change are marked EDIT.\n", o->sweep);
    fprintf(f, "#SBATCH --job-name=%s%s\n", name, array ? "-shards" : "");
    fprintf(f, "#SBATCH --nodes=%ld                 # EDIT: nodes\n", array ? 1 : o->nodes);
    fprintf(f, "#SBATCH --ntasks-per-node=%ld       # EDIT: MPI ranks per node\n", o->per_node);
    fprintf(f, "#SBATCH --cpus-per-task=1\n");
    fprintf(f, "#SBATCH --mem-per-cpu=%ldM         # the largest cell's memory plus headroom\n",
            mem_mb);
    fprintf(f, "#SBATCH --time=%s             # EDIT: time limit\n", t);
    if (o->partition != NULL)
        fprintf(f, "#SBATCH --partition=%s            # EDIT: partition\n", o->partition);
    if (array)
        fprintf(f, "#SBATCH --array=0-%ld              # one task per shard\n", o->array - 1);
    fprintf(f, "#SBATCH --signal=B:USR1@120          # ask for a checkpoint 2 minutes before "
               "the limit\n");
    fprintf(f, "#SBATCH --requeue\n");
    fprintf(f, "#SBATCH --open-mode=append\n");
    fprintf(f, "#SBATCH --output=%s-%%%s.log\n", name, array ? "A_%a" : "j");
}

static void write_body(FILE *f, const jobs_opts *o, const char *cube, int array)
{
    fprintf(f, "\nset -u\n");
    fprintf(f, "SWEEP=%s               # EDIT: the sweep file\n", o->sweep);
    fprintf(f, "CUBE=%s                # EDIT: the output cube\n", cube);
    fprintf(f, "COEXIST=${COEXIST:-coexist}  # EDIT: path to the coexist program\n");
    fprintf(f, "GRACE=60                # EDIT: seconds running cells may take after the signal\n");
    fprintf(f, "export OPENBLAS_NUM_THREADS=1\n\n");
    fprintf(f, "echo \"coexist job ${SLURM_JOB_ID:-?} restart ${SLURM_RESTART_COUNT:-0}%s\"\n",
            array ? " shard ${SLURM_ARRAY_TASK_ID:-?}/${SLURM_ARRAY_TASK_COUNT:-?}" : "");
    fprintf(f, "# Fail now, with the validation message in this log, if the sweep file is bad.\n");
    fprintf(f, "\"$COEXIST\" check \"$SWEEP\" || exit $?\n\n");
    fprintf(f, "# The batch shell receives USR1 before the limit and passes it on to the run,\n"
               "# which stops handing out work, checkpoints and exits with status 3.\n");
    if (array)
        fprintf(f,
                "# Each array task is one shard: `coexist run` takes it from SLURM_ARRAY_TASK_ID\n"
                "# and SLURM_ARRAY_TASK_COUNT and writes only journals; the merge job builds\n"
                "# the cube.\n");
    fprintf(f, "srun --mpi=pmix \"$COEXIST\" run \"$SWEEP\" -o \"$CUBE\" --grace \"$GRACE\" &\n");
    fprintf(f, "pid=$!\n");
    fprintf(f, "trap 'kill -USR1 $pid 2>/dev/null' USR1\n");
    fprintf(f, "trap 'kill -TERM $pid 2>/dev/null' TERM\n");
    fprintf(f, "wait $pid; status=$?\n");
    fprintf(f, "# wait returns early when a trapped signal arrives: wait for the run itself\n");
    fprintf(f, "while kill -0 $pid 2>/dev/null; do wait $pid; status=$?; done\n");
    fprintf(f, "if [ \"$status\" -eq 3 ]; then\n");
    fprintf(f, "    echo \"coexist: stopped before done; requeueing job $SLURM_JOB_ID\"\n");
    fprintf(f, "    scontrol requeue \"$SLURM_JOB_ID\"\n");
    fprintf(f, "    exit 0\n");
    fprintf(f, "fi\n");
    fprintf(f, "exit \"$status\"\n");
}

int cx_cmd_jobs(int argc, char **argv)
{
    jobs_opts o = {NULL, NULL, NULL, NULL, 1, 2, 0, -1, CX_ASSUMED_FLOP_RATE * 1e-9};
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        int k;
        if (cx_cli_is_help(argv[i])) {
            help();
            return CX_EXIT_OK;
        }
#define OPT(name) (k = cx_arg_value(argc, argv, &i, name, &v)) != 0
        if (OPT("-o")) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            o.script = v;
        } else if (OPT("--cube")) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            o.cube = v;
        } else if (OPT("--partition")) {
            if (k < 0)
                return CX_EXIT_BAD_INPUT;
            o.partition = v;
        } else if (OPT("--nodes")) {
            if (k < 0 || parse_count("--nodes", v, &o.nodes) != 0)
                return CX_EXIT_BAD_INPUT;
        } else if (OPT("--tasks-per-node")) {
            if (k < 0 || parse_count("--tasks-per-node", v, &o.per_node) != 0)
                return CX_EXIT_BAD_INPUT;
        } else if (OPT("--array")) {
            if (k < 0 || parse_count("--array", v, &o.array) != 0)
                return CX_EXIT_BAD_INPUT;
        } else if (OPT("--time")) {
            if (k < 0 || parse_time(v, &o.time_limit) != 0 || o.time_limit <= 0) {
                fprintf(stderr, "coexist jobs: --time: expected HH:MM:SS, got '%s'\n", v ? v : "");
                return CX_EXIT_BAD_INPUT;
            }
        } else if (OPT("--rate")) {
            if (k < 0 || cx_arg_double("--rate", v, &o.rate) != 0 || !(o.rate > 0)) {
                fprintf(stderr, "coexist jobs: --rate needs a number > 0 (GFLOP/s per core)\n");
                return CX_EXIT_BAD_INPUT;
            }
        } else if (argv[i][0] == '-' || o.sweep != NULL) {
            fprintf(stderr, "coexist jobs: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        } else {
            o.sweep = argv[i];
        }
#undef OPT
    }
    if (o.sweep == NULL) {
        fprintf(stderr, "coexist jobs: missing sweep file (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    cx_study *s = NULL;
    int rc = cx_study_load(o.sweep, &s);
    if (rc != CX_OK)
        return cx_cli_fail("coexist jobs", rc);
    cx_estimate e;
    rc = cx_estimate_study(s, &e);
    if (rc != CX_OK) {
        cx_study_destroy(&s);
        return cx_cli_fail("coexist jobs", rc);
    }
    char cube[CX_PATH_LEN];
    snprintf(cube, sizeof cube, "%s.h5", cx_study_name(s));
    if (o.cube != NULL)
        snprintf(cube, sizeof cube, "%s", o.cube);
    /* Ranks that compute: with one rank per core the coordinator also computes when there are
     * few ranks; count every rank, which errs on the short side by at most one rank's share. */
    long ranks = (o.array > 0 ? o.array * o.per_node : o.nodes * o.per_node);
    double core_seconds = e.flops / (o.rate * 1e9);
    double wall = core_seconds / (double)ranks;
    long limit = o.time_limit;
    if (limit < 0) {
        limit = (long)ceil(1.5 * wall / 600.0) * 600;
        if (limit < 600)
            limit = 600;
    }
    long mem_mb = (long)ceil(e.memory_max / 1048576.0 * 1.25) + 256;
    char est[32], lim[32];
    fmt_time((long)ceil(wall), est, sizeof est);
    fmt_time(limit, lim, sizeof lim);
    fprintf(stderr,
            "coexist jobs: %lld cells, about %.3g core-hours at %.2g GFLOP/s per core; %ld ranks "
            "need about %s (time limit %s), %ld MiB per rank\n",
            (long long)cx_study_cells(s), core_seconds / 3600.0, o.rate, ranks, est, lim, mem_mb);
    if (wall > (double)limit)
        fprintf(
            stderr,
            "coexist jobs: warning: the estimate (%s) does not fit the time limit (%s); the job "
            "will checkpoint and requeue itself about %.0f times\n",
            est, lim, ceil(wall / (double)limit) - 1.0);
    FILE *f = stdout;
    if (o.script != NULL) {
        f = fopen(o.script, "wx"); /* never replace an existing script */
        if (f == NULL) {
            fprintf(stderr,
                    "coexist jobs: cannot create %s (it exists, or the directory is not "
                    "writable)\n",
                    o.script);
            cx_study_destroy(&s);
            return CX_EXIT_BAD_INPUT;
        }
    }
    write_header(f, &o, cx_study_name(s), limit, mem_mb, o.array > 0);
    if (o.array > 0) {
        fprintf(f, "#\n# Submit the shards, then the merge job that builds the cube after them:\n");
        fprintf(f, "#   jid=$(sbatch --parsable %s)\n", o.script ? o.script : "THIS_SCRIPT");
        fprintf(f, "#   sbatch --dependency=afterany:$jid --wrap \"coexist merge %s -o %s\"\n",
                o.sweep, cube);
    }
    write_body(f, &o, cube, o.array > 0);
    if (f != stdout && fclose(f) != 0) {
        fprintf(stderr, "coexist jobs: error writing %s\n", o.script);
        cx_study_destroy(&s);
        return CX_EXIT_FAILURE;
    }
    if (o.script != NULL)
        fprintf(stderr, "coexist jobs: wrote %s\n", o.script);
    if (o.array > 0)
        fprintf(stderr,
                "coexist jobs: submit the shards, then the merge job after them:\n"
                "  jid=$(sbatch --parsable %s)\n"
                "  sbatch --dependency=afterany:$jid --wrap \"coexist merge %s -o %s\"\n",
                o.script ? o.script : "SCRIPT", o.sweep, cube);
    cx_study_destroy(&s);
    return CX_EXIT_OK;
}
