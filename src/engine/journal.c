/* coexist engine: per-rank journals of finished cells.
 *
 * A journal is the durable truth while a sweep runs: each rank appends fixed-size records
 * (record.c) to its own file, buffered, and flushes and fsyncs at checkpoints. A crash loses at
 * most the unsynced buffer; a kill may leave a partial record at the end (size not a multiple
 * of the record size) and a storage fault may flip bytes; both are detected (size check,
 * CRC-32C) and dropped on replay, and counted. The write-ahead idea is the one of database
 * logging (Mohan, Haderle, Lindsay, Pirahesh & Schwarz 1992, "ARIES", ACM TODS 17(1), 94-162),
 * reduced to an append-only log of idempotent records: replaying a record twice writes the same
 * bytes, so no log sequence numbers are needed.
 *
 * Header (64 bytes): "CXJRNL1\n", u32 version 1, u32 record size, u64 study hash, u32 rank,
 * u32 max runs, u32 max tasks, u32 0x01020304 (byte order), f64 creation time, zeros, and at
 * offset 60 the CRC-32C of bytes 0-59.
 */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "coexist/clock.h"
#include "coexist/engine.h"
#include "coexist/error.h"

#define HEADER_SIZE     64
#define BYTE_ORDER_MARK 0x01020304u
static const char journal_magic[8] = {'C', 'X', 'J', 'R', 'N', 'L', '1', '\n'};

struct cx_journal {
    FILE *f;
    char path[CX_PATH_LEN];
    size_t record_size;
    int64_t records;
    char *buffer;
};

static void header_encode(unsigned char *h, uint64_t hash, int rank, size_t record_size,
                          int max_runs, int max_tasks)
{
    memset(h, 0, HEADER_SIZE);
    uint32_t v[6] = {1u, (uint32_t)record_size, 0, 0, 0, 0};
    memcpy(h, journal_magic, 8);
    memcpy(h + 8, &v[0], 4);
    memcpy(h + 12, &v[1], 4);
    memcpy(h + 16, &hash, 8);
    uint32_t r = (uint32_t)rank, mr = (uint32_t)max_runs, mt = (uint32_t)max_tasks;
    uint32_t bom = BYTE_ORDER_MARK;
    memcpy(h + 24, &r, 4);
    memcpy(h + 28, &mr, 4);
    memcpy(h + 32, &mt, 4);
    memcpy(h + 36, &bom, 4);
    double now = cx_clock_wall();
    memcpy(h + 40, &now, 8);
    uint32_t crc = cx_crc32c(0, h, 60);
    memcpy(h + 60, &crc, 4);
}

/* 0 when the header is a journal header; fills the fields. */
static int header_decode(const unsigned char *h, uint64_t *hash, int *rank, size_t *record_size,
                         int *max_runs, int *max_tasks)
{
    uint32_t crc, version, rs, r, mr, mt, bom;
    memcpy(&crc, h + 60, 4);
    if (memcmp(h, journal_magic, 8) != 0 || crc != cx_crc32c(0, h, 60))
        return 1;
    memcpy(&version, h + 8, 4);
    memcpy(&rs, h + 12, 4);
    memcpy(hash, h + 16, 8);
    memcpy(&r, h + 24, 4);
    memcpy(&mr, h + 28, 4);
    memcpy(&mt, h + 32, 4);
    memcpy(&bom, h + 36, 4);
    if (version != 1u || bom != BYTE_ORDER_MARK)
        return 1;
    *rank = (int)r;
    *record_size = rs;
    *max_runs = (int)mr;
    *max_tasks = (int)mt;
    return 0;
}

int cx_journal_peek(const char *path, uint64_t *hash, int *rank, size_t *record_size, int *max_runs,
                    int *max_tasks)
{
    int rc = CX_OK;
    unsigned char h[HEADER_SIZE];
    FILE *f = fopen(path, "rb");
    if (f == NULL)
        CX_RAISE(CX_ERR_IO, "cannot open journal %s: %s", path, strerror(errno));
    if (fread(h, 1, HEADER_SIZE, f) != HEADER_SIZE ||
        header_decode(h, hash, rank, record_size, max_runs, max_tasks) != 0)
        CX_RAISE(CX_ERR_INVALID, "%s is not a coexist journal (bad or missing header)", path);
done:
    if (f != NULL)
        fclose(f);
    return rc;
}

static int check_header(const char *path, uint64_t hash, int max_runs, int max_tasks, int *rank)
{
    int rc = CX_OK;
    uint64_t h = 0;
    size_t rs = 0;
    int mr = -1, mt = -1;
    CX_TRY(cx_journal_peek(path, &h, rank, &rs, &mr, &mt));
    CX_REQUIRE(h == hash, CX_ERR_MISMATCH,
               "journal %s belongs to a different study (hash %016llx, expected %016llx)", path,
               (unsigned long long)h, (unsigned long long)hash);
    CX_REQUIRE(rs == cx_record_size(max_runs, max_tasks) && mr == max_runs && mt == max_tasks,
               CX_ERR_MISMATCH, "journal %s has records of %zu bytes, expected %zu", path, rs,
               cx_record_size(max_runs, max_tasks));
done:
    return rc;
}

