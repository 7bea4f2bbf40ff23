/* coexist: the error trace (see include/coexist/error.h) and checked allocation. */
#include <pthread.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"

#define CX_TRACE_DEPTH 32
#define CX_TRACE_MSG   1024

typedef struct cx_frame {
    int code;
    const char *file;
    int line;
    const char *func;
    char msg[CX_TRACE_MSG];
} cx_frame;

/* Process-global by design (see the note in error.h). The engine's rank 0 may compute cells on a
 * second thread while its main thread coordinates, so pushes are serialised by a mutex; both
 * threads' frames land in the one trace that main() prints. */
static cx_frame trace[CX_TRACE_DEPTH];
static int trace_len;
static pthread_mutex_t trace_lock = PTHREAD_MUTEX_INITIALIZER;

int cx_err_push(int code, const char *file, int line, const char *func, const char *fmt, ...)
{
    pthread_mutex_lock(&trace_lock);
    if (trace_len < CX_TRACE_DEPTH) {
        cx_frame *f = &trace[trace_len++];
        f->code = code;
        f->file = file;
        f->line = line;
        f->func = func;
        f->msg[0] = '\0';
        if (fmt != NULL) {
            va_list ap;
            va_start(ap, fmt);
            vsnprintf(f->msg, sizeof f->msg, fmt, ap);
            va_end(ap);
        }
    }
    pthread_mutex_unlock(&trace_lock);
    return code;
}

const char *cx_err_message(void)
{
    for (int i = 0; i < trace_len; i++)
        if (trace[i].msg[0] != '\0')
            return trace[i].msg;
    return "";
}

int cx_err_code(void)
{
    return trace_len > 0 ? trace[0].code : CX_OK;
}

void cx_err_print(const char *prog, int verbose)
{
    int printed = 0;
    for (int i = 0; i < trace_len; i++) {
        const cx_frame *f = &trace[i];
        if (f->msg[0] != '\0') {
            fprintf(stderr, "%s: %s%s\n", prog, printed ? "  while " : "error: ", f->msg);
            printed = 1;
        }
        if (verbose)
            fprintf(stderr, "    at %s:%d (%s) [%s]\n", f->file, f->line, f->func,
                    cx_status_name(f->code));
    }
    if (!printed && trace_len > 0)
        fprintf(stderr, "%s: error: %s\n", prog, cx_status_name(trace[0].code));
}

void cx_err_clear(void)
{
    pthread_mutex_lock(&trace_lock);
    trace_len = 0;
    pthread_mutex_unlock(&trace_lock);
}

const char *cx_status_name(int code)
{
    switch (code) {
    case CX_OK:
        return "success";
    case CX_ERR_NOMEM:
        return "out of memory";
    case CX_ERR_INVALID:
        return "invalid input";
    case CX_ERR_IO:
        return "input/output error";
    case CX_ERR_HDF5:
        return "HDF5 error";
    case CX_ERR_MPI:
        return "MPI error";
    case CX_ERR_LAPACK:
        return "LAPACK illegal argument";
    case CX_ERR_NUMERIC:
        return "numerical failure";
    case CX_ERR_MISMATCH:
        return "file belongs to a different study";
    case CX_ERR_INTERNAL:
        return "internal error";
    case CX_ERR_INTERRUPTED:
        return "interrupted";
    default:
        return "unknown error";
    }
}

/* Fault injection, in a build with CX_FAULT_INJECTION defined (SQLite's test_malloc idea):
 * CX_FAIL_ALLOC=N fails the Nth allocation; CX_FAIL_H5WRITE=N makes the Nth write of a cube (a
 * dataset or attribute write, or a flush; src/engine/cube.c) fail as if HDF5 had refused it. */
#ifdef CX_FAULT_INJECTION
typedef struct fault_counter {
    const char *var; /* the environment variable that names N */
    long count;
    long fail_at; /* -1: never */
    int checked;
} fault_counter;

/* 1 when this event is the Nth of its kind. */
static int fault_hit(fault_counter *f)
{
    if (!f->checked) {
        const char *e = getenv(f->var);
        f->fail_at = e ? strtol(e, NULL, 10) : -1;
        f->checked = 1;
    }
    return ++f->count == f->fail_at;
}

static fault_counter alloc_faults = {"CX_FAIL_ALLOC", 0, -1, 0};
static fault_counter write_faults = {"CX_FAIL_H5WRITE", 0, -1, 0};

static int alloc_should_fail(void)
{
    return fault_hit(&alloc_faults);
}

int cx_fault_hdf5_write(void)
{
    return fault_hit(&write_faults);
}
#else
static int alloc_should_fail(void)
{
    return 0;
}

int cx_fault_hdf5_write(void)
{
    return 0;
}
#endif

void *cx_malloc_array(size_t n, size_t size)
{
    if (n == 0 || size == 0)
        return NULL;
    if (n > SIZE_MAX / size || alloc_should_fail())
        return NULL;
    return malloc(n * size);
}

void *cx_calloc_array(size_t n, size_t size)
{
    if (n == 0 || size == 0)
        return NULL;
    if (n > SIZE_MAX / size || alloc_should_fail())
        return NULL;
    return calloc(n, size);
}
