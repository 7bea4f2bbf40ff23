/* Tests of the shard assignment (src/engine/shards.c): the longest-processing-time-first rule
 * of Graham 1969, "Bounds on multiprocessing timing anomalies", SIAM J. Appl. Math. 17(2),
 * 416-429, on a case worked by hand, the partition property (every cell in exactly one shard),
 * purity, and Graham's list-scheduling bound makespan <= total / n + (1 - 1/n) max piece
 * (Graham 1966, "Bounds for certain multiprocessing anomalies", Bell Syst. Tech. J. 45(9),
 * 1563-1581; the bound is recalled from memory), which every list schedule, LPT included, meets.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/engine.h"
#include "coexist/error.h"
#include "testlib.h"

static cx_plan *make_plan(cx_idx n)
{
    cx_plan *p = NULL;
    double *v = malloc((size_t)n * sizeof *v);
    for (cx_idx i = 0; i < n; i++)
        v[i] = (double)i;
    if (cx_plan_create("shard-test", 1, 1, "shard test", &p) != CX_OK ||
        cx_plan_add_axis(p, "cell", "1", n, v) != CX_OK || cx_plan_alloc_keys(p) != CX_OK) {
        cx_err_print("test_shards", 0);
        exit(1);
    }
    free(v);
    return p;
}

static void hand_case(void)
{
    const char *src = "Graham 1969 LPT rule, worked by hand: costs 7,5,4,3,3,2 on 2 shards give "
                      "loads 12 and 12";
    cx_plan *p = make_plan(6);
    const double own[6] = {3, 7, 2, 5, 3, 4};
    for (int c = 0; c < 6; c++) {
        p->network_key[c] = 100u + (uint64_t)c; /* 6 groups < 4 n: dealt by drive */
        p->drive_key[c] = 200u + (uint64_t)c;
        p->cost_own[c] = own[c];
    }
    uint8_t m0[6], m1[6];
    double l0 = 0, l1 = 0;
    cx_shard_mask(p, 0, 2, m0, &l0);
    cx_shard_mask(p, 1, 2, m1, &l1);
    const uint8_t want0[6] = {1, 1, 1, 0, 0, 0};
    cx_test_true("shard 0 of 2 = cells {0, 1, 2}", memcmp(m0, want0, 6) == 0, "", src);
    int comp = 1;
    for (int c = 0; c < 6; c++)
        comp = comp && m1[c] == !want0[c];
    cx_test_true("shard 1 of 2 = cells {3, 4, 5}", comp, "", src);
    cx_test_abs("shard 0 load", l0, 12.0, 0.0, src);
    cx_test_abs("shard 1 load", l1, 12.0, 0.0, src);
    int bad = cx_shard_mask(p, 2, 2, m0, NULL);
    cx_err_clear();
    cx_test_true("shard 2 of 2 is refused", bad == CX_ERR_INVALID, "", "0 <= i < n");
    cx_plan_destroy(&p);
}

static void partition_case(void)
{
    const cx_idx n = 211;
    cx_plan *p = make_plan(n);
    double total = 0, pmax = 0;
    for (cx_idx c = 0; c < n; c++) {
        p->network_key[c] = 7919u * (uint64_t)c + 13u; /* every cell its own network */
        p->drive_key[c] = (uint64_t)c;
        p->cost_shared[c] = 0.5 + fmod(2.385 * (double)c, 3.7);
        p->cost_own[c] = 0.1 + fmod(1.618 * (double)(c * c), 9.3);
        double t = p->cost_shared[c] + p->cost_own[c];
        total += t;
        pmax = t > pmax ? t : pmax;
    }
    const int parts[4] = {2, 3, 5, 7};
    uint8_t *m = malloc((size_t)n), *again = malloc((size_t)n);
    int *owner = malloc((size_t)n * sizeof *owner);
    for (int k = 0; k < 4; k++) {
        int s = parts[k], ok = 1, pure = 1;
        double makespan = 0, sum = 0;
        for (cx_idx c = 0; c < n; c++)
            owner[c] = 0;
        for (int i = 0; i < s; i++) {
            double load = 0;
            cx_shard_mask(p, i, s, m, &load);
            cx_shard_mask(p, i, s, again, NULL);
            pure = pure && memcmp(m, again, (size_t)n) == 0;
            for (cx_idx c = 0; c < n; c++)
                owner[c] += m[c];
            makespan = load > makespan ? load : makespan;
            sum += load;
        }
        for (cx_idx c = 0; c < n; c++)
            ok = ok && owner[c] == 1;
        char what[128], detail[128];
        snprintf(what, sizeof what, "n=%d: every cell in exactly one shard", s);
        cx_test_true(what, ok, "", "definition of a partition");
        snprintf(what, sizeof what, "n=%d: the same shards on a second call", s);
        cx_test_true(what, pure, "", "shards are a pure function of (plan, i, n)");
        snprintf(what, sizeof what, "n=%d: shard loads sum to the total cost", s);
        cx_test_rel(what, sum, total, 1e-12, "sum of per-cell costs");
        snprintf(what, sizeof what, "n=%d: makespan within Graham's list-scheduling bound", s);
        double bound = total / s + (1.0 - 1.0 / s) * pmax;
        snprintf(detail, sizeof detail, "%.6g <= %.6g", makespan, bound);
        cx_test_true(what, makespan <= bound * (1 + 1e-12), detail,
                     "Graham 1966, Bell Syst. Tech. J. 45, 1563 (from memory)");
    }
    free(m);
    free(again);
    free(owner);
    cx_plan_destroy(&p);
}

static void groups_case(void)
{
    /* 40 networks x 5 cells on 3 shards: 40 >= 4 x 3 groups, so a network never splits. */
    const cx_idx n = 200;
    cx_plan *p = make_plan(n);
    for (cx_idx c = 0; c < n; c++) {
        p->network_key[c] = 1000u + (uint64_t)(c / 5);
        p->drive_key[c] = 5000u + (uint64_t)c;
        p->cost_shared[c] = 1.0 + (double)(c % 7);
        p->cost_own[c] = 0.25;
    }
    uint8_t *m = malloc((size_t)n);
    int whole = 1, nonempty = 1;
    for (int i = 0; i < 3; i++) {
        cx_shard_mask(p, i, 3, m, NULL);
        cx_idx count = 0;
        for (cx_idx c = 0; c < n; c++) {
            count += m[c];
            whole = whole && m[c] == m[c - c % 5];
        }
        nonempty = nonempty && count > 0;
    }
    cx_test_true("network groups stay whole in one shard", whole, "",
                 "reuse of the network stage (affinity), shards.c");
    cx_test_true("every shard gets work", nonempty, "", "LPT deals 40 groups to 3 shards");
    free(m);
    cx_plan_destroy(&p);
}

int main(void)
{
    hand_case();
    partition_case();
    groups_case();
    return cx_test_finish();
}