int cx_journal_open(const char *path, uint64_t hash, int rank, int max_runs, int max_tasks,
                    cx_journal **out)
{
    int rc = CX_OK;
    cx_journal *j = NULL;
    struct stat sb;
    CX_CALLOC(j, 1);
    snprintf(j->path, sizeof j->path, "%s", path);
    j->record_size = cx_record_size(max_runs, max_tasks);
    CX_ALLOC(j->buffer, 1 << 16);
    if (stat(path, &sb) == 0 && sb.st_size > 0) {
        int r;
        CX_TRY(check_header(path, hash, max_runs, max_tasks, &r));
        off_t body = sb.st_size - HEADER_SIZE;
        off_t keep = body - body % (off_t)j->record_size;
        if (keep != body && truncate(path, HEADER_SIZE + keep) != 0)
            CX_RAISE(CX_ERR_IO, "cannot cut the torn tail of %s: %s", path, strerror(errno));
        j->records = (int64_t)(keep / (off_t)j->record_size);
        j->f = fopen(path, "ab");
        if (j->f == NULL)
            CX_RAISE(CX_ERR_IO, "cannot append to journal %s: %s", path, strerror(errno));
        setvbuf(j->f, j->buffer, _IOFBF, 1 << 16);
    } else {
        unsigned char h[HEADER_SIZE];
        j->f = fopen(path, "wb");
        if (j->f == NULL)
            CX_RAISE(CX_ERR_IO, "cannot create journal %s: %s", path, strerror(errno));
        setvbuf(j->f, j->buffer, _IOFBF, 1 << 16);
        header_encode(h, hash, rank, j->record_size, max_runs, max_tasks);
        if (fwrite(h, 1, HEADER_SIZE, j->f) != HEADER_SIZE)
            CX_RAISE(CX_ERR_IO, "cannot write journal %s: %s", path, strerror(errno));
        /* The header is synced at once so that a journal on disk always has one. */
        CX_TRY(cx_journal_sync(j));
    }
    *out = j;
    j = NULL;
done:
    if (j != NULL) {
        if (j->f != NULL)
            fclose(j->f);
        free(j->buffer);
        free(j);
    }
    return rc;
}

int cx_journal_append(cx_journal *j, const unsigned char *record)
{
    int rc = CX_OK;
    if (fwrite(record, 1, j->record_size, j->f) != j->record_size)
        CX_RAISE(CX_ERR_IO, "cannot append to journal %s: %s", j->path, strerror(errno));
    j->records++;
done:
    return rc;
}

int cx_journal_flush(cx_journal *j)
{
    int rc = CX_OK;
    if (fflush(j->f) != 0)
        CX_RAISE(CX_ERR_IO, "cannot write journal %s: %s", j->path, strerror(errno));
done:
    return rc;
}

int cx_journal_sync(cx_journal *j)
{
    int rc = CX_OK;
    if (fflush(j->f) != 0 || fsync(fileno(j->f)) != 0)
        CX_RAISE(CX_ERR_IO, "cannot sync journal %s: %s", j->path, strerror(errno));
done:
    return rc;
}

int cx_journal_close(cx_journal **pj)
{
    int rc = CX_OK;
    cx_journal *j = *pj;
    if (j == NULL)
        return CX_OK;
    *pj = NULL;
    rc = cx_journal_sync(j);
    if (fclose(j->f) != 0 && rc == CX_OK)
        rc = CX_FAIL(CX_ERR_IO, "cannot close journal %s: %s", j->path, strerror(errno));
    free(j->buffer);
    free(j);
    return rc;
}

int64_t cx_journal_records(const cx_journal *j)
{
    return j->records;
}

int cx_journal_replay(const char *path, uint64_t hash, int max_runs, int max_tasks, cx_replay_fn fn,
                      void *ctx, cx_replay_stats *st)
{
    int rc = CX_OK;
    FILE *f = NULL;
    unsigned char *rec = NULL;
    size_t rs = cx_record_size(max_runs, max_tasks);
    memset(st, 0, sizeof *st);
    CX_TRY(check_header(path, hash, max_runs, max_tasks, &st->rank));
    CX_ALLOC(rec, rs);
    f = fopen(path, "rb");
    if (f == NULL)
        CX_RAISE(CX_ERR_IO, "cannot open journal %s: %s", path, strerror(errno));
    if (fseek(f, HEADER_SIZE, SEEK_SET) != 0)
        CX_RAISE(CX_ERR_IO, "cannot read journal %s: %s", path, strerror(errno));
    for (;;) {
        size_t got = fread(rec, 1, rs, f);
        if (got == 0)
            break;
        if (got < rs) {
            st->torn = 1;
            break;
        }
        cx_cell_result r;
        double wall, fin;
        if (cx_record_decode(rec, max_runs, max_tasks, &r, &wall, &fin) != 0) {
            st->bad_crc++;
            continue;
        }
        st->records++;
        st->last_finished = fin;
        if (fn != NULL)
            CX_TRY(fn(ctx, rec));
    }
    if (ferror(f))
        CX_RAISE(CX_ERR_IO, "cannot read journal %s", path);
done:
    if (f != NULL)
        fclose(f);
    free(rec);
    return rc;
}

void cx_journal_dir(const char *cube, char *out, size_t n)
{
    snprintf(out, n, "%s.journal", cube);
}

void cx_journal_path(const char *cube, int rank, char *out, size_t n)
{
    snprintf(out, n, "%s.journal/rank-%04d.jnl", cube, rank);
}
