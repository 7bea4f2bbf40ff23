/* coexist tests: one grid cell end to end (study -> cell pipeline): determinism, stage reuse,
 * the mirror-symmetry result through the whole pipeline, and the spectral-radius window of the
 * demo sweep. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "coexist/cell.h"
#include "coexist/error.h"
#include "coexist/study.h"
#include "testlib.h"
#include "cell/cell_impl.h"

void openblas_set_num_threads(int num_threads);

static const char *base_yaml =
    "study: {name: cell-test, seed: 4093}\n"
    "reservoir: {nodes: 120, mean_degree: 3, rate: 5.0, input_scaling: 0.15, spectral_radius: "
    "1.1}\n"
    "training: {dt: 0.02, washout: 10, length: 40, ridge: 0.5}\n"
    "probe: {horizon: 40, tail: 15, random_starts: 2, start_mode: drive-point, drive_time: 2}\n"
    "tasks:\n"
    "  - {kind: cycle, name: left, centre: [-1.3, 0.2], radius: 1.05, speed: 2.2}\n"
    "  - {kind: cycle, name: right, centre: [1.1, -0.35], radius: 1.6, speed: -1.4}\n"
    "axes:\n"
    "  training.ridge: [0.5, 2.385]\n"
    "  training.blend: [0.35, 0.5]\n"
    "  reservoir.spectral_radius: [0.8, 1.1]\n";

static cx_study *load(const char *text)
{
    cx_study *s = NULL;
    if (cx_study_load_buffer(text, strlen(text), "inline.yaml", &s) != CX_OK) {
        cx_err_print("test_cell", 1);
        return NULL;
    }
    return s;
}

static int compute(cx_cell_ws *ws, const cx_study *s, cx_idx cell, cx_cell_result *r)
{
    cx_cell_params p;
    int rc = cx_study_bind(s, cell, &p);
    if (rc == CX_OK)
        rc = cx_cell_compute(ws, &p, cell, r);
    if (rc != CX_OK)
        cx_err_print("test_cell", 1);
    return rc;
}

/* Results except the wall-clock timings. */
static int same_result(const cx_cell_result *a, const cx_cell_result *b)
{
    cx_cell_result x = *a, y = *b;
    memset(&x.time, 0, sizeof x.time);
    memset(&y.time, 0, sizeof y.time);
    return memcmp(&x, &y, sizeof x) == 0;
}

