/* coexist run: compute a sweep into a cube, under mpirun / srun or as one process, resuming
 * from the cube and its journals unless told to start over. All the work is in the engine
 * (include/coexist/engine.h); this file parses options, starts and ends MPI, sets the BLAS
 * thread count, and prints the closing summary on rank 0.
 */
#define _POSIX_C_SOURCE 200809L
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <mpi.h>
#include <cblas.h>

#include "coexist/engine.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "cli/estimate.h"

static void help(void)
{
    printf("usage: coexist run FILE -o CUBE.h5 [--fresh] [--checkpoint SECONDS]\n"
           "                  [--progress SECONDS] [--blas-threads K]\n"
           "                  [--coordinator-computes auto|yes|no] [--keep-journals]\n"
           "                  [--shard I/N] [--grace SECONDS]\n\n"
           "Compute every cell of the sweep file FILE into the cube CUBE.h5. Start it under\n"
           "mpirun or srun for several ranks, or alone for one. Rank 0 hands out work units\n"
           "(one drive with all its blend and ridge cells); every rank keeps a journal in\n"
           "CUBE.h5.journal/ and writes its cells into the cube at checkpoints.\n\n"
           "Rerunning the same command continues where the last run stopped: journals are\n"
           "merged and only missing cells are computed. A cube of a different sweep file is\n"
           "refused, and a file that is not a cube is never touched.\n\n"
           "  -o, --output CUBE        the cube to write or continue (required)\n"
           "  --fresh                  delete an existing cube of ours and its journals first\n"
           "  --checkpoint SECONDS     journal sync and cube write interval per rank (10)\n"
           "  --progress SECONDS       progress line interval when stderr is not a terminal (10)\n"
           "  --blas-threads K         BLAS threads per rank (1)\n"
           "  --coordinator-computes   whether rank 0 computes besides coordinating; auto: when\n"
           "                           the ranks on its node do not outnumber the cores\n"
           "  --keep-journals          keep the journals after a complete run\n"
           "  --shard I/N              compute only shard I of N (0 <= I < N): a fixed,\n"
           "                           cost-balanced share of the cells; writes journals only,\n"
           "                           never the cube (`coexist merge` builds it). Inside a\n"
           "                           SLURM job array of more than one task the shard comes\n"
           "                           from SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT\n"
           "  --grace SECONDS          after SIGUSR1, SIGTERM or SIGINT no more work is handed\n"
           "                           out; cells being computed may take this long to finish,\n"
           "                           then they are left not done (60)\n\n"
           "exit status: 0 done, 1 failure, 2 bad input, 3 stopped early (rerun to continue)\n");
}

/* Inside a SLURM job array of more than one task, the task is a shard: task ids run from
 * SLURM_ARRAY_TASK_MIN in steps of SLURM_ARRAY_TASK_STEP (sbatch(1), "OUTPUT ENVIRONMENT
 * VARIABLES"). Returns -1 (after a message) when the variables do not make sense. */
static int array_shard(cx_engine_opts *o)
{
    const char *cnt = getenv("SLURM_ARRAY_TASK_COUNT"), *id = getenv("SLURM_ARRAY_TASK_ID");
    const char *lo = getenv("SLURM_ARRAY_TASK_MIN"), *step = getenv("SLURM_ARRAY_TASK_STEP");
    if (cnt == NULL || atol(cnt) <= 1)
        return 0;
    long n = atol(cnt), i = id ? atol(id) : -1, m = lo ? atol(lo) : 0,
         st = step && atol(step) > 0 ? atol(step) : 1;
    long k = (i - m) / st;
    if (id == NULL || (i - m) % st != 0 || k < 0 || k >= n || n > 100000) {
        fprintf(stderr,
                "coexist run: SLURM_ARRAY_TASK_ID=%s (min %s, step %s) does not give a shard of "
                "SLURM_ARRAY_TASK_COUNT=%s; pass --shard I/N\n",
                id ? id : "(unset)", lo ? lo : "(unset)", step ? step : "(unset)", cnt);
        return -1;
    }
    o->shard_index = (int)k;
    o->shard_count = (int)n;
    fprintf(stderr, "coexist run: SLURM array task %ld of %ld -> shard %ld/%ld\n", i, n, k, n);
    return 0;
}

static void on_signal(int sig)
{
    (void)sig;
    cx_engine_request_stop();
}

