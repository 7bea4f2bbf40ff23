/* coexist fuzz target: the cube opener for reading (cx_cube_probe, cx_cube_summarize), under
 * libFuzzer with ASan/UBSan (Serebryany 2016, "Continuous fuzzing with libFuzzer and
 * AddressSanitizer", IEEE SecDev, p. 157). The input is written to a temporary file; coexist
 * must classify it as absent, ours or foreign and summarise it or refuse it with an error.
 * A fault found inside libhdf5 itself is a fault of the HDF5 library, reported as such. */
#define _POSIX_C_SOURCE 200809L
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

#include "coexist/engine.h"
#include "coexist/error.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    char path[] = "/tmp/cx-fuzz-cube-XXXXXX";
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
        int kind = 0;
        (void)cx_cube_probe(path, &kind);
        cx_err_clear();
        cx_cube_summary s;
        uint8_t *done = NULL;
        if (cx_cube_summarize(path, &s, &done) == CX_OK)
            free(done);
        cx_err_clear();
    }
    unlink(path);
    return 0;
}
