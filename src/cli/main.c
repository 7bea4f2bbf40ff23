/* coexist: command-line entry point. Dispatches to one function per subcommand (commands.h);
 * only this layer prints errors and chooses the exit code. */
#include <stdio.h>
#include <string.h>

#include "coexist/config.h"
#include "coexist/error.h"
#include "cli/commands.h"

#ifndef CX_GIT_REVISION
#define CX_GIT_REVISION "unknown"
#endif

typedef struct cx_command {
    const char *name;
    int (*fn)(int argc, char **argv);
    const char *summary;
} cx_command;

static const cx_command commands[] = {
    {"check", cx_cmd_check, "validate a sweep file; print grid size, cost and memory estimates"},
    {"cell", cx_cmd_cell, "compute one grid cell and print its runs, outcomes and metrics"},
    {"run", cx_cmd_run, "compute a sweep into a cube (under mpirun/srun or alone); resumes"},
    {"status", cx_cmd_status, "progress of a cube: cells done, failures, time left, journals"},
    {"report", cx_cmd_report, "ensemble tables, capacity, region maps and CSV from a cube"},
    {"replay", cx_cmd_replay, "recompute one cell of a cube and check it bit for bit"},
    {"merge", cx_cmd_merge, "assemble shard and run journals into a sweep's cube"},
    {"jobs", cx_cmd_jobs, "write a SLURM batch script for a sweep, sized from its cost estimate"},
};

static void usage(FILE *out)
{
    fprintf(out, "coexist %s: sweeps of multifunctional reservoir computers\n\n", CX_VERSION);
    fprintf(out, "usage: coexist COMMAND [ARGS...]   (coexist COMMAND --help for details)\n\n");
    fprintf(out, "commands:\n");
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        fprintf(out, "  %-8s %s\n", commands[i].name, commands[i].summary);
    fprintf(out, "\nexit status: 0 success, 1 failure (I/O, memory, MPI), 2 bad input, "
                 "3 stopped before done (rerun to continue)\n");
}

int cx_cli_is_help(const char *arg)
{
    return strcmp(arg, "-h") == 0 || strcmp(arg, "--help") == 0;
}

int cx_cli_fail(const char *prog, int rc)
{
    cx_err_print(prog, 0);
    if (rc == CX_ERR_INVALID || rc == CX_ERR_MISMATCH)
        return CX_EXIT_BAD_INPUT;
    if (rc == CX_ERR_INTERRUPTED)
        return CX_EXIT_INCOMPLETE;
    return CX_EXIT_FAILURE;
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return CX_EXIT_BAD_INPUT;
    }
    if (cx_cli_is_help(argv[1])) {
        usage(stdout);
        return CX_EXIT_OK;
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("coexist %s (revision %s)\n", CX_VERSION, CX_GIT_REVISION);
        return CX_EXIT_OK;
    }
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        if (strcmp(argv[1], commands[i].name) == 0)
            return commands[i].fn(argc - 1, argv + 1);
    fprintf(stderr, "coexist: unknown command '%s'\n\n", argv[1]);
    usage(stderr);
    return CX_EXIT_BAD_INPUT;
}
