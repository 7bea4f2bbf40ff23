/* coexist command line: small helpers for "--name VALUE" / "--name=VALUE" options. */
#ifndef CX_CLI_ARGS_H
#define CX_CLI_ARGS_H

/* If argv[*i] is option `name` ("--name VALUE" or "--name=VALUE"): store VALUE, advance *i past
 * it and return 1; if the value is missing print an error and return -1; otherwise return 0. */
int cx_arg_value(int argc, char **argv, int *i, const char *name, const char **value);

/* Parse a whole number / a real number option value; print an error naming the option and
 * return -1 when it is not one. */
int cx_arg_long(const char *name, const char *text, long long *out);
int cx_arg_double(const char *name, const char *text, double *out);

#endif
