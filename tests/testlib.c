/* coexist tests: see testlib.h. */
#include <math.h>
#include <stdio.h>

#include "testlib.h"

static int passed;
static int failed;

static void report(int ok, const char *what, const char *detail, const char *source)
{
    if (ok)
        passed++;
    else
        failed++;
    int has_source = source != NULL && source[0] != '\0';
    printf("%s: %s (%s)%s%s%s\n", ok ? "PASS" : "FAIL", what, detail,
           has_source ? " [source: " : "", has_source ? source : "", has_source ? "]" : "");
    fflush(stdout);
}

void cx_test_abs(const char *what, double got, double want, double tol, const char *source)
{
    char d[256];
    int ok = isfinite(got) && fabs(got - want) <= tol;
    snprintf(d, sizeof d, "got %.10g, want %.10g, abs tol %.3g", got, want, tol);
    report(ok, what, d, source);
}

void cx_test_rel(const char *what, double got, double want, double tol, const char *source)
{
    char d[256];
    int ok = isfinite(got) && fabs(got - want) <= tol * fabs(want);
    snprintf(d, sizeof d, "got %.10g, want %.10g, rel tol %.3g", got, want, tol);
    report(ok, what, d, source);
}

void cx_test_true(const char *what, int cond, const char *detail, const char *source)
{
    report(cond != 0, what, detail ? detail : "", source);
}

int cx_test_finish(void)
{
    printf("%d passed, %d failed\n", passed, failed);
    return failed == 0 ? 0 : 1;
}
