/* coexist: reading typed scalars out of the sweep-file tree, with positioned messages
 * "FILE:LINE:COL: KEY: expected WHAT, got VALUE". Numbers are plain scalars in YAML 1.2 core
 * schema decimal notation (Ben-Kiki, Evans & dot Net 2009, "YAML Version 1.2", Sec. 10.3.2);
 * a quoted "5" is a string, as YAML says. Booleans are true/false in the spellings of that
 * schema. No other published method is implemented here. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/error.h"
#include "study/study_impl.h"

void cx_sv_got(const cx_ynode *n, char *buf, size_t len)
{
    if (n == NULL)
        snprintf(buf, len, "nothing");
    else if (n->kind == CX_YN_MAP)
        snprintf(buf, len, "a mapping");
    else if (n->kind == CX_YN_SEQ)
        snprintf(buf, len, "a list");
    else if (n->plain && n->text[0] == '\0')
        snprintf(buf, len, "an empty value");
    else if (!n->plain)
        snprintf(buf, len, "the string \"%.200s\"", n->text);
    else
        snprintf(buf, len, "%.200s", n->text);
}

int cx_sv_fail(const char *file, const cx_ynode *n, const char *key, const char *what)
{
    char got[256];
    cx_sv_got(n, got, sizeof got);
    return CX_FAIL(CX_ERR_INVALID, "%s:%d:%d: %s: expected %s, got %s", file, n ? n->line : 1,
                   n ? n->col : 1, key, what, got);
}

/* Decimal notation only: digits, sign, point, exponent (no hex, inf or nan). */
static int decimal_text(const char *t)
{
    int digits = 0;
    for (const char *c = t; *c; c++) {
        if (*c >= '0' && *c <= '9')
            digits = 1;
        else if (strchr("+-.eE", *c) == NULL)
            return 0;
    }
    return digits;
}

int cx_sv_number(const char *file, const cx_ynode *n, const char *key, const char *what, double *v)
{
    if (n == NULL || n->kind != CX_YN_SCALAR || !n->plain || !decimal_text(n->text))
        return cx_sv_fail(file, n, key, what);
    char *end = NULL;
    errno = 0;
    double x = strtod(n->text, &end);
    if (end == n->text || *end != '\0' || errno == ERANGE)
        return cx_sv_fail(file, n, key, what);
    *v = x;
    return CX_OK;
}

int cx_sv_bool(const char *file, const cx_ynode *n, const char *key, int *v)
{
    static const char *const yes[] = {"true", "True", "TRUE"};
    static const char *const no[] = {"false", "False", "FALSE"};
    if (n != NULL && n->kind == CX_YN_SCALAR && n->plain)
        for (int i = 0; i < 3; i++) {
            if (strcmp(n->text, yes[i]) == 0) {
                *v = 1;
                return CX_OK;
            }
            if (strcmp(n->text, no[i]) == 0) {
                *v = 0;
                return CX_OK;
            }
        }
    return cx_sv_fail(file, n, key, "true or false");
}

int cx_sv_string(const char *file, const cx_ynode *n, const char *key, char *buf, size_t cap)
{
    char what[64];
    snprintf(what, sizeof what, "a text of at most %zu characters", cap - 1);
    if (n == NULL || n->kind != CX_YN_SCALAR || strlen(n->text) >= cap)
        return cx_sv_fail(file, n, key, what);
    memcpy(buf, n->text, strlen(n->text) + 1);
    return CX_OK;
}

int cx_sv_name(const char *file, const cx_ynode *n, const char *key, int dots, char *buf,
               size_t cap)
{
    char what[96];
    snprintf(what, sizeof what, "a name of 1 to %zu letters, digits, %s'-' or '_'", cap - 1,
             dots ? "'.', " : "");
    if (n == NULL || n->kind != CX_YN_SCALAR || n->text[0] == '\0' || strlen(n->text) >= cap)
        return cx_sv_fail(file, n, key, what);
    for (const char *c = n->text; *c; c++) {
        int ok = (*c >= 'a' && *c <= 'z') || (*c >= 'A' && *c <= 'Z') || (*c >= '0' && *c <= '9') ||
                 *c == '-' || *c == '_' || (dots && *c == '.');
        if (!ok)
            return cx_sv_fail(file, n, key, what);
    }
    memcpy(buf, n->text, strlen(n->text) + 1);
    return CX_OK;
}

/* Is `word` one of the comma-and-space separated words of `list`? */
static int in_list(const char *list, const char *word)
{
    size_t len = strlen(word);
    const char *p = list;
    while (*p) {
        const char *end = strchr(p, ',');
        size_t l = end ? (size_t)(end - p) : strlen(p);
        if (l == len && strncmp(p, word, len) == 0)
            return 1;
        if (!end)
            break;
        p = end + 1;
        while (*p == ' ')
            p++;
    }
    return 0;
}

int cx_sv_keys(const char *file, const cx_ynode *n, const char *section, const char *allowed)
{
    if (n == NULL || n->kind != CX_YN_MAP)
        return cx_sv_fail(file, n, section, "a mapping");
    for (cx_idx i = 0; i < n->n; i++)
        if (!in_list(allowed, n->key[i]->text))
            return CX_FAIL(CX_ERR_INVALID, "%s:%d:%d: %s: expected one of the keys %s, got %.200s",
                           file, n->key[i]->line, n->key[i]->col, section, allowed,
                           n->key[i]->text);
    return CX_OK;
}

int cx_sv_numbers(const char *file, const cx_ynode *n, const char *key, int min, int max, double *v,
                  int *count)
{
    int rc = CX_OK;
    char what[64];
    if (min == max)
        snprintf(what, sizeof what, "a list of %d numbers", min);
    else
        snprintf(what, sizeof what, "a list of %d to %d numbers", min, max);
    if (n == NULL || n->kind != CX_YN_SEQ || n->n < min || n->n > max)
        return cx_sv_fail(file, n, key, what);
    for (cx_idx i = 0; i < n->n; i++)
        CX_TRY(cx_sv_number(file, n->val[i], key, "a number", &v[i]));
    *count = (int)n->n;
done:
    return rc;
}
