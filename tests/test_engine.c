/* coexist engine unit tests: CRC-32C check values, result records, journal append and replay
 * with damaged tails and flipped bytes, and the work-unit schedule. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "coexist/engine.h"
#include "coexist/error.h"
#include "testlib.h"

static void test_crc(void)
{
    const char *check = "123456789";
    unsigned char buf[32];
    char d[64];
    uint32_t c = cx_crc32c(0, check, 9);
    snprintf(d, sizeof d, "got 0x%08X", c);
    cx_test_true("CRC-32C of \"123456789\" is 0xE3069283", c == 0xE3069283u, d,
                 "check value of CRC-32/ISCSI in Cook, Catalogue of parametrised CRC "
                 "algorithms (parameter model of Williams 1993); Castagnoli et al. 1993");
    /* Continuing over two pieces gives the CRC of the whole. */
    uint32_t c2 = cx_crc32c(cx_crc32c(0, check, 4), check + 4, 5);
    cx_test_true("CRC-32C continued over two pieces", c2 == c, "", "definition of a running CRC");
    memset(buf, 0, sizeof buf);
    c = cx_crc32c(0, buf, 32);
    snprintf(d, sizeof d, "got 0x%08X", c);
    cx_test_true("CRC-32C of 32 zero bytes is 0x8A9136AA", c == 0x8A9136AAu, d,
                 "RFC 3720 (iSCSI) appendix B.4 test vector (value from memory)");
    memset(buf, 0xFF, sizeof buf);
    c = cx_crc32c(0, buf, 32);
    snprintf(d, sizeof d, "got 0x%08X", c);
    cx_test_true("CRC-32C of 32 bytes 0xFF is 0x62A8AB43", c == 0x62A8AB43u, d,
                 "RFC 3720 (iSCSI) appendix B.4 test vector (value from memory)");
    for (int i = 0; i < 32; i++)
        buf[i] = (unsigned char)i;
    c = cx_crc32c(0, buf, 32);
    snprintf(d, sizeof d, "got 0x%08X", c);
    cx_test_true("CRC-32C of bytes 0..31 is 0x46DD794E", c == 0x46DD794Eu, d,
                 "RFC 3720 (iSCSI) appendix B.4 test vector (value from memory)");
    uint64_t h = cx_hash64("a", 1);
    snprintf(d, sizeof d, "got 0x%016llX", (unsigned long long)h);
    cx_test_true("FNV-1a 64 of \"a\" is 0xAF63DC4C8601EC8C", h == 0xAF63DC4C8601EC8Cull, d,
                 "Fowler, Noll & Vo, FNV test vectors (fnv-1a 64, \"a\"; value from memory)");
}

static void fill_result(cx_cell_result *r, cx_idx cell, int nruns, int ntasks)
{
    memset(r, 0, sizeof *r);
    r->cell = cell;
    r->status = CX_CELL_COMPUTED;
    r->ntasks = ntasks;
    r->nruns = nruns;
    r->multifunctional = (int)(cell % 2);
    r->untrained = (int)(cell % 3);
    r->rho_unscaled = 2.385 + 0.001 * (double)cell;
    r->wout_norm = 17.125 / (1.0 + (double)cell);
    r->wout_square_norm = 0.375 * (double)cell;
    for (int k = 0; k < nruns; k++) {
        cx_run_metrics *m = &r->runs[k];
        m->outcome = (int)((cell + k) % CX_OUT_COUNT);
        m->attractor = k % 2 ? -1 : k % ntasks;
        for (int t = 0; t < CX_MAX_TASKS; t++)
            m->distance[t] = t < ntasks ? 0.0625 * (double)(k + t) + (double)cell : NAN;
        m->coverage = 0.5 + 0.01 * k;
        m->roundness = 0.0317 * k;
        m->rotation = k % 2 ? 1.0 : -1.0;
        m->period = 3.75 + k;
        m->valid_time = NAN;
        m->lyapunov = -0.125 * k;
        m->stop_time = 60.0;
    }
}

