/* coexist task module, private: helpers shared by the files of src/task/ (not a public API). */
#ifndef COEXIST_TASK_IMPL_H
#define COEXIST_TASK_IMPL_H

#include "coexist/task.h"

/* Samples of a trajectory file at spacing h, linearly interpolated from the file's own samples
 * (see trajfile.c). t->dim must equal the file's width. OUT: out (n * dim). */
int cx_task_file_series(const cx_task_spec *t, double h, cx_idx n, double *out /* out */);

#endif