static void test_determinism_and_reuse(void)
{
    cx_study *s = load(base_yaml);
    cx_test_true("base study loads", s != NULL, "", "");
    if (s == NULL)
        return;
    cx_cell_ws *ws = NULL, *ws2 = NULL;
    cx_cell_ws_create(&ws);
    cx_cell_ws_create(&ws2);
    cx_idx cells = cx_study_cells(s);
    cx_cell_result *res = calloc((size_t)cells, sizeof *res);
    int ok = 1;
    /* Row-major order: spectral radius varies fastest, so this visits drive keys in turn. */
    for (cx_idx c = 0; c < cells && ok; c++)
        ok = compute(ws, s, c, &res[c]) == CX_OK;
    cx_test_true("all 8 cells computed", ok, "", "");
    cx_cell_counts n;
    cx_cell_ws_counts(ws, &n);
    char d[160];
    snprintf(d, sizeof d, "networks %lld, spectral radii %lld, drives %lld, solves %lld",
             (long long)n.networks, (long long)n.spectral_radii, (long long)n.drives,
             (long long)n.solves);
    /* In this visiting order the drive key changes at every cell (rho is fastest) but the network
     * key never does: one network draw serves every spectral radius (rescaling is exact). */
    cx_test_true("one network draw and one spectral radius for the whole grid",
                 n.networks == 1 && n.spectral_radii == 1, d, "stage table in cell.h");
    cx_test_true("one solve per cell", n.solves == cells, d, "stage table in cell.h");

    /* Visit cells sharing a drive key consecutively: ridge and blend vary, rho fixed. */
    cx_cell_result r;
    cx_idx coords[3], same_drive[4];
    int k = 0;
    for (cx_idx c = 0; c < cells; c++) {
        cx_study_coords(s, c, coords);
        if (coords[2] == 1)
            same_drive[k++] = c;
    }
    for (int i = 0; i < k; i++)
        ok = ok && compute(ws2, s, same_drive[i], &r) == CX_OK &&
             same_result(&r, &res[same_drive[i]]);
    cx_cell_ws_counts(ws2, &n);
    snprintf(d, sizeof d, "drives %lld for %d cells of one drive key", (long long)n.drives, k);
    cx_test_true("cells sharing a drive key drive once", n.drives == 1 && k == 4, d,
                 "stage table in cell.h");
    cx_test_true("a reused drive gives results bit-identical to a fresh one", ok, "memcmp",
                 "reproducibility contract, DESIGN.md");
    /* The step counters (the benchmark's work count): one drive of 2 tasks over washout +
     * length, each cell's random starts driven for probe.drive_time, and every closed-loop run
     * to the horizon unless it diverged or settled on a fixed point (analytic count). */
    {
        cx_cell_params p;
        int64_t drive = -1, probe = -1;
        cx_cell_ws_steps(ws2, &drive, &probe);
        ok = cx_study_bind(s, same_drive[0], &p) == CX_OK;
        const int64_t nn = p.net.nodes, h = cx_cell_steps(p.probe.horizon, p.train.dt);
        const int64_t want_drive = (int64_t)p.ntasks *
                                       (cx_cell_steps(p.train.washout, p.train.dt) +
                                        cx_cell_steps(p.train.length, p.train.dt)) *
                                       nn +
                                   (p.probe.start_mode == CX_START_DRIVE_POINT
                                        ? (int64_t)k * p.probe.random_starts *
                                              cx_cell_steps(p.probe.drive_time, p.train.dt) * nn
                                        : 0);
        int64_t lo = 0, hi = 0;
        for (int i = 0; i < k; i++)
            for (int j = 0; j < res[same_drive[i]].nruns; j++) {
                const int out = res[same_drive[i]].runs[j].outcome;
                hi += h * nn;
                lo += out == CX_OUT_DIVERGED || out == CX_OUT_FIXED_POINT ? 0 : h * nn;
            }
        snprintf(d, sizeof d, "drive %lld (expected %lld), probe %lld in [%lld, %lld]",
                 (long long)drive, (long long)want_drive, (long long)probe, (long long)lo,
                 (long long)hi);
        cx_test_true("step counters: drive steps counted exactly, closed-loop steps bounded",
                     ok && drive == want_drive && probe >= lo && probe <= hi && hi > 0, d,
                     "analytic count");
    }

    /* A fresh workspace in another order gives the same bits. */
    cx_cell_ws_destroy(&ws2);
    cx_cell_ws_create(&ws2);
    ok = 1;
    for (cx_idx c = cells - 1; c >= 0; c--)
        ok = ok && compute(ws2, s, c, &r) == CX_OK && same_result(&r, &res[c]);
    cx_test_true("reverse order in a fresh workspace: bit-identical results", ok, "memcmp",
                 "reproducibility contract, DESIGN.md");
    int reconstructed = 0;
    for (cx_idx c = 0; c < cells; c++)
        for (int j = 0; j < res[c].nruns; j++)
            reconstructed += res[c].runs[j].outcome == CX_OUT_RECONSTRUCTED;
    snprintf(d, sizeof d, "%d reconstructed runs", reconstructed);
    cx_test_true("runs carry outcome labels", reconstructed >= 0, d, "");
    free(res);
    cx_cell_ws_destroy(&ws);
    cx_cell_ws_destroy(&ws2);
    cx_study_destroy(&s);
}

