/* coexist command line: option helpers (see args.h). Hand-written rather than getopt_long
 * because the program is strict C11 and needs the same "--name=VALUE" rules on every platform. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/args.h"

int cx_arg_value(int argc, char **argv, int *i, const char *name, const char **value)
{
    const char *a = argv[*i];
    size_t len = strlen(name);
    if (strncmp(a, name, len) != 0)
        return 0;
    if (a[len] == '=') {
        *value = a + len + 1;
        return 1;
    }
    if (a[len] != '\0')
        return 0;
    if (*i + 1 >= argc) {
        fprintf(stderr, "coexist: option %s needs a value\n", name);
        return -1;
    }
    *i += 1;
    *value = argv[*i];
    return 1;
}

int cx_arg_long(const char *name, const char *text, long long *out)
{
    char *end = NULL;
    errno = 0;
    long long v = strtoll(text, &end, 10);
    if (errno != 0 || end == text || *end != '\0') {
        fprintf(stderr, "coexist: option %s: expected a whole number, got '%s'\n", name, text);
        return -1;
    }
    *out = v;
    return 0;
}

int cx_arg_double(const char *name, const char *text, double *out)
{
    char *end = NULL;
    errno = 0;
    double v = strtod(text, &end);
    if (errno != 0 || end == text || *end != '\0') {
        fprintf(stderr, "coexist: option %s: expected a number, got '%s'\n", name, text);
        return -1;
    }
    *out = v;
    return 0;
}