static void print_summary(const cx_engine_stats *st, const cx_plan *plan, double flop_rate,
                          int shard)
{
    fprintf(stderr, "coexist run: %lld cells computed in %.3f s (%lld batches)",
            (long long)st->computed, st->wall, (long long)st->batches);
    if (st->computed > 0 && st->wall > 0)
        fprintf(stderr, ", %.4g cells/s", (double)st->computed / st->wall);
    if (shard)
        fprintf(stderr, "\n  shard: %lld of its %lld cells left to do were computed%s\n",
                (long long)st->computed, (long long)st->scheduled,
                st->complete ? " (shard done)" : "");
    else
        fprintf(stderr, "\n  cube:");
    for (int k = CX_CELL_COMPUTED, first = 1; k <= CX_CELL_SKIPPED && !shard; k++)
        if (st->by_status[k] > 0 || k == CX_CELL_COMPUTED) {
            fprintf(stderr, "%s %lld %s", first ? "" : ",", (long long)st->by_status[k],
                    cx_cell_status_name(k));
            first = 0;
        }
    if (!shard)
        fprintf(stderr, " of %lld cells%s\n", (long long)plan->ncells,
                st->complete ? " (complete)" : "");
    fprintf(stderr,
            "  stages run: %lld networks, %lld spectral radii, %lld inputs, %lld drives, %lld "
            "solves, %lld probes\n",
            (long long)st->counts.networks, (long long)st->counts.spectral_radii,
            (long long)st->counts.inputs, (long long)st->counts.drives,
            (long long)st->counts.solves, (long long)st->counts.probes);
    fprintf(stderr,
            "  rank 0 coordinator CPU %.3f s (%.2f %% of wall); journal and cube writes %.3f s "
            "for %.3f s of cell computing (%.2f %%)\n",
            st->rank0_cpu, st->wall > 0 ? 100.0 * st->rank0_cpu / st->wall : 0.0, st->write_seconds,
            st->compute_seconds,
            st->compute_seconds > 0 ? 100.0 * st->write_seconds / st->compute_seconds : 0.0);
    if (st->wall > 0 && st->compute_ranks > 0 && st->computed > 0) {
        double busy = st->compute_seconds / ((double)st->compute_ranks * st->wall);
        fprintf(stderr, "  computing ranks (%d) busy %.1f %% of the run\n", st->compute_ranks,
                100.0 * busy);
        if (st->computed == st->scheduled)
            fprintf(stderr,
                    "  measured: %.3g estimated flop in %.3g core-seconds = %.3g flop/s per core "
                    "(the start estimate assumed %.3g)\n",
                    st->estimated_flops, st->compute_seconds,
                    st->estimated_flops / st->compute_seconds, flop_rate);
    }
}

