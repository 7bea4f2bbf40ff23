/* coexist fuzz target: the sweep-file parser and validator (cx_study_load_buffer), under
 * libFuzzer with AddressSanitizer and UndefinedBehaviorSanitizer (clang, Debian's
 * libclang-rt-14-dev). Coverage-guided mutation fuzzing as in Serebryany 2016, "Continuous
 * fuzzing with libFuzzer and AddressSanitizer", IEEE SecDev, p. 157. Any input must give either
 * a study or an error message, never a crash, leak or undefined behaviour. When the input is a
 * valid study, every cell of a small grid is also bound, which runs the per-cell rules. */
#include <stddef.h>
#include <stdint.h>

#include "coexist/error.h"
#include "coexist/study.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    cx_study *s = NULL;
    if (cx_study_load_buffer((const char *)data, size, "fuzz.yaml", &s) == CX_OK) {
        cx_idx cells = cx_study_cells(s);
        cx_cell_params p;
        for (cx_idx c = 0; c < cells && c < 64; c++)
            (void)cx_study_bind(s, c, &p);
        (void)cx_study_canonical(s);
        cx_study_destroy(&s);
    }
    cx_err_clear();
    return 0;
}
