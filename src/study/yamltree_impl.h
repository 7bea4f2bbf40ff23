/* coexist: a small document tree (mappings, sequences, scalars) built from libyaml's event
 * stream, private to the study module. Every node keeps the 1-based line and column where it
 * starts so that a sweep-file error can point at the value the user wrote. */
#ifndef CX_STUDY_YAMLTREE_IMPL_H
#define CX_STUDY_YAMLTREE_IMPL_H

#include <stddef.h>

#include "coexist/config.h"

enum cx_ynode_kind { CX_YN_SCALAR = 0, CX_YN_MAP = 1, CX_YN_SEQ = 2 };

typedef struct cx_ynode cx_ynode;
struct cx_ynode {
    int kind;     /* enum cx_ynode_kind */
    int line;     /* 1-based */
    int col;      /* 1-based */
    int plain;    /* scalar written without quotes (only plain scalars can be numbers or bools) */
    char *text;   /* scalar text, NUL-terminated; NULL for containers */
    cx_idx n;     /* map: complete key/value pairs; seq: items */
    cx_idx nkeys; /* map: keys seen (n or n + 1 while a value is pending) */
    cx_idx cap;
    cx_ynode **key; /* map: scalar keys */
    cx_ynode **val; /* map: values; seq: items */
};

/* Parse one YAML document. `name` stands for the file in messages. A syntax error gives
 * CX_ERR_INVALID "NAME:LINE:COL: YAML syntax error: PROBLEM"; aliases, non-scalar keys, more
 * than one document and duplicate keys in a mapping are refused with positioned messages.
 * An empty document gives *root = NULL. OUT: *root, free with cx_ytree_free. */
int cx_ytree_parse(const char *text, size_t len, const char *name, cx_ynode **root /* out */);
void cx_ytree_free(cx_ynode *n);

/* The value of `key` in mapping `map`, or NULL (also when map is NULL or not a mapping). */
const cx_ynode *cx_ytree_get(const cx_ynode *map, const char *key);

#endif