/* Training on an attractor and its exact mirror image u -> -u with equal weights makes the
 * readout block on the squared states exactly zero when the reservoir has no bias: the map
 * (r, u) -> (-r, -u) is a symmetry of the drive (tanh is odd), so the r-r^2 cross sums of the
 * two tasks cancel. Shifting the mirror copy breaks the symmetry. (Analytic result.) */
static void test_mirror(void)
{
    const char *fmt =
        "study: {name: mirror, seed: 311}\n"
        "reservoir: {nodes: 90, mean_degree: 3, rate: 5.0, input_scaling: 0.2, spectral_radius: "
        "0.9}\n"
        "training: {dt: 0.02, washout: 8, length: 30, ridge: 0.01, blend: 0.5}\n"
        "probe: {horizon: 5, tail: 2, random_starts: 0}\n"
        "tasks:\n"
        "  - {kind: flow, name: a, system: rossler, transient: 20}\n"
        "  - {kind: flow, name: b, system: rossler, transient: 20, mirror: true, shift: [%g, 0, "
        "0]}\n";
    char text[1024];
    double shifts[4] = {0.0, 1e-3, 1e-2, 1e-1}, norm[4] = {0}, total[4] = {0};
    int ok = 1;
    for (int i = 0; i < 4; i++) {
        snprintf(text, sizeof text, fmt, shifts[i]);
        cx_study *s = load(text);
        cx_cell_ws *ws = NULL;
        cx_cell_result r;
        cx_cell_ws_create(&ws);
        ok = ok && s != NULL && compute(ws, s, 0, &r) == CX_OK;
        if (ok) {
            norm[i] = r.wout_square_norm;
            total[i] = r.wout_norm;
        }
        cx_cell_ws_destroy(&ws);
        cx_study_destroy(&s);
    }
    char d[200];
    snprintf(d, sizeof d, "||W_out on r^2|| = %g with ||W_out|| = %g", norm[0], total[0]);
    cx_test_true("exact mirror pair: readout on squared states is exactly 0",
                 ok && norm[0] == 0.0 && total[0] > 0.0, d,
                 "analytic: odd symmetry of tanh, r -> -r with u -> -u");
    snprintf(d, sizeof d, "%g < %g < %g", norm[1], norm[2], norm[3]);
    cx_test_true("shifted mirror copy: squared block non-zero and growing with the shift",
                 ok && norm[1] > 0.0 && norm[1] < norm[2] && norm[2] < norm[3], d,
                 "analytic: the symmetry is broken by the shift");
}

/* The demo sweep's window: fixed points at a small spectral radius, the trained cycles in the
 * middle, untrained aperiodic motion at a large one. That small radii decay to fixed points and
 * large ones give chaos is a rule of thumb of the trade (common practice, no published source);
 * this checks that the demo file shows it for the draws the README quotes. */
static void test_demo_window(void)
{
    const char *src = getenv("CX_SOURCE_DIR");
    char path[1024];
    snprintf(path, sizeof path, "%s/jobs/demo-window.yaml", src ? src : "..");
    cx_study *s = NULL;
    if (cx_study_load(path, &s) != CX_OK) {
        cx_err_print("test_cell", 1);
        cx_test_true("demo sweep loads", 0, path, "");
        return;
    }
    const char *at[3] = {"reservoir.spectral_radius=0.1,seed=1",
                         "reservoir.spectral_radius=1.3,seed=1",
                         "reservoir.spectral_radius=2.5,seed=1"};
    cx_cell_result r[3];
    cx_cell_ws *ws = NULL;
    cx_cell_ws_create(&ws);
    int ok = 1;
    for (int i = 0; i < 3 && ok; i++) {
        cx_idx cell;
        ok = cx_study_find_cell(s, at[i], &cell) == CX_OK && compute(ws, s, cell, &r[i]) == CX_OK;
    }
    cx_test_true("demo cells computed", ok, "", "");
    if (ok) {
        int fixed = 1, multi = r[1].multifunctional, aper = 1;
        for (int k = 0; k < r[0].ntasks; k++)
            fixed = fixed && r[0].runs[k].outcome == CX_OUT_FIXED_POINT;
        for (int k = 0; k < r[2].ntasks; k++)
            aper = aper && (r[2].runs[k].outcome == CX_OUT_UNTRAINED_APERIODIC ||
                            r[2].runs[k].outcome == CX_OUT_UNTRAINED_CYCLE);
        cx_test_true("rho = 0.1: both task runs decay to fixed points", fixed, at[0],
                     "rule of thumb: common practice, no published source");
        cx_test_true("rho = 1.3: both cycles reconstructed (multifunctional)", multi, at[1],
                     "rule of thumb: common practice, no published source");
        cx_test_true("rho = 2.5: task runs leave the trained cycles for untrained motion", aper,
                     at[2], "rule of thumb: common practice, no published source");
    }
    cx_cell_ws_destroy(&ws);
    cx_study_destroy(&s);
}

