/* coexist engine: shards, the share of a grid one task of a job array computes.
 *
 * A shard is a pure function of (plan, i, n): the cells are cut into pieces that keep the
 * engine's reuse (every cell of one network key when there are at least 4 n network groups,
 * else every cell of one drive key), the pieces are sorted by estimated cost, largest first,
 * ties by their first cell index, and each is dealt to the shard with the least cost so far
 * (ties to the lowest shard index): the longest-processing-time-first rule of Graham 1969,
 * "Bounds on multiprocessing timing anomalies", SIAM J. Appl. Math. 17(2), 416-429, whose
 * makespan is within 4/3 - 1/(3n) of the optimum. Nothing depends on the machine, the rank
 * count, or what is already done, so the shards of one partition never overlap and together
 * cover the grid, and a rerun of shard i finds the same cells.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/engine.h"
#include "coexist/error.h"

typedef struct piece_key {
    uint64_t net, drive;
    int64_t cell;
} piece_key;

static int cmp_piece_key(const void *a, const void *b)
{
    const piece_key *x = a, *y = b;
    if (x->net != y->net)
        return x->net < y->net ? -1 : 1;
    if (x->drive != y->drive)
        return x->drive < y->drive ? -1 : 1;
    return (x->cell > y->cell) - (x->cell < y->cell);
}

typedef struct piece {
    cx_idx start, len; /* into the sorted keys */
    int64_t first;     /* smallest cell index */
    double cost;
} piece;

static int cmp_piece(const void *a, const void *b)
{
    const piece *x = a, *y = b;
    if (x->cost != y->cost)
        return x->cost > y->cost ? -1 : 1;
    return (x->first > y->first) - (x->first < y->first);
}

int cx_shard_mask(const cx_plan *plan, int index, int count, uint8_t *mine, double *cost)
{
    int rc = CX_OK;
    piece_key *keys = NULL;
    piece *pieces = NULL;
    double *load = NULL;
    CX_REQUIRE(plan->network_key != NULL, CX_ERR_INTERNAL, "plan has no keys");
    CX_REQUIRE(count >= 1 && index >= 0 && index < count, CX_ERR_INVALID,
               "shard %d of %d: need 0 <= i < n", index, count);
    cx_idx n = plan->ncells;
    CX_ALLOC(keys, n + 1);
    CX_ALLOC(pieces, n + 1);
    CX_CALLOC(load, (size_t)count);
    for (cx_idx c = 0; c < n; c++)
        keys[c] = (piece_key){plan->network_key[c], plan->drive_key[c], c};
    qsort(keys, (size_t)n, sizeof *keys, cmp_piece_key);
    cx_idx groups = 0;
    for (cx_idx i = 0; i < n; i++)
        groups += i == 0 || keys[i].net != keys[i - 1].net;
    int by_network = groups >= 4 * (cx_idx)count;
    cx_idx np = 0;
    for (cx_idx i = 0; i < n;) {
        cx_idx j = i + 1;
        while (j < n && keys[j].net == keys[i].net &&
               (by_network || keys[j].drive == keys[i].drive))
            j++;
        piece *p = &pieces[np++];
        p->start = i;
        p->len = j - i;
        p->first = keys[i].cell;
        p->cost = 0.0;
        /* The shared stages are paid once per drive key inside a piece. */
        for (cx_idx k = i; k < j; k++) {
            if (k == i || keys[k].drive != keys[k - 1].drive)
                p->cost += plan->cost_shared[keys[k].cell];
            p->cost += plan->cost_own[keys[k].cell];
            if (keys[k].cell < p->first)
                p->first = keys[k].cell;
        }
        i = j;
    }
    qsort(pieces, (size_t)np, sizeof *pieces, cmp_piece);
    for (cx_idx c = 0; c < n; c++)
        mine[c] = 0;
    for (cx_idx k = 0; k < np; k++) {
        int best = 0;
        for (int s = 1; s < count; s++)
            if (load[s] < load[best])
                best = s;
        load[best] += pieces[k].cost;
        if (best == index)
            for (cx_idx m = 0; m < pieces[k].len; m++)
                mine[keys[pieces[k].start + m].cell] = 1;
    }
    if (cost != NULL)
        *cost = load[index];
done:
    free(load);
    free(pieces);
    free(keys);
    return rc;
}

void cx_journal_shard_path(const char *cube, int index, int count, int rank, char *out, size_t n)
{
    snprintf(out, n, "%s.journal/shard-%04d-of-%04d-rank-%04d.jnl", cube, index, count, rank);
}

int cx_journal_shard_parse(const char *name, int *index, int *count)
{
    int i = 0, c = 0, r = 0, used = 0;
    if (sscanf(name, "shard-%d-of-%d-rank-%d.jnl%n", &i, &c, &r, &used) != 3 ||
        name[used] != '\0' || c < 1 || i < 0 || i >= c)
        return -1;
    *index = i;
    *count = c;
    return 0;
}
