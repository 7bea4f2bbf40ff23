/* coexist: the classical fourth-order Runge-Kutta step.
 *
 * For dx/dt = f(t, x) and a step h:
 *   k1 = f(t, x), k2 = f(t + h/2, x + h/2 k1), k3 = f(t + h/2, x + h/2 k2), k4 = f(t + h, x + h
 * k3), x(t + h) = x + h/6 (k1 + 2 k2 + 2 k3 + k4), with local error O(h^5) and global error O(h^4)
 * (Kutta 1901; Hairer, Norsett & Wanner, "Solving Ordinary Differential Equations I", Springer
 * 1993, Sec. II.1, Table 1.2; Butcher, "Numerical Methods for Ordinary Differential Equations",
 * Wiley 2003, Sec. 32).
 *
 * The stages live in one block allocated by cx_rk4_alloc, so a step never allocates: the
 * integrator runs inside per-cell loops that must not touch the allocator.
 */
#include <stdlib.h>

#include "coexist/error.h"
#include "coexist/task.h"

struct cx_rk4 {
    cx_idx n;
    double *block; /* 5 n doubles: k1, k2, k3, k4, the stage argument */
};

int cx_rk4_alloc(cx_rk4 **ws, cx_idx n)
{
    int rc = CX_OK;
    cx_rk4 *w = NULL;
    CX_REQUIRE(ws != NULL, CX_ERR_INTERNAL, "cx_rk4_alloc: NULL output");
    CX_REQUIRE(n > 0, CX_ERR_INVALID, "RK4 workspace: dimension %lld must be positive",
               (long long)n);
    CX_CALLOC(w, 1);
    CX_CALLOC(w->block, 5 * n);
    w->n = n;
    *ws = w;
    w = NULL;
done:
    if (w != NULL) {
        free(w->block);
        free(w);
    }
    return rc;
}

void cx_rk4_free(cx_rk4 **ws)
{
    if (ws == NULL || *ws == NULL)
        return;
    free((*ws)->block);
    free(*ws);
    *ws = NULL;
}

void cx_rk4_step(cx_rk4 *ws, cx_field_fn f, void *ctx, double t, double h, double *x)
{
    const cx_idx n = ws->n;
    double *k1 = ws->block;
    double *k2 = k1 + n;
    double *k3 = k2 + n;
    double *k4 = k3 + n;
    double *y = k4 + n;
    const double h2 = 0.5 * h;

    f(ctx, t, x, k1);
    for (cx_idx i = 0; i < n; i++)
        y[i] = x[i] + h2 * k1[i];
    f(ctx, t + h2, y, k2);
    for (cx_idx i = 0; i < n; i++)
        y[i] = x[i] + h2 * k2[i];
    f(ctx, t + h2, y, k3);
    for (cx_idx i = 0; i < n; i++)
        y[i] = x[i] + h * k3[i];
    f(ctx, t + h, y, k4);
    for (cx_idx i = 0; i < n; i++)
        x[i] += (h / 6.0) * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
}
