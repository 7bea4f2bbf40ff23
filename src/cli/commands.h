/* coexist command line: one function per subcommand, each taking the arguments after the
 * subcommand name (argv[0] is the subcommand). They return the process exit code:
 *   0 success, 1 failure of the machine (I/O, memory, MPI), 2 bad input (sweep file, command
 *   line, a file that is not ours, a cube of a different study), 3 stopped before the work was
 *   done (time limit or signal; rerun to continue). */
#ifndef CX_CLI_COMMANDS_H
#define CX_CLI_COMMANDS_H

enum { CX_EXIT_OK = 0, CX_EXIT_FAILURE = 1, CX_EXIT_BAD_INPUT = 2, CX_EXIT_INCOMPLETE = 3 };

int cx_cmd_check(int argc, char **argv);
int cx_cmd_cell(int argc, char **argv);
int cx_cmd_run(int argc, char **argv);
int cx_cmd_status(int argc, char **argv);
int cx_cmd_report(int argc, char **argv);
int cx_cmd_replay(int argc, char **argv);
int cx_cmd_jobs(int argc, char **argv);
int cx_cmd_merge(int argc, char **argv);

/* Map a status code from the library to an exit code, after printing the error trace. */
int cx_cli_fail(const char *prog, int rc);

/* True when `arg` is -h or --help. */
int cx_cli_is_help(const char *arg);

#endif
