/* coexist tests: one PASS/FAIL line per check, with its tolerance and the source of the
 * reference value (GSL's test habit), and the closing "N passed, N failed" line. */
#ifndef CX_TESTLIB_H
#define CX_TESTLIB_H

/* |got - want| <= tol (absolute). */
void cx_test_abs(const char *what, double got, double want, double tol, const char *source);
/* |got - want| <= tol * |want| (relative). */
void cx_test_rel(const char *what, double got, double want, double tol, const char *source);
/* A condition; `detail` is printed beside it. */
void cx_test_true(const char *what, int cond, const char *detail, const char *source);
/* Print the summary line; returns the process exit code (0 when all passed). */
int cx_test_finish(void);

#endif
