/* coexist: the built-in three-dimensional flows, their parameters, standard values and starts.
 *
 * Equations as published (x = (x, y, z)):
 *   lorenz      x' = s (y - x), y' = x (r - z) - y, z' = x y - b z; s, r, b = 10, 28, 8/3.
 *               Lorenz 1963, "Deterministic nonperiodic flow", J. Atmos. Sci. 20, 130, Eq. (25).
 *   rossler     x' = -y - z, y' = x + a y, z' = b + z (x - c); a, b, c = 0.2, 0.2, 5.7.
 *               Rossler 1976, "An equation for continuous chaos", Phys. Lett. A 57, 397.
 *   chen        x' = a (y - x), y' = (c - a) x - x z + c y, z' = x y - b z; a, b, c = 35, 3, 28.
 *               Chen & Ueta 1999, "Yet another chaotic attractor", Int. J. Bifurc. Chaos 9, 1465.
 *   thomas      x' = sin y - b x, y' = sin z - b y, z' = sin x - b z; b = 0.208186.
 *               Thomas 1999, "Deterministic chaos seen in terms of feedback circuits: analysis,
 *               synthesis, labyrinth chaos", Int. J. Bifurc. Chaos 9, 1889.
 *   halvorsen   x' = -a x - 4 y - 4 z - y^2 and its cyclic permutations (y' = -a y - 4 z - 4 x
 *               - z^2, z' = -a z - 4 x - 4 y - x^2); a = 1.27, the value in Sprott, "Elegant
 *               Chaos", World Scientific 2010, and in Sprott, "Chaos and Time-Series Analysis",
 *               Oxford 2003 (value from memory; the published exponents 0.7899, 0, -4.5999 sum to
 *               the divergence -3a = -3.81, which supports it).
 *   aizawa      x' = (z - b) x - d y, y' = d x + (z - b) y,
 *               z' = c + a z - z^3 / 3 - (x^2 + y^2)(1 + e z) + f z x^3;
 *               a..f = 0.95, 0.7, 0.6, 3.5, 0.25, 0.1. The system is credited to Aizawa and
 *               Langford (Langford 1984, "Numerical studies of torus bifurcations", Int. Ser.
 *               Numer. Math. 70, 285); the form and values are the ones in common use.
 *   sprott-b    x' = y z, y' = x - y, z' = 1 - x y (no parameters).
 *               Sprott 1994, "Some simple chaotic flows", Phys. Rev. E 50, R647, case B.
 *   sprott-jerk x''' + A x'' - x'^2 + x = 0 written as x' = y, y' = z, z' = -A z + y^2 - x;
 *               A = 2.017. Sprott 1997, "Simplest dissipative chaotic flow", Phys. Lett. A 228,
 *               271, Eq. (1).
 *   chua        x' = alpha (y - x - g(x)), y' = x - y + z, z' = -beta y, with the piecewise-linear
 *               diode g(x) = m1 x + (m0 - m1)(|x + 1| - |x - 1|) / 2; alpha, beta, m0, m1 =
 *               15.6, 28, -8/7, -5/7 (dimensionless form of Matsumoto, Chua & Komuro 1985, "The
 *               double scroll", IEEE Trans. Circuits Syst. 32, 797; these values are the double
 *               scroll set in common use, from memory).
 * Start points lie in the basin of the chaotic attractor (checked by tests/test_task.c: bounded
 * and a positive largest Lyapunov exponent from there).
 */
#include <math.h>
#include <string.h>

#include "coexist/task.h"

typedef struct flow_info {
    const char *name;
    int npar;
    const char *par_name[CX_MAX_FLOW_PAR];
    double par[CX_MAX_FLOW_PAR];
    double x0[3];
} flow_info;

static const flow_info flows[CX_FLOW_COUNT] = {
    [CX_FLOW_LORENZ] =
        {"lorenz", 3, {"sigma", "rho", "beta"}, {10.0, 28.0, 8.0 / 3.0}, {1.0, 1.0, 20.0}},
    [CX_FLOW_ROSSLER] = {"rossler", 3, {"a", "b", "c"}, {0.2, 0.2, 5.7}, {1.0, -1.0, 0.1}},
    [CX_FLOW_CHEN] = {"chen", 3, {"a", "b", "c"}, {35.0, 3.0, 28.0}, {-3.0, 2.0, 20.0}},
    [CX_FLOW_THOMAS] = {"thomas", 1, {"b"}, {0.208186}, {0.1, 0.0, 0.0}},
    [CX_FLOW_HALVORSEN] = {"halvorsen", 1, {"a"}, {1.27}, {-5.0, 0.0, 0.0}},
    [CX_FLOW_AIZAWA] = {"aizawa",
                        6,
                        {"a", "b", "c", "d", "e", "f"},
                        {0.95, 0.7, 0.6, 3.5, 0.25, 0.1},
                        {0.1, 0.0, 0.0}},
    [CX_FLOW_SPROTT_B] = {"sprott-b", 0, {NULL}, {0.0}, {0.1, 0.0, 0.0}},
    [CX_FLOW_SPROTT_JERK] = {"sprott-jerk", 1, {"a"}, {2.017}, {0.0, 0.0, 1.0}},
    [CX_FLOW_CHUA] = {"chua",
                      4,
                      {"alpha", "beta", "m0", "m1"},
                      {15.6, 28.0, -8.0 / 7.0, -5.0 / 7.0},
                      {0.7, 0.0, 0.0}},
};