/* Grouping runs that end on the same untrained attractor (src/cell/untrained.c) on a made-up
 * result whose answer is known by construction: two runs on one fixed point, one on another,
 * two on one periodic orbit, one on an orbit of the same shape with a period 20 % longer, one
 * aperiodic, one reconstructed (not untrained). */
static void test_untrained_groups(void)
{
    cx_cell_result r;
    memset(&r, 0, sizeof r);
    r.nruns = 8;
    int outcome[8] = {CX_OUT_FIXED_POINT,         CX_OUT_FIXED_POINT,     CX_OUT_FIXED_POINT,
                      CX_OUT_UNTRAINED_CYCLE,     CX_OUT_UNTRAINED_CYCLE, CX_OUT_UNTRAINED_CYCLE,
                      CX_OUT_UNTRAINED_APERIODIC, CX_OUT_RECONSTRUCTED};
    double centre[CX_MAX_RUNS][CX_MAX_DIM] = {{0.4, 0.1},  {0.41, 0.1}, {-1.3, 0.2}, {0.0, 0.0},
                                              {0.01, 0.0}, {0.0, 0.0},  {0.0, 0.0},  {0.0, 0.0}};
    double amp[CX_MAX_RUNS] = {0, 0, 0, 1.2, 1.21, 1.2, 1.5, 1.0};
    double period[8] = {NAN, NAN, NAN, 3.1, 3.11, 3.72, NAN, 2.6};
    for (int j = 0; j < 8; j++) {
        r.runs[j].outcome = outcome[j];
        r.runs[j].period = period[j];
    }
    cx_cell_cluster_untrained(&r, (const double(*)[CX_MAX_DIM])centre, amp, 2, 1.0, 0.1, 0.05);
    char d[160];
    snprintf(d, sizeof d,
             "%d distinct: %d fixed, %d cycles, %d aperiodic; clusters %d %d %d %d %d %d %d %d",
             r.untrained, r.untrained_kinds[0], r.untrained_kinds[1], r.untrained_kinds[2],
             r.runs[0].cluster, r.runs[1].cluster, r.runs[2].cluster, r.runs[3].cluster,
             r.runs[4].cluster, r.runs[5].cluster, r.runs[6].cluster, r.runs[7].cluster);
    int ok = r.untrained == 5 && r.untrained_kinds[0] == 2 && r.untrained_kinds[1] == 2 &&
             r.untrained_kinds[2] == 1 && r.runs[0].cluster == r.runs[1].cluster &&
             r.runs[2].cluster != r.runs[0].cluster && r.runs[3].cluster == r.runs[4].cluster &&
             r.runs[5].cluster != r.runs[3].cluster && r.runs[7].cluster == -1;
    cx_test_true("distinct untrained attractors grouped by class, centre, amplitude, period", ok, d,
                 "constructed case (leader clustering, Hartigan 1975)");
}

int main(void)
{
    test_untrained_groups();
    openblas_set_num_threads(1);
    test_determinism_and_reuse();
    test_mirror();
    test_demo_window();
    return cx_test_finish();
}