int cx_cmd_run(int argc, char **argv)
{
    const char *file = NULL, *out = NULL, *v = NULL;
    int shard_given = 0;
    cx_engine_opts o;
    cx_engine_opts_default(&o);
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
        if (strcmp(argv[i], "--fresh") == 0) {
            o.fresh = 1;
            continue;
        }
        if (strcmp(argv[i], "--keep-journals") == 0) {
            o.keep_journals = 1;
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--checkpoint", &v)) != 0) {
            if (k < 0 || cx_arg_double("--checkpoint", v, &o.checkpoint_seconds) < 0 ||
                !(o.checkpoint_seconds >= 0)) {
                fprintf(stderr, "coexist run: --checkpoint needs seconds >= 0\n");
                return CX_EXIT_BAD_INPUT;
            }
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--progress", &v)) != 0) {
            if (k < 0 || cx_arg_double("--progress", v, &o.progress_seconds) < 0 ||
                !(o.progress_seconds > 0)) {
                fprintf(stderr, "coexist run: --progress needs seconds > 0\n");
                return CX_EXIT_BAD_INPUT;
            }
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--blas-threads", &v)) != 0) {
            long long n = 0;
            if (k < 0 || cx_arg_long("--blas-threads", v, &n) < 0 || n < 1 || n > 1024) {
                fprintf(stderr, "coexist run: --blas-threads needs a whole number 1..1024\n");
                return CX_EXIT_BAD_INPUT;
            }
            o.blas_threads = (int)n;
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--coordinator-computes", &v)) != 0) {
            if (k > 0 && strcmp(v, "auto") == 0)
                o.coordinator_computes = -1;
            else if (k > 0 && strcmp(v, "yes") == 0)
                o.coordinator_computes = 1;
            else if (k > 0 && strcmp(v, "no") == 0)
                o.coordinator_computes = 0;
            else {
                fprintf(stderr, "coexist run: --coordinator-computes takes auto, yes or no\n");
                return CX_EXIT_BAD_INPUT;
            }
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--shard", &v)) != 0) {
            int si = -1, sn = 0, used = 0;
            if (k < 0 || sscanf(v, "%d/%d%n", &si, &sn, &used) != 2 || v[used] != '\0' || sn < 1 ||
                sn > 100000 || si < 0 || si >= sn) {
                fprintf(stderr, "coexist run: --shard needs I/N with 0 <= I < N, got '%s'\n",
                        k > 0 ? v : "");
                return CX_EXIT_BAD_INPUT;
            }
            o.shard_index = si;
            o.shard_count = sn;
            shard_given = 1;
            continue;
        }
        if ((k = cx_arg_value(argc, argv, &i, "--grace", &v)) != 0) {
            if (k < 0 || cx_arg_double("--grace", v, &o.grace_seconds) < 0 ||
                !(o.grace_seconds >= 0)) {
                fprintf(stderr, "coexist run: --grace needs seconds >= 0\n");
                return CX_EXIT_BAD_INPUT;
            }
            continue;
        }
        if (argv[i][0] == '-' || file != NULL) {
            fprintf(stderr, "coexist run: unexpected argument '%s' (see --help)\n", argv[i]);
            return CX_EXIT_BAD_INPUT;
        }
        file = argv[i];
    }
    if (file == NULL || out == NULL) {
        fprintf(stderr, "coexist run: need a sweep file and -o CUBE.h5 (see --help)\n");
        return CX_EXIT_BAD_INPUT;
    }
    o.cube = out;
    if (!shard_given && array_shard(&o) != 0)
        return CX_EXIT_BAD_INPUT;
    if (o.shard_count > 0 && o.fresh) {
        fprintf(stderr, "coexist run: a shard cannot start over (--fresh): remove the cube's "
                        "journal directory by hand if that is meant\n");
        return CX_EXIT_BAD_INPUT;
    }

    int provided = 0, rank = 0, code = CX_EXIT_OK, rc = CX_OK;
    if (MPI_Init_thread(&argc, &argv, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS) {
        fprintf(stderr, "coexist run: MPI_Init_thread failed\n");
        return CX_EXIT_FAILURE;
    }
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_set_errhandler(MPI_COMM_WORLD, MPI_ERRORS_RETURN);
    /* One BLAS thread per rank unless asked: ranks already fill the cores. */
    openblas_set_num_threads(o.blas_threads);

    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGTERM, &sa, NULL);
    sigaction(SIGUSR1, &sa, NULL);
    sigaction(SIGINT, &sa, NULL);

    cx_study *s = NULL;
    cx_plan *plan = NULL;
    cx_engine_stats st;
    memset(&st, 0, sizeof st);
    if (provided < MPI_THREAD_FUNNELED)
        rc = CX_FAIL(CX_ERR_MPI, "the MPI library does not provide MPI_THREAD_FUNNELED");
    if (rc == CX_OK)
        rc = cx_study_load(file, &s);
    if (rc == CX_OK)
        rc = cx_estimate_memory_check(file, s);
    if (rc == CX_OK)
        rc = cx_plan_from_study(s, &plan);
    if (rc == CX_OK && rank == 0)
        rc = cx_plan_keys(plan, s);
    {
        int bad = rc != CX_OK, any = 0;
        MPI_Allreduce(&bad, &any, 1, MPI_INT, MPI_LOR, MPI_COMM_WORLD);
        if (any && rc == CX_OK)
            rc = CX_FAIL(CX_ERR_INVALID, "another rank could not load %s", file);
    }
    if (rc == CX_OK) {
        /* Every rank must have read the same sweep file (a shared file system). */
        unsigned long long h = plan->hash, lo = 0, hi = 0;
        MPI_Allreduce(&h, &lo, 1, MPI_UNSIGNED_LONG_LONG, MPI_MIN, MPI_COMM_WORLD);
        MPI_Allreduce(&h, &hi, 1, MPI_UNSIGNED_LONG_LONG, MPI_MAX, MPI_COMM_WORLD);
        if (lo != hi)
            rc = CX_FAIL(CX_ERR_INVALID, "ranks read different versions of %s", file);
    }
    if (rc == CX_OK)
        rc = cx_engine_run(MPI_COMM_WORLD, plan, s, cx_engine_cell_ops(), &o, &st);
    if (rc != CX_OK) {
        if (rank == 0)
            code = cx_cli_fail("coexist run", rc);
        else {
            cx_err_clear();
            code = (rc == CX_ERR_INVALID || rc == CX_ERR_MISMATCH) ? CX_EXIT_BAD_INPUT
                                                                   : CX_EXIT_FAILURE;
        }
    } else {
        if (rank == 0 && !o.quiet)
            print_summary(&st, plan, o.flop_rate, o.shard_count > 0);
        if (!st.complete) {
            if (rank == 0)
                fprintf(stderr, "coexist run: stopped before every cell was done; rerun the "
                                "same command to continue\n");
            code = CX_EXIT_INCOMPLETE;
        } else if (rank == 0 && o.shard_count > 0) {
            fprintf(stderr,
                    "coexist run: shard %d/%d done; when every shard is done, `coexist merge "
                    "%s -o %s` builds the cube\n",
                    o.shard_index, o.shard_count, file, out);
        }
    }
    cx_plan_destroy(&plan);
    cx_study_destroy(&s);
    MPI_Finalize();
    return code;
}
