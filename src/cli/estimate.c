/* coexist command line: the cost and memory estimate of a whole study (see estimate.h). Shared
 * stages (network draw, drive) are charged once per distinct key, as the engine's work units pay
 * them; each cell pays its own solve and probes. */
#include <stdlib.h>
#include <unistd.h>

#include "coexist/cell.h"
#include "coexist/error.h"
#include "cli/estimate.h"

static int cmp_u64(const void *a, const void *b)
{
    uint64_t x = *(const uint64_t *)a, y = *(const uint64_t *)b;
    return x < y ? -1 : x > y;
}

static cx_idx distinct(uint64_t *v, cx_idx n)
{
    if (n == 0)
        return 0;
    qsort(v, (size_t)n, sizeof *v, cmp_u64);
    cx_idx d = 1;
    for (cx_idx i = 1; i < n; i++)
        if (v[i] != v[i - 1])
            d++;
    return d;
}

int cx_estimate_study(const cx_study *s, cx_estimate *e)
{
    int rc = CX_OK;
    const cx_idx limit = 2000000;
    cx_idx cells = cx_study_cells(s);
    cx_idx visit = cells <= limit ? cells : limit;
    cx_idx step = cells <= limit ? 1 : cells / limit;
    uint64_t *nk = NULL, *dk = NULL, *rk = NULL;
    double net_f = 0, drive_f = 0, own_f = 0, mem_max = 0;
    CX_ALLOC(nk, visit);
    CX_ALLOC(dk, visit);
    CX_ALLOC(rk, visit);
    for (cx_idx v = 0; v < visit; v++) {
        cx_cell_params p;
        CX_TRY(cx_study_bind(s, v * step, &p));
        double a, b, c, d;
        cx_cell_cost_parts(&p, &a, &b, &c, &d);
        nk[v] = cx_cell_network_key(&p);
        dk[v] = cx_cell_drive_key(&p);
        rk[v] = cx_cell_block_key(&p);
        net_f += a;
        drive_f += b;
        own_f += c + d;
        double m = cx_cell_memory_bytes(&p);
        if (m > mem_max)
            mem_max = m;
    }
    cx_idx nnet = distinct(nk, visit), ndrive = distinct(dk, visit), nblk = distinct(rk, visit);
    double scale = (double)cells / (double)visit;
    /* mean shared cost per visited cell, times the number of distinct keys */
    e->flops =
        (net_f * (double)nnet + drive_f * (double)ndrive) / (double)visit * scale + own_f * scale;
    e->memory_max = mem_max;
    e->networks = cells <= limit ? nnet : nnet * step;
    e->drives = cells <= limit ? ndrive : ndrive * step;
    e->blocks = cells <= limit ? nblk : nblk * step;
    e->sampled = cells > limit;
done:
    free(nk);
    free(dk);
    free(rk);
    return rc;
}

int cx_estimate_memory_check(const char *path, const cx_study *s)
{
    int rc = CX_OK;
    cx_idx cells = cx_study_cells(s);
    cx_idx step = cells > 10000 ? cells / 10000 : 1;
    double cell_max = 0.0;
    for (cx_idx c = 0; c < cells; c += step) {
        cx_cell_params p;
        CX_TRY(cx_study_bind(s, c, &p));
        double m = cx_cell_memory_bytes(&p);
        if (m > cell_max)
            cell_max = m;
    }
    long pages = sysconf(_SC_PHYS_PAGES), page = sysconf(_SC_PAGE_SIZE);
    if (pages <= 0 || page <= 0)
        return CX_OK; /* unknown: nothing to compare with */
    double have = (double)pages * (double)page;
    double book = (double)cells * CX_BOOKKEEPING_BYTES;
    const double gib = 1073741824.0;
    CX_REQUIRE(book + cell_max <= have, CX_ERR_INVALID,
               "%s: the sweep needs about %.3g GiB of memory on rank 0 (%lld cells x %.0f bytes of "
               "bookkeeping + %.3g GiB for its largest cell), more than this machine's %.3g GiB; "
               "shrink an axis or split the sweep into several files",
               path, (book + cell_max) / gib, (long long)cells, CX_BOOKKEEPING_BYTES,
               cell_max / gib, have / gib);
done:
    return rc;
}