const char *cx_flow_name(int flow)
{
    if (flow < 0 || flow >= CX_FLOW_COUNT)
        return NULL;
    return flows[flow].name;
}

int cx_flow_lookup(const char *name)
{
    if (name == NULL)
        return -1;
    for (int i = 0; i < CX_FLOW_COUNT; i++)
        if (strcmp(name, flows[i].name) == 0)
            return i;
    return -1;
}

int cx_flow_npar(int flow)
{
    if (flow < 0 || flow >= CX_FLOW_COUNT)
        return 0;
    return flows[flow].npar;
}

const char *cx_flow_par_name(int flow, int i)
{
    if (flow < 0 || flow >= CX_FLOW_COUNT || i < 0 || i >= flows[flow].npar)
        return NULL;
    return flows[flow].par_name[i];
}

void cx_flow_defaults(int flow, double *par, double *x0)
{
    for (int i = 0; i < CX_MAX_FLOW_PAR; i++)
        par[i] = 0.0;
    for (int i = 0; i < 3; i++)
        x0[i] = 0.0;
    if (flow < 0 || flow >= CX_FLOW_COUNT)
        return;
    for (int i = 0; i < flows[flow].npar; i++)
        par[i] = flows[flow].par[i];
    for (int i = 0; i < 3; i++)
        x0[i] = flows[flow].x0[i];
}

/* The fields are written out one per flow so that each line can be read against its paper. */
void cx_flow_field(void *ctx, double t, const double *x, double *dxdt)
{
    (void)t;
    const cx_flow_ctx *c = ctx;
    const double *p = c->par;
    const double X = x[0], Y = x[1], Z = x[2];
    switch (c->flow) {
    case CX_FLOW_LORENZ:
        dxdt[0] = p[0] * (Y - X);
        dxdt[1] = X * (p[1] - Z) - Y;
        dxdt[2] = X * Y - p[2] * Z;
        break;
    case CX_FLOW_ROSSLER:
        dxdt[0] = -Y - Z;
        dxdt[1] = X + p[0] * Y;
        dxdt[2] = p[1] + Z * (X - p[2]);
        break;
    case CX_FLOW_CHEN:
        dxdt[0] = p[0] * (Y - X);
        dxdt[1] = (p[2] - p[0]) * X - X * Z + p[2] * Y;
        dxdt[2] = X * Y - p[1] * Z;
        break;
    case CX_FLOW_THOMAS:
        dxdt[0] = sin(Y) - p[0] * X;
        dxdt[1] = sin(Z) - p[0] * Y;
        dxdt[2] = sin(X) - p[0] * Z;
        break;
    case CX_FLOW_HALVORSEN:
        dxdt[0] = -p[0] * X - 4.0 * Y - 4.0 * Z - Y * Y;
        dxdt[1] = -p[0] * Y - 4.0 * Z - 4.0 * X - Z * Z;
        dxdt[2] = -p[0] * Z - 4.0 * X - 4.0 * Y - X * X;
        break;
    case CX_FLOW_AIZAWA:
        dxdt[0] = (Z - p[1]) * X - p[3] * Y;
        dxdt[1] = p[3] * X + (Z - p[1]) * Y;
        dxdt[2] = p[2] + p[0] * Z - Z * Z * Z / 3.0 - (X * X + Y * Y) * (1.0 + p[4] * Z) +
                  p[5] * Z * X * X * X;
        break;
    case CX_FLOW_SPROTT_B:
        dxdt[0] = Y * Z;
        dxdt[1] = X - Y;
        dxdt[2] = 1.0 - X * Y;
        break;
    case CX_FLOW_SPROTT_JERK:
        dxdt[0] = Y;
        dxdt[1] = Z;
        dxdt[2] = -p[0] * Z + Y * Y - X;
        break;
    case CX_FLOW_CHUA: {
        const double g = p[3] * X + 0.5 * (p[2] - p[3]) * (fabs(X + 1.0) - fabs(X - 1.0));
        dxdt[0] = p[0] * (Y - X - g);
        dxdt[1] = X - Y + Z;
        dxdt[2] = -p[1] * Y;
        break;
    }
    default:
        /* An unknown id is rejected by cx_task_series before integration; NaN makes any other
         * misuse visible instead of silently integrating zero. */
        dxdt[0] = dxdt[1] = dxdt[2] = NAN;
        break;
    }
}
