/* coexist engine: work units and their schedule.
 *
 * A work unit is every cell of one drive key, in consecutive order, so that a rank pays the
 * network and the drive (Gram sums) once and then only a solve and the probes per cell. Units
 * of one network key form a group; a group is handed to one worker while it lasts, so that the
 * cached network is reused across spectral radii (affinity scheduling: Markatos & LeBlanc
 * 1994, "Using processor affinity in loop scheduling on shared-memory multiprocessors", IEEE
 * Trans. Parallel Distrib. Syst. 5(4), 379-400). Groups start in decreasing order of
 * estimated cost and units inside a group likewise (longest processing time first: Graham 1969,
 * "Bounds on multiprocessing timing anomalies", SIAM J. Appl. Math. 17(2), 416-429). A worker
 * whose group is used up takes the costliest unclaimed group, and when none is left takes units
 * from the back of the costliest remaining group, so that the owner keeps its front.
 * Batches shrink as work runs out: each holds units worth about remaining / (2 workers)
 * (factoring: Hummel, Schonberg & Flynn 1992, "Factoring: a method for scheduling parallel
 * loops", Commun. ACM 35(8), 90-101), which keeps messages few for cheap cells and the tail
 * short for costly ones.
 */
#include <stdlib.h>
#include <string.h>

#include "coexist/engine.h"
#include "coexist/error.h"

typedef struct unit {
    cx_idx start; /* into cells[] */
    cx_idx len;
    double cost;
} unit;

typedef struct group {
    cx_idx lo, hi; /* remaining units [lo, hi) */
    double remaining;
    int owner;
} group;

struct cx_units {
    cx_idx ncells;
    int64_t *cells;
    cx_idx nunits;
    unit *units;
    cx_idx ngroups;
    group *groups;
    cx_idx next_unclaimed;
    double remaining;
    double total;
    cx_idx left; /* units not yet taken */
    int nworkers;
    cx_idx *current; /* group of each worker, or -1 */
};

typedef struct sort_key {
    uint64_t net, drive;
    int64_t cell;
} sort_key;

static int cmp_key(const void *a, const void *b)
{
    const sort_key *x = a, *y = b;
    if (x->net != y->net)
        return x->net < y->net ? -1 : 1;
    if (x->drive != y->drive)
        return x->drive < y->drive ? -1 : 1;
    return (x->cell > y->cell) - (x->cell < y->cell);
}

/* Order by cost, largest first; ties by block key, so that units whose cells can share the
 * closed-loop block (a spectral-radius, overlap or washout axis) come one after another whatever
 * the axis order, then by first cell so that the order is reproducible. C11's qsort takes no
 * context argument, so the cell array and the plan's block keys are passed through
 * these file-level pointers, set only inside cx_units_build (which runs on one thread: rank 0's
 * coordinator). */
static const int64_t *sort_cells;
static const uint64_t *sort_block;
static int cmp_unit(const void *a, const void *b)
{
    const unit *x = a, *y = b;
    if (x->cost != y->cost)
        return x->cost > y->cost ? -1 : 1;
    int64_t cx = sort_cells[x->start], cy = sort_cells[y->start];
    if (sort_block != NULL && sort_block[cx] != sort_block[cy])
        return sort_block[cx] < sort_block[cy] ? -1 : 1;
    return (cx > cy) - (cx < cy);
}

static int cmp_group(const void *a, const void *b)
{
    const group *x = a, *y = b;
    if (x->remaining != y->remaining)
        return x->remaining > y->remaining ? -1 : 1;
    return (x->lo > y->lo) - (x->lo < y->lo);
}

int cx_units_build(const cx_plan *plan, const uint8_t *todo, int max_unit_cells, cx_units **out)
{
    int rc = CX_OK;
    cx_units *u = NULL;
    sort_key *keys = NULL;
    unit *tmp = NULL;
    CX_REQUIRE(plan->network_key != NULL, CX_ERR_INTERNAL, "plan has no keys");
    CX_CALLOC(u, 1);
    for (cx_idx c = 0; c < plan->ncells; c++)
        if (todo[c])
            u->ncells++;
    CX_ALLOC(keys, u->ncells + 1);
    CX_ALLOC(u->cells, u->ncells + 1);
    cx_idx n = 0;
    for (cx_idx c = 0; c < plan->ncells; c++)
        if (todo[c])
            keys[n++] = (sort_key){plan->network_key[c], plan->drive_key[c], c};
    qsort(keys, (size_t)n, sizeof *keys, cmp_key);
    for (cx_idx i = 0; i < n; i++)
        u->cells[i] = keys[i].cell;
    CX_ALLOC(u->units, n + 1);
    CX_ALLOC(u->groups, n + 1);
    /* Units: runs of equal (network, drive) key, cut at max_unit_cells. */
    for (cx_idx i = 0; i < n;) {
        cx_idx j = i + 1;
        while (j < n && keys[j].net == keys[i].net && keys[j].drive == keys[i].drive &&
               (max_unit_cells <= 0 || j - i < max_unit_cells))
            j++;
        unit *un = &u->units[u->nunits++];
        un->start = i;
        un->len = j - i;
        un->cost = plan->cost_shared[keys[i].cell];
        for (cx_idx k = i; k < j; k++)
            un->cost += plan->cost_own[keys[k].cell];
        i = j;
    }
    /* Groups: runs of units with equal network key; sort units inside, then the groups. */
    sort_cells = u->cells;
    sort_block = plan->block_key;
    for (cx_idx i = 0; i < u->nunits;) {
        uint64_t net = keys[u->units[i].start].net;
        cx_idx j = i + 1;
        while (j < u->nunits && keys[u->units[j].start].net == net)
            j++;
        qsort(u->units + i, (size_t)(j - i), sizeof(unit), cmp_unit);
        group *g = &u->groups[u->ngroups++];
        g->lo = i;
        g->hi = j;
        g->owner = -1;
        g->remaining = 0.0;
        for (cx_idx k = i; k < j; k++)
            g->remaining += u->units[k].cost;
        u->total += g->remaining;
        i = j;
    }
    qsort(u->groups, (size_t)u->ngroups, sizeof(group), cmp_group);
    u->remaining = u->total;
    u->left = u->nunits;
    *out = u;
    u = NULL;
done:
    free(tmp);
    free(keys);
    cx_units_destroy(&u);
    return rc;
}