static void test_record(void)
{
    const int R = 5, T = 3;
    size_t rs = cx_record_size(R, T);
    unsigned char *buf = malloc(rs);
    cx_cell_result *a = malloc(sizeof *a), *b = malloc(sizeof *b);
    double wall, fin;
    fill_result(a, 4321, R, T);
    cx_record_encode(a, 0.75, 1.5e9, 2, R, T, buf);
    int bad = cx_record_decode(buf, R, T, b, &wall, &fin);
    int same = !bad && b->cell == 4321 && b->status == a->status && b->nruns == R &&
               b->rho_unscaled == a->rho_unscaled && wall == 0.75 && fin == 1.5e9;
    for (int k = 0; k < R && same; k++) {
        same = b->runs[k].outcome == a->runs[k].outcome &&
               b->runs[k].attractor == a->runs[k].attractor &&
               b->runs[k].period == a->runs[k].period && b->runs[k].lyapunov == a->runs[k].lyapunov;
        for (int t = 0; t < T; t++)
            same = same && b->runs[k].distance[t] == a->runs[k].distance[t];
    }
    cx_test_true("record encode/decode round trip is exact", same, "5 runs, 3 tasks",
                 "bit copy: decode(encode(x)) == x");
    int flips = 0;
    for (size_t i = 0; i < rs - 8; i += 7) {
        buf[i] ^= 0x04;
        flips += cx_record_decode(buf, R, T, b, &wall, &fin) != 0;
        buf[i] ^= 0x04;
    }
    cx_test_true("every single-bit flip is detected", flips == (int)((rs - 8 + 6) / 7), "",
                 "a CRC detects every single-bit error (Peterson & Brown 1961, Proc. IRE 49, "
                 "228-235)");
    free(buf);
    free(a);
    free(b);
}

typedef struct seen {
    int64_t n;
    int64_t sum;
} seen;

static int count_record(void *ctx, const unsigned char *rec)
{
    seen *s = ctx;
    s->n++;
    s->sum += cx_record_cell(rec);
    return CX_OK;
}

static void test_journal(void)
{
    const int R = 4, T = 2;
    char path[] = "/tmp/cx_test_journal_XXXXXX";
    int fd = mkstemp(path);
    close(fd);
    unlink(path);
    size_t rs = cx_record_size(R, T);
    unsigned char *buf = malloc(rs);
    cx_cell_result *r = malloc(sizeof *r);
    cx_journal *j = NULL;
    uint64_t hash = 0x9E3779B97F4A7C15ull;
    int rc = cx_journal_open(path, hash, 3, R, T, &j);
    int64_t want_sum = 0;
    for (int i = 0; i < 37 && rc == CX_OK; i++) {
        fill_result(r, 100 + i, R, T);
        want_sum += 100 + i;
        cx_record_encode(r, 0.01, 1.0, 3, R, T, buf);
        rc = cx_journal_append(j, buf);
    }
    if (rc == CX_OK)
        rc = cx_journal_close(&j);
    cx_test_true("journal of 37 records written", rc == CX_OK, cx_err_message(), "");
    seen s = {0, 0};
    cx_replay_stats st;
    rc = cx_journal_replay(path, hash, R, T, count_record, &s, &st);
    char d[128];
    snprintf(d, sizeof d, "records %lld, torn %lld, bad %lld, rank %d", (long long)st.records,
             (long long)st.torn, (long long)st.bad_crc, st.rank);
    cx_test_true("replay returns all 37 records",
                 rc == CX_OK && s.n == 37 && s.sum == want_sum && st.torn == 0 && st.bad_crc == 0 &&
                     st.rank == 3,
                 d, "the 37 appends above");
    /* A torn tail: cut the last record short. */
    FILE *f = fopen(path, "r+b");
    fseek(f, 0, SEEK_END);
    long size = ftell(f);
    fclose(f);
    rc = truncate(path, size - (long)rs / 2);
    s = (seen){0, 0};
    rc = cx_journal_replay(path, hash, R, T, count_record, &s, &st);
    snprintf(d, sizeof d, "records %lld, torn %lld", (long long)st.records, (long long)st.torn);
    cx_test_true("torn tail dropped and counted", rc == CX_OK && st.records == 36 && st.torn == 1,
                 d, "size % record size != 0 (PLATFORM.md)");
    /* A flipped byte inside record 10. */
    f = fopen(path, "r+b");
    fseek(f, 64 + 10 * (long)rs + 123, SEEK_SET);
    int c = fgetc(f);
    fseek(f, 64 + 10 * (long)rs + 123, SEEK_SET);
    fputc(c ^ 0x20, f);
    fclose(f);
    rc = cx_journal_replay(path, hash, R, T, count_record, &s, &st);
    snprintf(d, sizeof d, "records %lld, torn %lld, bad %lld", (long long)st.records,
             (long long)st.torn, (long long)st.bad_crc);
    cx_test_true("flipped byte dropped and counted",
                 rc == CX_OK && st.records == 35 && st.torn == 1 && st.bad_crc == 1, d,
                 "CRC-32C mismatch");
    /* Reopening for append cuts the torn tail and keeps alignment. */
    rc = cx_journal_open(path, hash, 3, R, T, &j);
    if (rc == CX_OK) {
        fill_result(r, 999, R, T);
        cx_record_encode(r, 0.01, 1.0, 3, R, T, buf);
        rc = cx_journal_append(j, buf);
        if (rc == CX_OK)
            rc = cx_journal_close(&j);
    }
    rc = rc == CX_OK ? cx_journal_replay(path, hash, R, T, count_record, &s, &st) : rc;
    snprintf(d, sizeof d, "records %lld, torn %lld, bad %lld", (long long)st.records,
             (long long)st.torn, (long long)st.bad_crc);
    cx_test_true("append after a torn tail: aligned, one more record",
                 rc == CX_OK && st.records == 36 && st.torn == 0 && st.bad_crc == 1, d,
                 "the append above");
    rc = cx_journal_replay(path, hash + 1, R, T, NULL, NULL, &st);
    cx_test_true("journal of another study is refused", rc == CX_ERR_MISMATCH, cx_err_message(),
                 "header hash check");
    cx_err_clear();
    rc = cx_journal_open(path, hash + 1, 3, R, T, &j);
    cx_test_true("appending to another study's journal is refused", rc == CX_ERR_MISMATCH, "",
                 "header hash check");
    cx_err_clear();
    unlink(path);
    free(buf);
    free(r);
}

