/* Tests of the report module's numerical core: the Wilson score interval and the outcome class
 * of a cell. With the argument --wilson-table the program instead prints "k n lo hi" lines for
 * tests/report_check.py, which compares them with scipy's implementation. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/report.h"
#include "testlib.h"

static void wilson_table(void)
{
    static const long long ns[] = {1, 2, 3, 5, 10, 13, 27, 50, 263, 1000, 12345};
    for (size_t i = 0; i < sizeof ns / sizeof ns[0]; i++) {
        long long n = ns[i];
        long long ks[] = {0, 1, n / 3, n / 2, n - 1, n};
        for (size_t j = 0; j < sizeof ks / sizeof ks[0]; j++) {
            if (ks[j] < 0 || ks[j] > n)
                continue;
            double lo, hi;
            cx_wilson(ks[j], n, CX_Z95, &lo, &hi);
            printf("%lld %lld %.17g %.17g\n", ks[j], n, lo, hi);
        }
    }
}

/* A cube of one axis with `n` cells, built in memory (only the fields the classifier reads). */
static cx_rcube *tiny_cube(int n, int max_runs)
{
    cx_rcube *c = calloc(1, sizeof *c);
    c->ncells = n;
    c->max_runs = max_runs;
    c->max_tasks = 2;
    c->naxes = 1;
    c->axes[0].len = n;
    c->done = calloc((size_t)n, 1);
    c->status = calloc((size_t)n, 1);
    c->multifunctional = calloc((size_t)n, 1);
    c->outcome = calloc((size_t)(n * max_runs), 1);
    c->ntasks = calloc((size_t)n, sizeof(int));
    return c;
}

static void free_cube(cx_rcube *c)
{
    free(c->done);
    free(c->status);
    free(c->multifunctional);
    free(c->outcome);
    free(c->ntasks);
    free(c);
}

static void set_cell(cx_rcube *c, int cell, int done, int status, int multi, const int *runs)
{
    c->done[cell] = (uint8_t)done;
    c->status[cell] = (signed char)status;
    c->multifunctional[cell] = (signed char)multi;
    c->ntasks[cell] = 2;
    for (int j = 0; j < c->max_runs; j++)
        c->outcome[cell * c->max_runs + j] = (signed char)runs[j];
}

