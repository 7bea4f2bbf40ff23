/* coexist: error codes and the error trace.
 *
 * Every fallible function returns an int from enum cx_status; CX_OK is 0. A failure is pushed
 * onto a small per-process trace with file, line and function (PETSc's error-trace idea), and
 * passed up with CX_TRY. Only main() prints the trace and exits; library code never calls exit,
 * abort or MPI_Abort, because a library that kills one rank leaves the others waiting in a
 * collective.
 *
 * The trace is process-global state, written only on the failure path; each MPI rank is one
 * process, and pushes are serialised by a mutex because rank 0 may compute on a second thread.
 */
#ifndef COEXIST_ERROR_H
#define COEXIST_ERROR_H

#include <stdarg.h>

enum cx_status {
    CX_OK = 0,
    CX_ERR_NOMEM = 1,       /* an allocation failed */
    CX_ERR_INVALID = 2,     /* bad input from the user: sweep file, command line, data file */
    CX_ERR_IO = 3,          /* a file could not be opened, read or written */
    CX_ERR_HDF5 = 4,        /* an HDF5 call failed */
    CX_ERR_MPI = 5,         /* an MPI call failed */
    CX_ERR_LAPACK = 6,      /* LAPACK reported an illegal argument (info < 0): a bug */
    CX_ERR_NUMERIC = 7,     /* a numerical method did not converge or met a singular matrix */
    CX_ERR_MISMATCH = 8,    /* an existing file belongs to a different study */
    CX_ERR_INTERNAL = 9,    /* a broken internal invariant: a bug */
    CX_ERR_INTERRUPTED = 10 /* stopped by a signal before the work was finished */
};

/* Push one frame onto the error trace. `code` is returned, so a caller can write
 * `return cx_err_push(CX_ERR_INVALID, __FILE__, __LINE__, __func__, "...")`. Not collective. */
int cx_err_push(int code, const char *file, int line, const char *func, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 5, 6)))
#endif
    ;

/* The user-facing message of the first (innermost) frame, or "" when the trace is empty. */
const char *cx_err_message(void);

/* The code of the first frame, or CX_OK. */
int cx_err_code(void);

/* Print the whole trace to stderr, innermost first; `verbose` adds file:line:function. */
void cx_err_print(const char *prog, int verbose);

/* Empty the trace (after a failure that the caller handled, e.g. an expected refusal). */
void cx_err_clear(void);

/* A short name for a status code, e.g. "invalid input". */
const char *cx_status_name(int code);

/* Raise an error with a message. */
#define CX_FAIL(code, ...) cx_err_push((code), __FILE__, __LINE__, __func__, __VA_ARGS__)

/* Evaluate a call; on failure add a frame and jump to the function's `done` label with `rc`
 * set. Functions that use it declare `int rc = CX_OK;` and have a `done:` label. */
#define CX_TRY(call)                                                                               \
    do {                                                                                           \
        rc = (call);                                                                               \
        if (rc != CX_OK) {                                                                         \
            cx_err_push(rc, __FILE__, __LINE__, __func__, NULL);                                   \
            goto done;                                                                             \
        }                                                                                          \
    } while (0)

/* Raise an error and jump to `done`. */
#define CX_RAISE(code, ...)                                                                        \
    do {                                                                                           \
        rc = cx_err_push((code), __FILE__, __LINE__, __func__, __VA_ARGS__);                       \
        goto done;                                                                                 \
    } while (0)

/* A contract check that stays on in release builds. */
#define CX_REQUIRE(cond, code, ...)                                                                \
    do {                                                                                           \
        if (!(cond))                                                                               \
            CX_RAISE((code), __VA_ARGS__);                                                         \
    } while (0)

/* Allocate `n` objects of `*ptr`'s type into ptr, or raise CX_ERR_NOMEM. */
#define CX_ALLOC(ptr, n)                                                                           \
    do {                                                                                           \
        (ptr) = cx_malloc_array((size_t)(n), sizeof(*(ptr)));                                      \
        if ((ptr) == NULL && (n) > 0)                                                              \
            CX_RAISE(CX_ERR_NOMEM, "out of memory allocating %zu bytes",                           \
                     (size_t)(n) * sizeof(*(ptr)));                                                \
    } while (0)

/* Room for n objects in a buffer `ptr` that holds `cap` of them (a reused workspace buffer):
 * when it is too small, free it and allocate n, contents not kept, or raise CX_ERR_NOMEM (ptr
 * then NULL and cap 0). Needs <stdlib.h>. */
#define CX_RESERVE(ptr, cap, n)                                                                    \
    do {                                                                                           \
        if ((cap) < (n)) {                                                                         \
            free(ptr);                                                                             \
            (ptr) = NULL;                                                                          \
            (cap) = 0;                                                                             \
            CX_ALLOC(ptr, n);                                                                      \
            (cap) = (n);                                                                           \
        }                                                                                          \
    } while (0)

/* Zeroed variant of CX_ALLOC. */
#define CX_CALLOC(ptr, n)                                                                          \
    do {                                                                                           \
        (ptr) = cx_calloc_array((size_t)(n), sizeof(*(ptr)));                                      \
        if ((ptr) == NULL && (n) > 0)                                                              \
            CX_RAISE(CX_ERR_NOMEM, "out of memory allocating %zu bytes",                           \
                     (size_t)(n) * sizeof(*(ptr)));                                                \
    } while (0)

#include <stddef.h>

/* Allocation goes through these two so that a fault-injection build can fail the Nth one.
 * Both check n * size for overflow and return NULL for it. Free with free(). */
/* 1 when this HDF5 write is to fail (a fault-injection build, CX_FAIL_H5WRITE=N), else 0. */
int cx_fault_hdf5_write(void);
void *cx_malloc_array(size_t n, size_t size);
void *cx_calloc_array(size_t n, size_t size);

#endif
