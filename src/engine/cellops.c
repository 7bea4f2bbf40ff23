/* coexist engine: the default way to compute a cell, through the study (cx_study_bind) and the
 * cell pipeline (cx_cell_compute) with one cached workspace per computing thread. A cell whose
 * parameters do not bind is a failed cell (CX_CELL_FAILED_INVALID), not an error.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/engine.h"
#include "coexist/error.h"

typedef struct cell_state {
    cx_cell_ws *ws;
    cx_cell_params params;
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

static int cell_compute(void *p, const cx_study *s, const cx_plan *plan, cx_idx cell,
                        cx_cell_result *out)
{
    int rc = CX_OK;
    cell_state *st = p;
    (void)plan;
    int brc = cx_study_bind(s, cell, &st->params);
    if (brc == CX_ERR_INVALID) {
        cx_err_clear();
        memset(out, 0, sizeof *out);
        out->cell = cell;
        out->status = CX_CELL_FAILED_INVALID;
        out->multifunctional = 0;
        out->untrained = 0;
        out->rho_unscaled = out->wout_norm = out->wout_square_norm = NAN;
        return CX_OK;
    }
    CX_TRY(brc);
    CX_TRY(cx_cell_compute(st->ws, &st->params, cell, out));
    out->cell = cell;
done:
    return rc;
}

static void cell_counts(const void *p, cx_cell_counts *c)
{
    const cell_state *st = p;
    cx_cell_ws_counts(st->ws, c);
}

static const cx_engine_ops cell_ops = {cell_create, cell_destroy, cell_compute, cell_counts};

const cx_engine_ops *cx_engine_cell_ops(void)
{
    return &cell_ops;
}
