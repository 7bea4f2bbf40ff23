/* coexist: build a positioned document tree from libyaml's event stream.
 *
 * The sweep file is YAML 1.1/1.2 block or flow syntax (Ben-Kiki, Evans & dot Net, "YAML Ain't
 * Markup Language (YAML) Version 1.2", 2009), tokenised and parsed by libyaml 0.2.5. libyaml's
 * marks are 0-based; the tree stores them 1-based as editors show them. Aliases are refused
 * because a sweep file has no use for them and they would let one value appear at two places
 * with one position. Duplicate keys are an error (YAML 1.2, Sec. 3.2.1.1: mapping keys are
 * unique), which libyaml itself does not check.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <yaml.h>

#include "coexist/error.h"
#include "study/yamltree_impl.h"

#define CX_YAML_DEPTH 64

void cx_ytree_free(cx_ynode *n)
{
    if (n == NULL)
        return;
    for (cx_idx i = 0; i < n->nkeys; i++)
        cx_ytree_free(n->key[i]);
    for (cx_idx i = 0; i < n->n; i++)
        cx_ytree_free(n->val[i]);
    free(n->key);
    free(n->val);
    free(n->text);
    free(n);
}

const cx_ynode *cx_ytree_get(const cx_ynode *map, const char *key)
{
    if (map == NULL || map->kind != CX_YN_MAP)
        return NULL;
    for (cx_idx i = 0; i < map->n; i++)
        if (strcmp(map->key[i]->text, key) == 0)
            return map->val[i];
    return NULL;
}

/* Make room for one more key and value in a container (grown by doubling). */
static int grow(cx_ynode *c)
{
    int rc = CX_OK;
    cx_ynode **k = NULL, **v = NULL;
    if (c->n < c->cap && c->nkeys < c->cap)
        return CX_OK;
    cx_idx cap = c->cap > 0 ? 2 * c->cap : 8;
    CX_CALLOC(v, cap);
    if (c->kind == CX_YN_MAP) {
        CX_CALLOC(k, cap);
        if (c->nkeys > 0)
            memcpy(k, c->key, (size_t)c->nkeys * sizeof *k);
        free(c->key);
        c->key = k;
        k = NULL;
    }
    if (c->n > 0)
        memcpy(v, c->val, (size_t)c->n * sizeof *v);
    free(c->val);
    c->val = v;
    v = NULL;
    c->cap = cap;
done:
    free(v);
    free(k);
    return rc;
}

static int new_node(int kind, const yaml_mark_t *m, cx_ynode **out)
{
    int rc = CX_OK;
    cx_ynode *n = NULL;
    CX_CALLOC(n, 1);
    n->kind = kind;
    n->line = (int)m->line + 1;
    n->col = (int)m->column + 1;
    *out = n;
done:
    return rc;
}

/* Attach a new node to the open container on top of the stack (or make it the root). The
 * node is owned by the tree as soon as this returns, whatever the outcome. */
static int attach(cx_ynode **stack, int depth, cx_ynode **root, cx_ynode *n, const char *name)
{
    int rc = CX_OK;
    if (depth == 0) {
        *root = n;
        return CX_OK;
    }
    cx_ynode *c = stack[depth - 1];
    rc = grow(c);
    if (rc != CX_OK) {
        cx_ytree_free(n);
        CX_RAISE(rc, NULL);
    }
    if (c->kind == CX_YN_SEQ) {
        c->val[c->n++] = n;
    } else if (c->nkeys == c->n) {
        c->key[c->nkeys++] = n;
        if (n->kind != CX_YN_SCALAR)
            CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: mapping key: expected a plain key, got a %s", name,
                     n->line, n->col, n->kind == CX_YN_MAP ? "mapping" : "list");
    } else {
        c->val[c->n++] = n;
    }
done:
    return rc;
}