static void test_units(void)
{
    /* 3 networks x 4 drives x 5 cells = 60 cells; costs differ per network. */
    cx_plan *p = NULL;
    double v3[3] = {0, 1, 2}, v4[4] = {0.5, 0.7, 0.9, 1.1}, v5[5] = {1, 2, 3, 4, 5};
    int rc = cx_plan_create("units", 2, 1, "k: v\n", &p);
    if (rc == CX_OK)
        rc = cx_plan_add_axis(p, "seed", "1", 3, v3);
    if (rc == CX_OK)
        rc = cx_plan_add_axis(p, "reservoir.spectral_radius", "1", 4, v4);
    if (rc == CX_OK)
        rc = cx_plan_add_axis(p, "training.ridge", "1", 5, v5);
    if (rc == CX_OK)
        rc = cx_plan_alloc_keys(p);
    cx_test_true("plan of 60 cells", rc == CX_OK && p->ncells == 60, "", "3 x 4 x 5");
    if (rc != CX_OK)
        return;
    for (cx_idx c = 0; c < 60; c++) {
        cx_idx co[3];
        cx_plan_coords(p, c, co);
        p->network_key[c] = 1000 + (uint64_t)co[0];
        p->drive_key[c] = 5000 + (uint64_t)(co[0] * 4 + co[1]);
        p->cost_shared[c] = 10.0 * (double)(co[0] + 1);
        p->cost_own[c] = 1.0;
    }
    uint8_t todo[60];
    memset(todo, 1, sizeof todo);
    todo[7] = 0; /* a done cell */
    cx_units *u = NULL;
    rc = cx_units_build(p, todo, 1024, &u);
    cx_test_true("59 cells in 12 units in 3 groups",
                 rc == CX_OK && cx_units_cells(u) == 59 && cx_units_count(u) == 12 &&
                     cx_units_groups(u) == 3,
                 "", "3 network keys x 4 drive keys");
    int taken[60] = {0}, consecutive = 1, owner_ok = 1;
    int64_t cells[64];
    int last_net[2] = {-1, -1};
    cx_idx n, nu, total = 0;
    int w = 0, switches = 0;
    while ((n = cx_units_take(u, w, 2, 0, 64, cells, &nu)) > 0) {
        for (cx_idx i = 0; i < n; i++) {
            taken[cells[i]]++;
            if (i > 0 && p->drive_key[cells[i]] != p->drive_key[cells[i - 1]] &&
                p->drive_key[cells[i]] < p->drive_key[cells[i - 1]] - 100)
                consecutive = 0;
        }
        /* Cells of one drive key come together inside a batch. */
        for (cx_idx i = 1; i < n; i++)
            for (cx_idx k = 0; k + 1 < i; k++)
                if (p->drive_key[cells[k]] == p->drive_key[cells[i]] &&
                    p->drive_key[cells[i - 1]] != p->drive_key[cells[i]])
                    consecutive = 0;
        int net = (int)(p->network_key[cells[0]] - 1000);
        if (last_net[w] >= 0 && net != last_net[w])
            switches++;
        last_net[w] = net;
        total += n;
        w = 1 - w;
    }
    int once = 1;
    for (int c = 0; c < 60; c++)
        once = once && taken[c] == (c == 7 ? 0 : 1);
    cx_test_true("every cell to do is handed out exactly once", once && total == 59, "",
                 "the todo mask above");
    cx_test_true("cells of one drive key are consecutive", consecutive, "", "units.c contract");
    char d[64];
    snprintf(d, sizeof d, "%d network switches over 2 workers", switches);
    cx_test_true("workers keep their network group (at most 3 switches)", switches <= 3 && owner_ok,
                 d, "affinity scheduling, Markatos & LeBlanc 1994");
    cx_units_destroy(&u);
    /* Largest first: the first batch comes from the costliest network (seed 2). */
    rc = cx_units_build(p, todo, 1024, &u);
    n = cx_units_take(u, 0, 2, 0, 64, cells, &nu);
    cx_test_true("first batch from the costliest group",
                 rc == CX_OK && n > 0 && p->network_key[cells[0]] == 1002, "",
                 "longest processing time first, Graham 1969");
    cx_units_destroy(&u);
    cx_plan_destroy(&p);
}