void cx_units_destroy(cx_units **pu)
{
    cx_units *u = *pu;
    if (u == NULL)
        return;
    *pu = NULL;
    free(u->cells);
    free(u->units);
    free(u->groups);
    free(u->current);
    free(u);
}

cx_idx cx_units_count(const cx_units *u)
{
    return u->nunits;
}

cx_idx cx_units_cells(const cx_units *u)
{
    return u->ncells;
}

double cx_units_cost(const cx_units *u)
{
    return u->total;
}

cx_idx cx_units_left(const cx_units *u)
{
    return u->left;
}

cx_idx cx_units_groups(const cx_units *u)
{
    return u->ngroups;
}

static cx_idx pick_group(cx_units *u, int w, int *from_back)
{
    *from_back = 0;
    cx_idx g = u->current[w];
    if (g >= 0 && u->groups[g].lo < u->groups[g].hi)
        return g;
    while (u->next_unclaimed < u->ngroups) {
        group *cand = &u->groups[u->next_unclaimed++];
        if (cand->owner < 0 && cand->lo < cand->hi) {
            cand->owner = w;
            return u->current[w] = u->next_unclaimed - 1;
        }
    }
    cx_idx best = -1;
    for (cx_idx k = 0; k < u->ngroups; k++)
        if (u->groups[k].lo < u->groups[k].hi &&
            (best < 0 || u->groups[k].remaining > u->groups[best].remaining))
            best = k;
    if (best >= 0) {
        *from_back = 1;
        u->current[w] = best;
    }
    return best;
}

cx_idx cx_units_take(cx_units *u, int w, int nworkers, int max_units, cx_idx max_cells,
                     int64_t *cells, cx_idx *nunits)
{
    *nunits = 0;
    if (u->current == NULL || u->nworkers != nworkers) {
        free(u->current);
        u->current = cx_malloc_array((size_t)nworkers, sizeof(cx_idx));
        if (u->current == NULL)
            return 0;
        u->nworkers = nworkers;
        for (int k = 0; k < nworkers; k++)
            u->current[k] = -1;
    }
    int back;
    cx_idx g = pick_group(u, w, &back);
    if (g < 0)
        return 0;
    group *gr = &u->groups[g];
    double budget = u->remaining / (2.0 * nworkers), taken = 0.0;
    cx_idx n = 0;
    for (;;) {
        if (gr->lo >= gr->hi) {
            /* Group used up below the budget: claim the next unclaimed group, if any, so that
             * cheap groups travel several to a message. */
            if (back || taken >= budget || n >= max_cells ||
                (max_units > 0 && *nunits >= max_units))
                break;
            cx_idx next = -1;
            while (u->next_unclaimed < u->ngroups) {
                group *cand = &u->groups[u->next_unclaimed++];
                if (cand->owner < 0 && cand->lo < cand->hi) {
                    next = u->next_unclaimed - 1;
                    break;
                }
            }
            if (next < 0)
                break;
            u->groups[next].owner = w;
            u->current[w] = g = next;
            gr = &u->groups[g];
        }
        unit *un = &u->units[back ? gr->hi - 1 : gr->lo];
        if (n > 0 &&
            (n + un->len > max_cells || (max_units > 0 && *nunits >= max_units) || taken >= budget))
            break;
        if (un->len > max_cells)
            break; /* cannot happen when units were cut at max_cells */
        memcpy(cells + n, u->cells + un->start, (size_t)un->len * sizeof(int64_t));
        n += un->len;
        taken += un->cost;
        gr->remaining -= un->cost;
        u->remaining -= un->cost;
        (*nunits)++;
        u->left--;
        if (back)
            gr->hi--;
        else
            gr->lo++;
    }
    return n;
}