/* Duplicate keys anywhere in the tree; `path` is the dotted key path of n. */
static int check_duplicates(const cx_ynode *n, const char *name, const char *path)
{
    int rc = CX_OK;
    char sub[512];
    if (n == NULL || n->kind == CX_YN_SCALAR)
        return CX_OK;
    for (cx_idx i = 0; i < n->n; i++) {
        if (n->kind == CX_YN_MAP) {
            const cx_ynode *k = n->key[i];
            for (cx_idx j = 0; j < i; j++)
                if (strcmp(n->key[j]->text, k->text) == 0)
                    CX_RAISE(CX_ERR_INVALID,
                             "%s:%d:%d: %s%s%s: expected each key once, got a second %s (the "
                             "first is at line %d)",
                             name, k->line, k->col, path, path[0] ? "." : "", k->text, k->text,
                             n->key[j]->line);
            snprintf(sub, sizeof sub, "%s%s%s", path, path[0] ? "." : "", k->text);
        } else {
            snprintf(sub, sizeof sub, "%s[%lld]", path, (long long)i + 1);
        }
        CX_TRY(check_duplicates(n->val[i], name, sub));
    }
done:
    return rc;
}

int cx_ytree_parse(const char *text, size_t len, const char *name, cx_ynode **root)
{
    int rc = CX_OK;
    yaml_parser_t parser;
    yaml_event_t ev;
    int have_parser = 0, have_event = 0, docs = 0, depth = 0, finished = 0;
    cx_ynode *stack[CX_YAML_DEPTH];
    cx_ynode *tree = NULL, *n = NULL;

    if (!yaml_parser_initialize(&parser))
        CX_RAISE(CX_ERR_NOMEM, "cannot initialise the YAML parser");
    have_parser = 1;
    yaml_parser_set_input_string(&parser, (const unsigned char *)text, len);
    while (!finished) {
        if (!yaml_parser_parse(&parser, &ev)) {
            if (parser.error == YAML_MEMORY_ERROR)
                CX_RAISE(CX_ERR_NOMEM, "out of memory parsing %s", name);
            CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: YAML syntax error: %s", name,
                     (int)parser.problem_mark.line + 1, (int)parser.problem_mark.column + 1,
                     parser.problem ? parser.problem : "unknown problem");
        }
        have_event = 1;
        switch (ev.type) {
        case YAML_STREAM_END_EVENT:
            finished = 1;
            break;
        case YAML_DOCUMENT_START_EVENT:
            if (++docs > 1)
                CX_RAISE(CX_ERR_INVALID,
                         "%s:%d:%d: document: expected one YAML document, got a second one", name,
                         (int)ev.start_mark.line + 1, (int)ev.start_mark.column + 1);
            break;
        case YAML_ALIAS_EVENT:
            CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: alias: expected a value, got an alias *%s", name,
                     (int)ev.start_mark.line + 1, (int)ev.start_mark.column + 1,
                     (const char *)ev.data.alias.anchor);
        case YAML_SCALAR_EVENT:
            CX_TRY(new_node(CX_YN_SCALAR, &ev.start_mark, &n));
            n->plain = ev.data.scalar.style == YAML_PLAIN_SCALAR_STYLE;
            n->text = cx_malloc_array(ev.data.scalar.length + 1, 1);
            if (n->text == NULL) {
                cx_ytree_free(n);
                CX_RAISE(CX_ERR_NOMEM, "out of memory parsing %s", name);
            }
            memcpy(n->text, ev.data.scalar.value, ev.data.scalar.length);
            n->text[ev.data.scalar.length] = '\0';
            CX_TRY(attach(stack, depth, &tree, n, name));
            break;
        case YAML_MAPPING_START_EVENT:
        case YAML_SEQUENCE_START_EVENT:
            if (depth == CX_YAML_DEPTH)
                CX_RAISE(CX_ERR_INVALID, "%s:%d:%d: nesting: expected at most %d levels, got more",
                         name, (int)ev.start_mark.line + 1, (int)ev.start_mark.column + 1,
                         CX_YAML_DEPTH);
            CX_TRY(new_node(ev.type == YAML_MAPPING_START_EVENT ? CX_YN_MAP : CX_YN_SEQ,
                            &ev.start_mark, &n));
            CX_TRY(attach(stack, depth, &tree, n, name));
            stack[depth++] = n;
            break;
        case YAML_MAPPING_END_EVENT:
        case YAML_SEQUENCE_END_EVENT:
            depth--;
            break;
        default:
            break;
        }
        yaml_event_delete(&ev);
        have_event = 0;
    }
    CX_TRY(check_duplicates(tree, name, ""));
    *root = tree;
    tree = NULL;
done:
    if (have_event)
        yaml_event_delete(&ev);
    if (have_parser)
        yaml_parser_delete(&parser);
    cx_ytree_free(tree);
    return rc;
}
