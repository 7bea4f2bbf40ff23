/* coexist fuzz target: the journal reader (cx_journal_peek, cx_journal_replay and the record
 * decoder behind it), under libFuzzer with ASan/UBSan (Serebryany 2016, "Continuous fuzzing
 * with libFuzzer and AddressSanitizer", IEEE SecDev, p. 157). The input is written to a temporary
 * file and replayed twice: with the sizes its own header claims (when they are within the
 * limits of config.h) and with the sizes of tests/sweeps/engine_small.yaml (4 runs, 2 tasks).
 * Damaged input must be counted as torn or bad records or refused with an error. */
#define _POSIX_C_SOURCE 200809L
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

#include "coexist/config.h"
#include "coexist/engine.h"
#include "coexist/error.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static int count_record(void *ctx, const unsigned char *record)
{
    int64_t *n = ctx;
    (void)cx_record_cell(record);
    (void)cx_record_status(record);
    (*n)++;
    return CX_OK;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    char path[] = "/tmp/cx-fuzz-journal-XXXXXX";
    int fd = mkstemp(path);
    if (fd < 0)
        return 0;
    FILE *f = fdopen(fd, "wb");
    if (f == NULL) {
        close(fd);
        unlink(path);
        return 0;
    }
    size_t put = fwrite(data, 1, size, f);
    fclose(f);
    if (put == size) {
        uint64_t hash = 0;
        int rank = 0, mr = 0, mt = 0;
        size_t rs = 0;
        int64_t n = 0;
        cx_replay_stats st;
        if (cx_journal_peek(path, &hash, &rank, &rs, &mr, &mt) == CX_OK && mr >= 1 &&
            mr <= CX_MAX_RUNS && mt >= 1 && mt <= CX_MAX_TASKS)
            (void)cx_journal_replay(path, hash, mr, mt, count_record, &n, &st);
        cx_err_clear();
        (void)cx_journal_replay(path, hash, 4, 2, count_record, &n, &st);
        cx_err_clear();
    }
    unlink(path);
    return 0;
}
