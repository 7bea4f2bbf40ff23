/* coexist engine: the default way to compute a cell, through the study (cx_study_bind) and the
 * cell pipeline (cx_cell_compute_group) with one cached workspace per computing thread. A cell
 * whose parameters do not bind is a failed cell (CX_CELL_FAILED_INVALID), not an error.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/engine.h"
#include "coexist/error.h"

typedef struct cell_state {
    cx_cell_ws *ws;
    cx_cell_params params[CX_CELL_GROUP];
} cell_state;

static int cell_create(void **out)
{
    int rc = CX_OK;
    cell_state *st = NULL;
    CX_CALLOC(st, 1);
    CX_TRY(cx_cell_ws_create(&st->ws));
    *out = st;
    st = NULL;
done:
    free(st);
    return rc;
}

static void cell_destroy(void **p)
{
    cell_state *st = *p;
    if (st == NULL)
        return;
    cx_cell_ws_destroy(&st->ws);
    free(st);
    *p = NULL;
}

static void failed_invalid(cx_idx cell, cx_cell_result *out)
{
    memset(out, 0, sizeof *out);
    out->cell = cell;
    out->status = CX_CELL_FAILED_INVALID;
    out->multifunctional = 0;
    out->untrained = 0;
    out->rho_unscaled = out->wout_norm = out->wout_square_norm = NAN;
}

static int cell_compute_group(void *p, const cx_study *s, const cx_plan *plan, const int64_t *cells,
                              int n, cx_cell_result *out, int *used)
{
    int rc = CX_OK;
    cell_state *st = p;
    (void)plan;
    CX_REQUIRE(n >= 1 && n <= CX_CELL_GROUP, CX_ERR_INVALID, "cell group of %d cells", n);
    /* bind the cells up to the first that does not bind; that one alone is a failed cell */
    int nb = 0;
    for (; nb < n; nb++) {
        int brc = cx_study_bind(s, (cx_idx)cells[nb], &st->params[nb]);
        if (brc == CX_ERR_INVALID) {
            cx_err_clear();
            break;
        }
        CX_TRY(brc);
    }
    if (nb == 0) {
        failed_invalid((cx_idx)cells[0], out);
        *used = 1;
        return CX_OK;
    }
    const cx_cell_params *pp[CX_CELL_GROUP];
    cx_idx ids[CX_CELL_GROUP];
    for (int g = 0; g < nb; g++) {
        pp[g] = &st->params[g];
        ids[g] = (cx_idx)cells[g];
    }
    CX_TRY(cx_cell_compute_group(st->ws, pp, ids, nb, out, used));
    for (int g = 0; g < *used; g++)
        out[g].cell = ids[g];
done:
    return rc;
}

static int cell_compute(void *p, const cx_study *s, const cx_plan *plan, cx_idx cell,
                        cx_cell_result *out)
{
    int used = 0;
    const int64_t c = cell;
    return cell_compute_group(p, s, plan, &c, 1, out, &used);
}

static void cell_counts(const void *p, cx_cell_counts *c)
{
    const cell_state *st = p;
    cx_cell_ws_counts(st->ws, c);
}

static const cx_engine_ops cell_ops = {cell_create, cell_destroy, cell_compute, cell_counts,
                                       cell_compute_group};

const cx_engine_ops *cx_engine_cell_ops(void)
{
    return &cell_ops;
}