/* Units of equal cost and one block key come one after another, whatever the axis order: here an
 * overlap axis (4 values, one drive each) outside an input-scaling axis (3 values, one block key
 * each), so that the cells of one block key are 3 apart in the grid. */
static void test_units_reservoir(void)
{
    cx_plan *p = NULL;
    double v4[4] = {0.0, 0.5, 1.0, 1.5}, v3[3] = {0.8, 1.0, 1.2};
    int rc = cx_plan_create("units-reservoir", 2, 1, "k: v\n", &p);
    if (rc == CX_OK)
        rc = cx_plan_add_axis(p, "overlap", "1", 4, v4);
    if (rc == CX_OK)
        rc = cx_plan_add_axis(p, "reservoir.input_scaling", "1", 3, v3);
    if (rc == CX_OK)
        rc = cx_plan_alloc_keys(p);
    cx_test_true("plan of 12 cells", rc == CX_OK && p->ncells == 12, "", "4 x 3");
    if (rc != CX_OK)
        return;
    for (cx_idx c = 0; c < 12; c++) {
        cx_idx co[2];
        cx_plan_coords(p, c, co);
        p->network_key[c] = 77;
        p->drive_key[c] = 900 + (uint64_t)c;
        p->block_key[c] = 40 + (uint64_t)co[1];
        p->cost_shared[c] = 5.0;
        p->cost_own[c] = 1.0;
    }
    uint8_t todo[12];
    memset(todo, 1, sizeof todo);
    cx_units *u = NULL;
    int64_t cells[12], order[12];
    cx_idx n, nu, got = 0;
    rc = cx_units_build(p, todo, 1024, &u);
    while (rc == CX_OK && (n = cx_units_take(u, 0, 1, 0, 12, cells, &nu)) > 0)
        for (cx_idx i = 0; i < n && got < 12; i++)
            order[got++] = cells[i];
    /* one change of block key per input scaling: 2 changes over the 12 cells */
    int changes = 0, rising = 1;
    for (cx_idx i = 1; i < got; i++) {
        changes += p->block_key[order[i]] != p->block_key[order[i - 1]];
        if (p->block_key[order[i]] == p->block_key[order[i - 1]])
            rising &= order[i] > order[i - 1];
    }
    char d[96];
    snprintf(d, sizeof d, "%lld cells handed out, %d changes of block key", (long long)got,
             changes);
    cx_test_true("units of equal cost are grouped by block key, then by first cell",
                 got == 12 && changes == 2 && rising, d, "units.c contract");
    cx_units_destroy(&u);
    cx_plan_destroy(&p);
}

int main(void)
{
    test_crc();
    test_record();
    test_journal();
    test_units();
    test_units_reservoir();
    return cx_test_finish();
}