int main(int argc, char **argv)
{
    if (argc > 1 && strcmp(argv[1], "--wilson-table") == 0) {
        wilson_table();
        return 0;
    }
    double lo, hi;
    const char *wilson = "Wilson EB 1927, J. Am. Stat. Assoc. 22, 209, the interval's closed form";
    cx_test_rel("z of a 95 % two-sided normal interval", CX_Z95, 1.959963984540054, 1e-15,
                "0.975 quantile of N(0,1); Abramowitz & Stegun 1964 Table 26.5 gives 1.959964 "
                "(value quoted from memory)");
    cx_wilson(0, 10, CX_Z95, &lo, &hi);
    cx_test_abs("k = 0: lower bound is exactly 0", lo, 0.0, 0.0, wilson);
    cx_test_rel("k = 0: upper bound z^2 / (n + z^2)", hi, CX_Z95 * CX_Z95 / (10 + CX_Z95 * CX_Z95),
                1e-14, wilson);
    cx_wilson(17, 17, CX_Z95, &lo, &hi);
    cx_test_abs("k = n: upper bound is exactly 1", hi, 1.0, 0.0, wilson);
    cx_test_rel("k = n: lower bound n / (n + z^2)", lo, 17 / (17 + CX_Z95 * CX_Z95), 1e-14, wilson);
    cx_wilson(0, 0, CX_Z95, &lo, &hi);
    cx_test_true("n = 0 gives [0, 1]", lo == 0.0 && hi == 1.0, "no trials, no information",
                 "definition in include/coexist/report.h");
    int sym_ok = 1;
    for (int n = 1; n <= 40; n++)
        for (int k = 0; k <= n; k++) {
            double l1, h1, l2, h2;
            cx_wilson(k, n, CX_Z95, &l1, &h1);
            cx_wilson(n - k, n, CX_Z95, &l2, &h2);
            if (fabs(l1 - (1 - h2)) > 1e-14 || !(l1 <= (double)k / n && (double)k / n <= h1))
                sym_ok = 0;
        }
    cx_test_true("lo(k, n) = 1 - hi(n - k, n) and lo <= k/n <= hi for n <= 40", sym_ok,
                 "1e-14 absolute", wilson);
    cx_wilson(81, 263, CX_Z95, &lo, &hi);
    cx_test_abs("81 of 263: lower bound", lo, 0.2553, 6e-5,
                "Newcombe RG 1998, Statistics in Medicine 17, 857, Table I, method 3 (four "
                "decimals, quoted from memory)");
    cx_test_abs("81 of 263: upper bound", hi, 0.3662, 6e-5,
                "Newcombe RG 1998, Statistics in Medicine 17, 857, Table I, method 3 (four "
                "decimals, quoted from memory)");

    /* Cell classes: the contract stated in include/coexist/report.h. */
    const char *contract = "the class definition in include/coexist/report.h";
    cx_rcube *c = tiny_cube(6, 4);
    int r0[4] = {CX_OUT_RECONSTRUCTED, CX_OUT_RECONSTRUCTED, CX_OUT_UNTRAINED_CYCLE,
                 CX_OUT_FIXED_POINT};
    int r1[4] = {CX_OUT_RECONSTRUCTED, CX_OUT_FIXED_POINT, CX_OUT_DIVERGED, CX_OUT_DIVERGED};
    int r2[4] = {CX_OUT_UNTRAINED_CYCLE, CX_OUT_OTHER_TRAINED, CX_OUT_FIXED_POINT,
                 CX_OUT_FIXED_POINT};
    int r3[4] = {CX_OUT_DIVERGED, CX_OUT_DIVERGED, CX_OUT_RECONSTRUCTED, CX_OUT_RECONSTRUCTED};
    set_cell(c, 0, 1, CX_CELL_COMPUTED, 1, r0);
    set_cell(c, 1, 1, CX_CELL_COMPUTED, 0, r1);
    set_cell(c, 2, 1, CX_CELL_COMPUTED, 0, r2);
    set_cell(c, 3, 1, CX_CELL_COMPUTED, 0, r3);
    set_cell(c, 4, 1, CX_CELL_FAILED_NOT_PD, 0, r3);
    set_cell(c, 5, 0, CX_CELL_NOT_DONE, -1, r3);
    cx_test_true("every task reconstructed: multifunctional",
                 cx_rcube_cell_class(c, 0) == CX_CLASS_MULTI, "", contract);
    cx_test_true("random starts do not decide the class (fixed point among task runs)",
                 cx_rcube_cell_class(c, 1) == CX_CLASS_FIXED, "", contract);
    cx_test_true("a tie between task-run failures goes to the more severe one",
                 cx_rcube_cell_class(c, 2) == CX_CLASS_CYCLE, "other-trained vs cycle", contract);
    cx_test_true("both task runs diverged: diverged",
                 cx_rcube_cell_class(c, 3) == CX_CLASS_DIVERGED, "", contract);
    cx_test_true("not positive definite: failed", cx_rcube_cell_class(c, 4) == CX_CLASS_FAILED, "",
                 contract);
    cx_test_true("not done: no data", cx_rcube_cell_class(c, 5) == CX_CLASS_NONE, "", contract);
    cx_group g;
    memset(&g, 0, sizeof g);
    g.done = 7;
    g.by_class[CX_CLASS_MULTI] = 3;
    g.by_class[CX_CLASS_FIXED] = 3;
    g.by_class[CX_CLASS_FAILED] = 1;
    cx_test_true("two classes with the most cells: tied", cx_group_majority(&g) == CX_CLASS_TIED,
                 "3 vs 3", contract);
    g.by_class[CX_CLASS_FIXED] = 2;
    cx_test_true("a plain majority wins", cx_group_majority(&g) == CX_CLASS_MULTI, "3 vs 2",
                 contract);
    free_cube(c);
    uint32_t want[8] = {0xE69F00, 0x56B4E9, 0x009E73, 0xF0E442,
                        0x0072B2, 0xD55E00, 0xCC79A7, 0x000000};
    int in_palette = 1;
    for (int k = 0; k < CX_CLASS_NONE; k++) {
        int hit = 0;
        for (int q = 0; q < 8; q++)
            hit |= cx_class_colour(k) == want[q];
        in_palette &= hit;
    }
    int distinct = 1;
    for (int a = 0; a < CX_CLASS_COUNT; a++)
        for (int b = a + 1; b < CX_CLASS_COUNT; b++)
            distinct &= cx_class_colour(a) != cx_class_colour(b);
    cx_test_true("class colours are the eight Okabe-Ito colours, all different",
                 in_palette && distinct, "no-data is white",
                 "Okabe M, Ito K 2008, Color Universal Design (J*FLY); hex values from memory");
    return cx_test_finish();
}
