/* coexist tests: the sweep-file module (include/coexist/study.h).
 *
 * What the references are. A parser has no published numbers to meet; its reference is the
 * format it implements. The checks below compare against:
 *  - the YAML 1.2 specification (Ben-Kiki, Evans & dot Net, "YAML Ain't Markup Language
 *    Version 1.2", 2009): one document, unique keys, a quoted scalar is a string;
 *  - positions (LINE:COL) found by searching the test text for a marker, computed apart from
 *    libyaml when the table was written; the two syntax-error positions were compared with
 *    PyYAML 6.0's pure-Python parser (Debian python3-yaml, yaml.SafeLoader), which reports
 *    2:1 for a tab that starts a token and 2:6 for the ':' inside an unclosed flow mapping;
 *  - analytic values of the axis constructions: a linear range from a to b with n points is
 *    a + i (b - a) / (n - 1); a geometric one is a (b / a)^(i / (n - 1)); row-major order
 *    gives index = sum_i c_i prod_{j > i} len_j (e.g. Golub & Van Loan, "Matrix Computations",
 *    4th ed., 2013, Sec. 1.2.5 on storage by rows);
 *  - the standard parameters of the built-in flows: Lorenz 1963 (J. Atmos. Sci. 20, 130)
 *    sigma = 10, rho = 28, beta = 8/3; Rossler 1976 (Phys. Lett. A 57, 397) a = b = 0.2;
 *  - the family geometry stated in task.h: k cycles spaced s apart along x, centred on 0, have
 *    centres (i - (k - 1) / 2) s;
 *  - the documented defaults of the sweep file (the project's own choices: common practice, no
 *    published source) and cx_class_defaults() for the classify section.
 * The scenarios (lanterns, ladders) are invented for these tests.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "coexist/error.h"
#include "coexist/study.h"
#include "testlib.h"

#define SRC_SPEC "sweep-file specification (project defaults: common practice, no published source)"
#define SRC_YAML "YAML 1.2 spec (Ben-Kiki, Evans & dot Net 2009) + hand-located position"
#define SRC_LIN  "analytic: linear range a + i (b - a) / (n - 1)"
#define SRC_GEO  "analytic: geometric range a (b / a)^(i / (n - 1))"
#define SRC_ROW  "analytic: row-major index (Golub & Van Loan 2013, Sec. 1.2.5)"

static const double pi = 3.14159265358979323846;

static int load(const char *text, const char *name, cx_study **s)
{
    int rc = cx_study_load_buffer(text, strlen(text), name, s);
    if (rc != CX_OK) {
        printf("  load of %s failed: %s\n", name, cx_err_message());
        cx_err_clear();
    }
    return rc;
}

typedef struct bad_case {
    const char *what;
    const char *text;
    const char *prefix;
    const char *fragment;
} bad_case;

static const bad_case bad[] = {
    {"YAML syntax error (tab indentation)", "study:\n\tname: b\n",
     "bad.yaml:2:1: ", "YAML syntax error"},
    {"YAML syntax error (unclosed flow mapping)", "study: {name: b\ntasks: []\n",
     "bad.yaml:2:6: ", "YAML syntax error"},
    {"top level not a mapping", "- a\n- b\n", "bad.yaml:1:1: ", "top level: expected a mapping"},
    {"unknown top-level key",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoirs: {nodes: 10}\n",
     "bad.yaml:3:1: ", "top level: expected one of the keys study, reservoir"},
    {"unknown nested key",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir:\n  nodes: "
     "300\n  node_count: 5\n",
     "bad.yaml:5:3: ", "reservoir: expected one of the keys model, nodes"},
    {"unknown key in a task",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0, colour: red}]\n",
     "bad.yaml:2:48: ", "tasks.task-1: expected one of the keys"},
    {"string for a number",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: {nodes: "
     "\"many\"}\n",
     "bad.yaml:3:20: ", "reservoir.nodes: expected an integer >= 2, got the string \"many\""},
    {"string for a task number",
     "study: {name: b}\ntasks: [{kind: cycle, name: ring, radius: big, speed: 2.0}]\n",
     "bad.yaml:2:43: ", "tasks.ring.radius: expected a number > 0, got big"},
    {"spectral radius <= 0",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: "
     "{spectral_radius: -0.5}\n",
     "bad.yaml:3:30: ", "reservoir.spectral_radius: expected a number > 0, got -0.5"},
    {"blend outside [0, 1]",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\ntraining: {blend: 1.5}\n",
     "bad.yaml:3:19: ", "training.blend: expected a number in [0, 1], got 1.5"},
    {"nodes < 2",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: {nodes: 1}\n",
     "bad.yaml:3:20: ", "reservoir.nodes: expected an integer >= 2, got 1"},
    {"mean degree >= nodes",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: {nodes: 10, "
     "mean_degree: 12}\n",
     "bad.yaml:3:37: ", "reservoir.mean_degree: expected a number < reservoir.nodes (10), got 12"},
    {"mean degree >= nodes on axes",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  reservoir.nodes: "
     "[10, 50]\n  reservoir.mean_degree: [4, 12]\n",
     "bad.yaml:4:3: ",
     "at reservoir.nodes=10, reservoir.mean_degree=12: mean degree must be < nodes"},
    {"small world with odd degree",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: {topology: "
     "small-world, mean_degree: 3}\n",
     "bad.yaml:3:49: ",
     "reservoir.mean_degree: expected an even integer >= 2 for a small world, got 3"},
    {"ridge < 0",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\ntraining: {ridge: "
     "-1.0e-6}\n",
     "bad.yaml:3:19: ", "training.ridge: expected a number >= 0, got -1.0e-6"},
    {"dt <= 0",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\ntraining: {dt: 0}\n",
     "bad.yaml:3:16: ", "training.dt: expected a number > 0, got 0"},
    {"washout shorter than dt",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\ntraining: {dt: 0.5, "
     "washout: 0.2}\n",
     "bad.yaml:3:30: ", "training.washout: expected 0 or a number >= training.dt (0.5), got 0.2"},
    {"tail > horizon",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nprobe: {horizon: 30, "
     "tail: 45}\n",
     "bad.yaml:3:28: ", "probe.tail: expected a number <= probe.horizon (30), got 45"},
    {"tail > horizon on an axis",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  probe.horizon: "
     "[100, 30]\n",
     "bad.yaml:4:3: ", "at probe.horizon=30: tail must be <= horizon (50 > 30)"},
    {"tasks of different dimension",
     "study: {name: b}\ntasks: [{kind: cycle, name: a, radius: 1, speed: 1}, {kind: flow, name: z, "
     "system: lorenz}]\n",
     "bad.yaml:2:8: ", "tasks of different dimension: a has 2, z has 3"},
    {"empty axis",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  reservoir.nodes: "
     "[]\n",
     "bad.yaml:4:20: ", "reservoir.nodes: expected a list of at least one value, got a list"},
    {"duplicate axis value",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  "
     "reservoir.spectral_radius: [0.5, 0.9, 0.5]\n",
     "bad.yaml:4:3: ", "reservoir.spectral_radius: expected distinct values, got 0.5 twice"},
    {"non-integer nodes on an axis",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  reservoir.nodes: "
     "[100, 250.5]\n",
     "bad.yaml:4:26: ", "reservoir.nodes: expected an integer >= 2, got 250.5"},
    {"non-integer nodes from a range",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  reservoir.nodes: "
     "{from: 100, to: 200, count: 3, log: true}\n",
     "bad.yaml:4:3: ", "reservoir.nodes: expected an integer >= 2, got 141.42"},
    {"unknown flow system", "study: {name: b}\ntasks: [{kind: flow, system: lorentz}]\n",
     "bad.yaml:2:30: ", "tasks.task-1.system: expected one of lorenz, rossler"},
    {"unknown flow parameter",
     "study: {name: b}\ntasks: [{kind: flow, system: lorenz, parameters: {sigma: 10, r: 28}}]\n",
     "bad.yaml:2:62: ",
     "tasks.task-1.parameters: expected one of the keys sigma, rho, beta, got r"},
    {"unknown axis key",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  reservoir.size: "
     "[1, 2]\n",
     "bad.yaml:4:3: ", "axes: expected seed, overlap, task_count, tasks"},
    {"boolean key on an axis",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  probe.lyapunov: "
     "[0, 1]\n",
     "bad.yaml:4:3: ",
     "axes: expected a numeric or enumerated key, got the true/false key probe.lyapunov"},
    {"categorical axis with unknown label",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  "
     "reservoir.topology: [ring, torus]\n",
     "bad.yaml:4:30: ",
     "reservoir.topology: expected one of erdos-renyi, ring, delay-line, small-world, got torus"},
    {"unknown label of a fixed key",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: {model: "
     "analog}\n",
     "bad.yaml:3:20: ", "reservoir.model: expected one of continuous, discrete, got analog"},
    {"weights count mismatch",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\ntraining: {weights: [1, "
     "2, 3]}\n",
     "bad.yaml:3:21: ", "training.weights: expected one weight per task (1), got 3 weights"},
    {"weights count against task_count",
     "study: {name: b}\ntasks:\n  - {kind: family, name: rings, arrangement: cycles-line, count: "
     "2, spacing: 3.5,\n     template: {kind: cycle, radius: 1.25, speed: 1.5}}\ntraining: "
     "{weights: [1, 1]}\naxes:\n  task_count: [2, 3]\n",
     "bad.yaml:7:3: ", "training.weights lists 2 weights but the cell at task_count=3 has 3 tasks"},
    {"duplicate key",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir:\n  nodes: "
     "300\n  nodes: 400\n",
     "bad.yaml:5:3: ",
     "reservoir.nodes: expected each key once, got a second nodes (the first is at line 4)"},
    {"missing study.name", "study: {seed: 5}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\n",
     "bad.yaml:1:8: ", "study.name: expected a name, got none"},
    {"log range with from <= 0",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  training.ridge: "
     "{from: 0, to: 1.0e-4, count: 5, log: true}\n",
     "bad.yaml:4:26: ",
     "training.ridge.from: expected a number > 0 (a log range needs from, to > 0), got 0"},
    {"too many runs",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nprobe: {random_starts: "
     "70}\n",
     "bad.yaml:3:24: ",
     "probe.random_starts: expected an integer <= 63 (64 runs at most, 1 tasks), got 70"},
    {"missing trajectory file",
     "study: {name: b}\ntasks: [{kind: file, name: m, path: nowhere/orbit.csv, dt: 0.01}]\n",
     "bad.yaml:2:37: ", "tasks.m.path: expected a readable trajectory file, got nowhere/orbit.csv"},
    {"family count > 16",
     "study: {name: b}\ntasks:\n  - {kind: family, name: rings, arrangement: cycles-line, count: "
     "17, spacing: 3,\n     template: {kind: cycle, radius: 1, speed: 1}}\n",
     "bad.yaml:3:66: ", "tasks.rings.count: expected an integer in [1, 16], got 17"},
    {"family expansion beyond 16 tasks",
     "study: {name: b}\ntasks:\n  - {kind: cycle, name: lone, radius: 1, speed: 1}\n  - {kind: "
     "family, name: rings, arrangement: cycles-line, count: 16, spacing: 3,\n     template: {kind: "
     "cycle, radius: 1, speed: 1}}\n",
     "bad.yaml:3:3: ", "tasks: expected at most 16 tasks after family expansion, got 17 or more"},
    {"cycle without radius", "study: {name: b}\ntasks: [{kind: cycle, name: ring, speed: 2.0}]\n",
     "bad.yaml:2:9: ",
     "tasks.ring: expected a key radius (or an axis tasks.ring.radius), got none"},
    {"tasks axis without task_sets",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  tasks: [one, "
     "two]\n",
     "bad.yaml:4:3: ", "tasks: expected task_sets to choose from"},
    {"overlap axis without a family",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  overlap: [1, "
     "2]\n",
     "bad.yaml:4:3: ", "overlap: expected a task list with a family, got none"},
    {"axis key of an unknown task",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  "
     "tasks.ghost.radius: [1, 2]\n",
     "bad.yaml:4:3: ", "tasks.ghost.radius: expected a task name among task-1, got ghost"},
    {"duplicate task name",
     "study: {name: b}\ntasks: [{kind: cycle, name: o, radius: 1, speed: 1}, {kind: cycle, name: "
     "o, radius: 2, speed: 1}]\n",
     "bad.yaml:2:74: ", "tasks[2].name: expected a task name not used before in the list, got o"},
    {"seed that is not an integer",
     "study: {name: b, seed: 12.5}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\n",
     "bad.yaml:1:24: ", "study.seed: expected an integer in [0, 2^64 - 1], got 12.5"},
    {"bad study name",
     "study: {name: \"two words\"}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\n",
     "bad.yaml:1:15: ", "study.name: expected a name of 1 to 63 letters"},
    {"too many axes",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  "
     "reservoir.spectral_radius: [1, 2]\n  reservoir.rate: [1, 2]\n  reservoir.leak_rate: [1, 2]\n "
     " reservoir.input_scaling: [1, 2]\n  reservoir.bias: [1, 2]\n  reservoir.weight_scale: [1, "
     "2]\n  training.ridge: [1, 2]\n  training.blend: [1, 2]\n  training.length: [1, 2]\n  "
     "probe.start_box: [1, 2]\n  probe.drive_time: [1, 2]\n  classify.match_tol: [1, 2]\n  "
     "classify.fixed_tol: [1, 2]\n",
     "bad.yaml:16:3: ", "axes: expected at most 12 axes, got 13"},
    {"mean degree >= nodes at a corner of a large grid",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  reservoir.nodes: "
     "{from: 2, to: 2001, step: 1}\n  probe.random_starts: {from: 0, to: 40, step: 1}\n  "
     "training.dt: [0.01, 0.02]\n  probe.horizon: {from: 100, to: 290, step: 10}\n",
     "bad.yaml:4:3: ", "at reservoir.nodes=2: mean degree must be < nodes (3 >= 2)"},
    {"mean degree equal to nodes",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\nreservoir: {nodes: 12, "
     "mean_degree: 12}\n",
     "bad.yaml:3:37: ", "reservoir.mean_degree: expected a number < reservoir.nodes (12), got 12"},
    {"stepped range with step 0",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  probe.horizon: "
     "{from: 100, to: 300, step: 0}\n",
     "bad.yaml:4:45: ", "probe.horizon.step: expected a step other than 0"},
    {"stepped range pointing away from to",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  probe.horizon: "
     "{from: 100, to: 300, step: -50}\n",
     "bad.yaml:4:45: ",
     "probe.horizon.step: expected a step other than 0 that leads from `from` towards `to`, got "
     "-50"},
    {"range with count 0",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  probe.horizon: "
     "{from: 100, to: 300, count: 0}\n",
     "bad.yaml:4:46: ", "probe.horizon.count: expected an integer in [1, 1000000], got 0"},
    {"seed axis without count",
     "study: {name: b}\ntasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\naxes:\n  seed: {from: "
     "4}\n",
     "bad.yaml:4:9: ", "seed: expected a mapping with count, got a mapping"},
};

static void check_bad(void)
{
    int n = (int)(sizeof bad / sizeof bad[0]);
    for (int i = 0; i < n; i++) {
        cx_study *s = NULL;
        char what[256], detail[1400];
        int rc = cx_study_load_buffer(bad[i].text, strlen(bad[i].text), "bad.yaml", &s);
        const char *msg = cx_err_message();
        int ok = rc == CX_ERR_INVALID && s == NULL &&
                 strncmp(msg, bad[i].prefix, strlen(bad[i].prefix)) == 0 &&
                 strstr(msg, bad[i].fragment) != NULL;
        snprintf(what, sizeof what, "malformed input refused: %s", bad[i].what);
        snprintf(detail, sizeof detail, "rc %d, message \"%s\", want prefix \"%s\" and \"%s\"", rc,
                 msg, bad[i].prefix, bad[i].fragment);
        cx_test_true(what, ok, detail, SRC_YAML);
        cx_err_clear();
        cx_study_destroy(&s);
    }
    cx_test_true("catalogue holds at least 25 malformed inputs", n >= 25, "", "brief");
}

static void check_missing_file(void)
{
    cx_study *s = NULL;
    int rc = cx_study_load("/nonexistent-dir/sweep.yaml", &s);
    const char *msg = cx_err_message();
    cx_test_true("missing sweep file is bad input (exit status 2)",
                 rc == CX_ERR_INVALID &&
                     strncmp(msg, "cannot open sweep file /nonexistent-dir/sweep.yaml: ", 52) ==
                         0 &&
                     strstr(msg, "No such file") != NULL,
                 msg, "POSIX strerror(ENOENT)");
    cx_err_clear();
}

/* Every default of a minimal file. */
static void check_defaults(void)
{
    const char *text = "study: {name: tiny}\n"
                       "tasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\n";
    cx_study *s = NULL;
    cx_cell_params p;
    cx_class_params cd;
    if (load(text, "tiny.yaml", &s) != CX_OK || cx_study_bind(s, 0, &p) != CX_OK) {
        cx_test_true("minimal file loads and binds", 0, cx_err_message(), SRC_SPEC);
        cx_err_clear();
        cx_study_destroy(&s);
        return;
    }
    cx_class_defaults(&cd);
    cx_test_true("minimal: one cell, no axes", cx_study_cells(s) == 1 && cx_study_naxes(s) == 0, "",
                 SRC_SPEC);
    cx_test_true("minimal: study seed default 1",
                 cx_study_seed(s) == 1 && p.study_seed == 1 && p.replicate == 0, "", SRC_SPEC);
    cx_test_true("default model continuous", p.res.model == CX_MODEL_CONTINUOUS, "", SRC_SPEC);
    cx_test_abs("default nodes", (double)p.net.nodes, 500, 0, SRC_SPEC);
    cx_test_true("default topology erdos-renyi", p.net.topology == CX_TOPO_ERDOS_RENYI, "",
                 SRC_SPEC);
    cx_test_abs("default mean degree", p.net.mean_degree, 3, 0, SRC_SPEC);
    cx_test_abs("default rewire", p.net.rewire, 0.1, 0, SRC_SPEC);
    cx_test_true("default weight law uniform", p.net.weight_law == CX_WEIGHT_UNIFORM, "", SRC_SPEC);
    cx_test_abs("default weight scale", p.net.weight_scale, 1, 0, SRC_SPEC);
    cx_test_true("default no self loops", p.net.self_loops == 0, "", SRC_SPEC);
    cx_test_abs("default spectral radius", p.res.spectral_radius, 1.0, 0, SRC_SPEC);
    cx_test_abs("default rate", p.res.rate, 5, 0, SRC_SPEC);
    cx_test_abs("default leak rate", p.res.leak, 1, 0, SRC_SPEC);
    cx_test_abs("default input scaling", p.res.input_scaling, 0.1, 0, SRC_SPEC);
    cx_test_true("default input layout one-per-node", p.res.input_layout == CX_INPUT_ONE_PER_NODE,
                 "", SRC_SPEC);
    cx_test_abs("default bias", p.res.bias, 0, 0, SRC_SPEC);
    cx_test_true("default features linear-and-squares", p.res.features == CX_FEAT_LINEAR_SQUARES,
                 "", SRC_SPEC);
    cx_test_abs("default dt", p.train.dt, 0.01, 0, SRC_SPEC);
    cx_test_abs("default washout", p.train.washout, 20, 0, SRC_SPEC);
    cx_test_abs("default length", p.train.length, 100, 0, SRC_SPEC);
    cx_test_abs("default ridge", p.train.ridge, 1e-6, 0, SRC_SPEC);
    cx_test_abs("default blend", p.train.blend, 0.5, 0, SRC_SPEC);
    cx_test_true("default weights not listed", p.train.weights_listed == 0, "", SRC_SPEC);
    cx_test_abs("default stride", (double)p.train.stride, 1, 0, SRC_SPEC);
    cx_test_abs("default horizon", p.probe.horizon, 200, 0, SRC_SPEC);
    cx_test_abs("default tail", p.probe.tail, 50, 0, SRC_SPEC);
    cx_test_abs("default random starts", p.probe.random_starts, 4, 0, SRC_SPEC);
    cx_test_true("default start mode box", p.probe.start_mode == CX_START_BOX, "", SRC_SPEC);
    cx_test_abs("default start box", p.probe.start_box, 1, 0, SRC_SPEC);
    cx_test_abs("default drive time", p.probe.drive_time, 10, 0, SRC_SPEC);
    cx_test_true("default no Lyapunov exponent", p.probe.lyapunov == 0, "", SRC_SPEC);
    cx_test_abs("default Lyapunov time", p.probe.lyapunov_time, 100, 0, SRC_SPEC);
    cx_test_true("classify defaults are cx_class_defaults()", memcmp(&p.cls, &cd, sizeof cd) == 0,
                 "", "classify.h");
    cx_test_true("default task name, dimension, ellipticity, scale",
                 p.ntasks == 1 && p.dim == 2 && strcmp(p.tasks[0].name, "task-1") == 0 &&
                     p.tasks[0].kind == CX_TASK_CYCLE && p.tasks[0].ellipticity == 1 &&
                     p.tasks[0].scale == 1 && p.tasks[0].centre[0] == 0 &&
                     p.tasks[0].centre[1] == 0,
                 p.tasks[0].name, SRC_SPEC);
    cx_test_abs("cycle radius as written", p.tasks[0].radius, 1.5, 0, SRC_YAML);
    cx_test_true("max tasks and runs", cx_study_max_tasks(s) == 1 && cx_study_max_runs(s) == 5, "",
                 "1 task + 4 random starts");
    cx_study_destroy(&s);
    cx_test_true("destroy clears the handle", s == NULL, "", "STYLE.md _destroy(&p)");

    /* Boundaries that are allowed: tail = horizon, washout 0, blend 0 and 1 ends, degree just
     * below nodes. */
    const char *edge = "study: {name: edges}\n"
                       "reservoir: {nodes: 12, mean_degree: 11.5}\n"
                       "training: {washout: 0, blend: 1}\n"
                       "probe: {horizon: 35, tail: 35, random_starts: 63}\n"
                       "tasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\n";
    int rc = load(edge, "edge.yaml", &s);
    cx_test_true("allowed boundaries load (tail = horizon, washout 0, 1 + 63 runs)",
                 rc == CX_OK && cx_study_max_runs(s) == 64, "", SRC_SPEC);
    cx_study_destroy(&s);

    /* A small world without a written degree takes degree 4. */
    const char *sw = "study: {name: sw}\nreservoir: {topology: small-world}\n"
                     "tasks: [{kind: cycle, radius: 1.5, speed: 2.0}]\n";
    if (load(sw, "sw.yaml", &s) == CX_OK && cx_study_bind(s, 0, &p) == CX_OK)
        cx_test_abs("small-world default mean degree", p.net.mean_degree, 4, 0, SRC_SPEC);
    else
        cx_test_true("small-world file loads", 0, "", SRC_SPEC);
    cx_study_destroy(&s);
}

static const char *full_text =
    "# two lanterns swinging in opposite senses (invented demo scenario)\n"
    "study:\n"
    "  name: lantern-pair\n"
    "  seed: 7340033\n"
    "  description: two lanterns, one clockwise\n"
    "reservoir:\n"
    "  model: continuous\n"
    "  nodes: 300\n"
    "  topology: erdos-renyi\n"
    "  mean_degree: 3.5\n"
    "  rewire: 0.15\n"
    "  weights: normal\n"
    "  weight_scale: 1.25\n"
    "  self_loops: true\n"
    "  spectral_radius: 1.1\n"
    "  rate: 4.5\n"
    "  leak_rate: 0.85\n"
    "  input_scaling: 0.085\n"
    "  input_layout: dense\n"
    "  bias: 0.35\n"
    "  features: linear-squares-constant\n"
    "training:\n"
    "  dt: 0.02\n"
    "  washout: 15\n"
    "  length: 80\n"
    "  ridge: 2.5e-7\n"
    "  blend: 0.35\n"
    "  weights: [1.5, 2.5]\n"
    "  stride: 2\n"
    "tasks:\n"
    "  - {kind: cycle, name: left, centre: [-2.5, 0.75], radius: 1.35, speed: 2.2,\n"
    "     ellipticity: 0.8, phase: 0.3}\n"
    "  - {kind: cycle, name: right, centre: [2.5, 0.75], radius: 1.35, speed: -2.2, rotate: 30,\n"
    "     mirror: true, shift: [0.1, -0.2], scale: 1.5, reverse: true}\n"
    "probe:\n"
    "  horizon: 150\n"
    "  tail: 40\n"
    "  random_starts: 6\n"
    "  start_mode: drive-point\n"
    "  start_box: 0.75\n"
    "  drive_time: 12\n"
    "  lyapunov: true\n"
    "  lyapunov_time: 60\n"
    "classify:\n"
    "  bound: 3.5\n"
    "  fixed_tol: 2.0e-3\n"
    "  match_tol: 0.15\n"
    "  coverage_radius: 0.12\n"
    "  coverage_min: 0.6\n"
    "  period_tol: 0.03\n"
    "  valid_error: 0.35\n"
    "  cloud_points: 1500\n"
    "  tail_points: 1200\n"
    "axes:\n"
    "  reservoir.spectral_radius: {from: 0.2, to: 2.0, count: 10}\n"
    "  training.ridge: {from: 1.0e-8, to: 1.0e-4, count: 5, log: true}\n"
    "  reservoir.nodes: [200, 300, 450]\n"
    "  probe.random_starts: {from: 0, to: 8, step: 2}\n"
    "  seed: {count: 3}\n"
    "  reservoir.topology: [erdos-renyi, ring]\n"
    "  tasks.left.radius: [1, 1.5, 2]\n";

static void check_full(void)
{
    cx_study *s = NULL;
    cx_cell_params p;
    cx_axis_info ax;
    const cx_idx lens[7] = {10, 5, 3, 5, 3, 2, 3};
    if (load(full_text, "full.yaml", &s) != CX_OK) {
        cx_test_true("full file loads", 0, "", SRC_SPEC);
        return;
    }
    cx_test_true("full: name and seed",
                 strcmp(cx_study_name(s), "lantern-pair") == 0 && cx_study_seed(s) == 7340033u,
                 cx_study_name(s), SRC_YAML);
    cx_test_true("full: source kept", strcmp(cx_study_source(s), full_text) == 0, "", SRC_SPEC);
    cx_test_true("full: seven axes in file order",
                 cx_study_naxes(s) == 7 &&
                     cx_study_axis_find(s, "reservoir.spectral_radius") == 0 &&
                     cx_study_axis_find(s, "tasks.left.radius") == 6 &&
                     cx_study_axis_find(s, "reservoir.rate") == -1,
                 "", SRC_SPEC);
    cx_test_abs("full: grid size is the product of the axis lengths", (double)cx_study_cells(s),
                10 * 5 * 3 * 5 * 3 * 2 * 3, 0, SRC_ROW);
    for (int i = 0; i < 7; i++) {
        cx_study_axis(s, i, &ax);
        char what[128];
        snprintf(what, sizeof what, "axis %s length", ax.name);
        cx_test_abs(what, (double)ax.len, (double)lens[i], 0, SRC_SPEC);
    }
    cx_study_axis(s, 0, &ax);
    double maxerr = 0;
    for (int i = 0; i < 10; i++)
        maxerr = fmax(maxerr, fabs(ax.values[i] - (0.2 + 0.2 * i)));
    cx_test_abs("linear axis values 0.2..2.0", maxerr, 0, 1e-15, SRC_LIN);
    cx_test_true("linear axis numeric, units 1",
                 ax.kind == CX_AXIS_NUMERIC && strcmp(ax.units, "1") == 0 && ax.labels == NULL,
                 ax.units, SRC_SPEC);
    cx_study_axis(s, 1, &ax);
    maxerr = 0;
    for (int i = 0; i < 5; i++)
        maxerr = fmax(maxerr, fabs(ax.values[i] / pow(10.0, -8 + i) - 1));
    cx_test_abs("log axis values 1e-8..1e-4 (relative error)", maxerr, 0, 1e-13, SRC_GEO);
    cx_study_axis(s, 2, &ax);
    cx_test_true("integer axis kind and units",
                 ax.kind == CX_AXIS_INTEGER && strcmp(ax.units, "nodes") == 0, ax.units, SRC_SPEC);
    cx_study_axis(s, 3, &ax);
    cx_test_true("stepped axis 0, 2, 4, 6, 8",
                 ax.len == 5 && ax.values[0] == 0 && ax.values[2] == 4 && ax.values[4] == 8, "",
                 "analytic: from + i step");
    cx_study_axis(s, 4, &ax);
    cx_test_true("seed axis 0, 1, 2 in replicate units",
                 ax.kind == CX_AXIS_SEED && ax.values[0] == 0 && ax.values[2] == 2 &&
                     strcmp(ax.units, "replicate") == 0,
                 "", SRC_SPEC);
    cx_study_axis(s, 5, &ax);
    cx_test_true("categorical axis labels and coordinate values",
                 ax.kind == CX_AXIS_CATEGORICAL && ax.labels != NULL &&
                     strcmp(ax.labels[1], "ring") == 0 && ax.values[0] == 0 && ax.values[1] == 1,
                 "", SRC_SPEC);

    /* Row-major order, first axis slowest: round trip over every cell. */
    int roundtrip = 1;
    cx_idx coords[CX_MAX_AXES];
    for (cx_idx c = 0; c < cx_study_cells(s); c++) {
        cx_study_coords(s, c, coords);
        if (cx_study_index(s, coords) != c)
            roundtrip = 0;
    }
    cx_test_true("coords/index round trip on all 13500 cells", roundtrip, "", SRC_ROW);
    cx_idx want_coords[7] = {5, 2, 2, 2, 2, 1, 1};
    cx_idx want = 0;
    for (int i = 0; i < 7; i++)
        want = want * lens[i] + want_coords[i];
    cx_study_coords(s, want, coords);
    cx_test_true("first axis varies slowest",
                 coords[0] == 5 && coords[6] == 1 && cx_study_index(s, want_coords) == want, "",
                 SRC_ROW);
    cx_study_coords(s, 1, coords);
    cx_test_true("cell 1 moves the last axis", coords[6] == 1 && coords[0] == 0, "", SRC_ROW);

    /* Bind that cell. */
    if (cx_study_bind(s, want, &p) != CX_OK) {
        cx_test_true("full: bind", 0, cx_err_message(), SRC_SPEC);
        cx_err_clear();
        cx_study_destroy(&s);
        return;
    }
    cx_test_abs("bind: spectral radius from the linear axis", p.res.spectral_radius, 1.2, 1e-15,
                SRC_LIN);
    cx_test_rel("bind: ridge from the log axis", p.train.ridge, 1e-6, 1e-13, SRC_GEO);
    cx_test_abs("bind: nodes from the integer axis", (double)p.net.nodes, 450, 0, SRC_SPEC);
    cx_test_abs("bind: random starts from the stepped axis", p.probe.random_starts, 4, 0, SRC_SPEC);
    cx_test_true("bind: replicate from the seed axis, study seed kept",
                 p.replicate == 2 && p.study_seed == 7340033u, "", SRC_SPEC);
    cx_test_true("bind: topology ring from the categorical axis", p.net.topology == CX_TOPO_RING,
                 "", SRC_SPEC);
    cx_test_abs("bind: tasks.left.radius", p.tasks[0].radius, 1.5, 0, SRC_SPEC);
    cx_test_abs("bind: other task keeps its radius", p.tasks[1].radius, 1.35, 0, SRC_YAML);
    /* Fixed values of every section. */
    cx_test_true("fixed reservoir values",
                 p.net.mean_degree == 3.5 && p.net.rewire == 0.15 &&
                     p.net.weight_law == CX_WEIGHT_NORMAL && p.net.weight_scale == 1.25 &&
                     p.net.self_loops == 1 && p.res.rate == 4.5 && p.res.leak == 0.85 &&
                     p.res.input_scaling == 0.085 && p.res.input_layout == CX_INPUT_DENSE &&
                     p.res.bias == 0.35 && p.res.features == CX_FEAT_LINEAR_SQUARES_CONSTANT &&
                     p.res.model == CX_MODEL_CONTINUOUS,
                 "", SRC_YAML);
    cx_test_true("fixed training values",
                 p.train.dt == 0.02 && p.train.washout == 15 && p.train.length == 80 &&
                     p.train.blend == 0.35 && p.train.stride == 2 && p.train.weights_listed == 1 &&
                     p.train.weights[0] == 1.5 && p.train.weights[1] == 2.5 &&
                     p.train.weights[2] == 0,
                 "", SRC_YAML);
    cx_test_true("fixed probe values",
                 p.probe.horizon == 150 && p.probe.tail == 40 &&
                     p.probe.start_mode == CX_START_DRIVE_POINT && p.probe.start_box == 0.75 &&
                     p.probe.drive_time == 12 && p.probe.lyapunov == 1 &&
                     p.probe.lyapunov_time == 60,
                 "", SRC_YAML);
    cx_test_true("fixed classify values",
                 p.cls.bound == 3.5 && p.cls.fixed_tol == 2e-3 && p.cls.match_tol == 0.15 &&
                     p.cls.coverage_radius == 0.12 && p.cls.coverage_min == 0.6 &&
                     p.cls.period_tol == 0.03 && p.cls.valid_error == 0.35 &&
                     p.cls.cloud_points == 1500 && p.cls.tail_points == 1200,
                 "", SRC_YAML);
    const cx_task_spec *r = &p.tasks[1];
    cx_test_true("task transforms",
                 p.ntasks == 2 && p.dim == 2 && r->mirror == 1 && r->reverse == 1 &&
                     r->scale == 1.5 && r->shift[0] == 0.1 && r->shift[1] == -0.2 &&
                     r->speed == -2.2 && r->centre[0] == 2.5 && strcmp(r->name, "right") == 0,
                 r->name, SRC_YAML);
    cx_test_abs("rotate 30 degrees stored in radians", r->rotate, pi / 6, 1e-15,
                "analytic: 30 deg = pi/6 rad");
    cx_test_true("first task ellipticity and phase",
                 p.tasks[0].ellipticity == 0.8 && p.tasks[0].phase == 0.3, "", SRC_YAML);

    /* find_cell */
    cx_idx cell = -1;
    int rc = cx_study_find_cell(s,
                                "reservoir.spectral_radius=1.2,training.ridge=1e-6,"
                                "reservoir.nodes=450,probe.random_starts=4,seed=2,"
                                "reservoir.topology=ring,tasks.left.radius=1.5",
                                &cell);
    cx_test_true("find_cell names the bound cell", rc == CX_OK && cell == want, cx_err_message(),
                 SRC_ROW);
    cx_err_clear();
    rc = cx_study_find_cell(
        s,
        "tasks.left.radius=1.5, reservoir.topology=ring, seed=2,"
        "probe.random_starts=4,reservoir.nodes=450,training.ridge=1.0000000001e-6,"
        "reservoir.spectral_radius=1.2000000001",
        &cell);
    cx_test_true("find_cell: any order, 1e-10 relative off still matches",
                 rc == CX_OK && cell == want, cx_err_message(),
                 "tolerance 1e-9 relative (specification)");
    cx_err_clear();
    rc = cx_study_find_cell(s,
                            "reservoir.spectral_radius=1.25,training.ridge=1e-6,"
                            "reservoir.nodes=450,probe.random_starts=4,seed=2,"
                            "reservoir.topology=ring,tasks.left.radius=1.5",
                            &cell);
    cx_test_true("find_cell: value off the axis lists the axis values",
                 rc == CX_ERR_INVALID && strstr(cx_err_message(), "expected one of 0.2, 0.4") &&
                     strstr(cx_err_message(), "got 1.25"),
                 cx_err_message(), SRC_SPEC);
    cx_err_clear();
    rc = cx_study_find_cell(s, "reservoir.spectral_radius=1.2", &cell);
    cx_test_true("find_cell: every axis must be named",
                 rc == CX_ERR_INVALID && strstr(cx_err_message(), "got none for training.ridge"),
                 cx_err_message(), SRC_SPEC);
    cx_err_clear();
    rc = cx_study_find_cell(s,
                            "reservoir.spectral_radius=1.2,training.ridge=1e-6,"
                            "reservoir.nodes=450,probe.random_starts=4,seed=2,"
                            "reservoir.topology=torus,tasks.left.radius=1.5",
                            &cell);
    cx_test_true("find_cell: unknown label refused",
                 rc == CX_ERR_INVALID && strstr(cx_err_message(), "erdos-renyi, ring"),
                 cx_err_message(), SRC_SPEC);
    cx_err_clear();
    cx_test_true("bind refuses a cell outside the grid",
                 cx_study_bind(s, cx_study_cells(s), &p) == CX_ERR_INVALID, cx_err_message(),
                 SRC_SPEC);
    cx_err_clear();
    cx_study_destroy(&s);
}

static void check_families_and_sets(void)
{
    const char *fam = "study: {name: capacity-ladder}\n"
                      "tasks:\n"
                      "  - kind: family\n"
                      "    name: rings\n"
                      "    arrangement: cycles-line\n"
                      "    count: 3\n"
                      "    spacing: 4.0\n"
                      "    alternate: true\n"
                      "    template: {kind: cycle, radius: 1.25, speed: 1.5}\n"
                      "axes:\n"
                      "  overlap: {from: 0, to: 6, count: 7}\n"
                      "  task_count: {from: 1, to: 6, step: 1}\n";
    cx_study *s = NULL;
    cx_cell_params p;
    cx_idx cell = -1;
    if (load(fam, "fam.yaml", &s) == CX_OK &&
        cx_study_find_cell(s, "overlap=3,task_count=4", &cell) == CX_OK &&
        cx_study_bind(s, cell, &p) == CX_OK) {
        cx_test_abs("task_count axis sets the family size", p.ntasks, 4, 0, SRC_SPEC);
        cx_test_true("overlap axis sets the spacing: centres -4.5, -1.5, 1.5, 4.5",
                     fabs(p.tasks[0].centre[0] + 4.5) < 1e-12 &&
                         fabs(p.tasks[1].centre[0] + 1.5) < 1e-12 &&
                         fabs(p.tasks[3].centre[0] - 4.5) < 1e-12,
                     "", "task.h: centres (i - (k - 1)/2) s along x");
        cx_test_true("family members keep the template radius",
                     p.tasks[2].radius == 1.25 && p.dim == 2, "", SRC_YAML);
        cx_test_true("family max tasks over the grid",
                     cx_study_max_tasks(s) == 6 && cx_study_max_runs(s) == 10, "",
                     "6 members + 4 random starts");
    } else {
        cx_test_true("family file loads and binds", 0, cx_err_message(), SRC_SPEC);
        cx_err_clear();
    }
    cx_study_destroy(&s);

    /* A grid whose rule-relevant part exceeds 2,000,000 cells is checked at its corners only;
     * the per-run sizes then come from upper bounds: 16 members + 40 random starts. */
    const char *large = "study: {name: wide-ladder}\n"
                        "tasks:\n"
                        "  - {kind: family, name: rings, arrangement: cycles-line, count: 2,\n"
                        "     spacing: 3, template: {kind: cycle, radius: 1, speed: 1}}\n"
                        "axes:\n"
                        "  reservoir.nodes: {from: 100, to: 2099, step: 1}\n"
                        "  probe.random_starts: {from: 0, to: 40, step: 1}\n"
                        "  task_count: {from: 1, to: 16, step: 1}\n"
                        "  training.dt: [0.01, 0.02]\n";
    if (load(large, "large.yaml", &s) == CX_OK) {
        cx_test_abs("large grid: cells", (double)cx_study_cells(s), 2000.0 * 41 * 16 * 2, 0,
                    SRC_ROW);
        cx_test_true("large grid: max tasks 16, max runs 56",
                     cx_study_max_tasks(s) == 16 && cx_study_max_runs(s) == 56, "",
                     "16 members + 40 random starts");
    } else {
        cx_test_true("large grid loads", 0, "", SRC_SPEC);
    }
    cx_study_destroy(&s);

    const char *sets = "study: {name: set-switch}\n"
                       "task_sets:\n"
                       "  pair:\n"
                       "    - {kind: cycle, name: a, radius: 1.2, speed: 1.1}\n"
                       "    - {kind: cycle, name: b, centre: [3, 0], radius: 0.9, speed: -1.4}\n"
                       "  trio:\n"
                       "    - {kind: cycle, name: a, radius: 1.2, speed: 1.1}\n"
                       "    - {kind: cycle, name: b, centre: [3, 0], radius: 0.9, speed: -1.4}\n"
                       "    - {kind: cycle, name: c, centre: [0, 3], radius: 0.7, speed: 2.3}\n"
                       "axes:\n"
                       "  tasks: [trio, pair]\n"
                       "  tasks.b.rotate: [0, 90]\n";
    if (load(sets, "sets.yaml", &s) == CX_OK) {
        cx_study_bind(s, 0, &p);
        cx_test_true("task_sets axis: first label trio has 3 tasks",
                     p.ntasks == 3 && strcmp(p.tasks[2].name, "c") == 0, "", SRC_SPEC);
        cx_study_bind(s, 3, &p);
        cx_test_true("task_sets axis: second label pair has 2 tasks", p.ntasks == 2, "", SRC_SPEC);
        cx_test_abs("tasks.b.rotate 90 degrees in radians", p.tasks[1].rotate, pi / 2, 1e-15,
                    "analytic: 90 deg = pi/2 rad");
        cx_test_abs("rotate axis leaves task a alone", p.tasks[0].rotate, 0, 0, SRC_SPEC);
        cx_test_true("find_cell by label",
                     cx_study_find_cell(s, "tasks=pair,tasks.b.rotate=90", &cell) == CX_OK &&
                         cell == 3,
                     cx_err_message(), SRC_ROW);
        cx_err_clear();
    } else {
        cx_test_true("task_sets file loads", 0, "", SRC_SPEC);
    }
    cx_study_destroy(&s);

    const char *flows = "study: {name: two-flows}\n"
                        "tasks:\n"
                        "  - {kind: flow, name: butter, system: lorenz}\n"
                        "  - {kind: flow, name: spiral, system: rossler, parameters: {c: 6.3},\n"
                        "     start: [0.5, -0.5, 0.25], transient: 35, step: 0.002}\n"
                        "axes:\n"
                        "  tasks.spiral.transient: [35, 70]\n";
    if (load(flows, "flows.yaml", &s) == CX_OK && cx_study_bind(s, 1, &p) == CX_OK) {
        cx_test_true("flow defaults: Lorenz sigma 10, rho 28",
                     p.tasks[0].par[0] == 10 && p.tasks[0].par[1] == 28 && p.dim == 3, "",
                     "Lorenz 1963, J. Atmos. Sci. 20, 130");
        cx_test_abs("flow defaults: Lorenz beta 8/3", p.tasks[0].par[2], 8.0 / 3.0, 1e-15,
                    "Lorenz 1963, J. Atmos. Sci. 20, 130");
        cx_test_true("flow defaults: transient 50, step 0.001",
                     p.tasks[0].transient == 50 && p.tasks[0].inner_dt == 0.001, "", SRC_SPEC);
        cx_test_true("flow parameters: Rossler a = b = 0.2 kept, c = 6.3 written",
                     p.tasks[1].par[0] == 0.2 && p.tasks[1].par[1] == 0.2 &&
                         p.tasks[1].par[2] == 6.3,
                     "", "Rossler 1976, Phys. Lett. A 57, 397");
        cx_test_true("flow start, step and transient axis",
                     p.tasks[1].x0[2] == 0.25 && p.tasks[1].inner_dt == 0.002 &&
                         p.tasks[1].transient == 70,
                     "", SRC_YAML);
    } else {
        cx_test_true("flow file loads and binds", 0, cx_err_message(), SRC_SPEC);
        cx_err_clear();
    }
    cx_study_destroy(&s);
}

static void check_file_task(void)
{
    const char *dir = "study-files";
    char path[256];
    cx_study *s = NULL;
    cx_cell_params p;
    mkdir(dir, 0755);
    snprintf(path, sizeof path, "%s/orbit.csv", dir);
    FILE *f = fopen(path, "w");
    if (f != NULL) {
        fprintf(f, "x,y,z\n");
        for (int i = 0; i < 50; i++)
            fprintf(f, "%.6f,%.6f,%.6f\n", cos(0.1 * i), sin(0.1 * i), 0.01 * i);
        fclose(f);
    }
    snprintf(path, sizeof path, "%s/sweep.yaml", dir);
    f = fopen(path, "w");
    if (f != NULL) {
        fprintf(f, "study: {name: measured-helix}\n"
                   "tasks:\n"
                   "  - {kind: file, name: helix, path: orbit.csv, dt: 0.1}\n");
        fclose(f);
    }
    int rc = cx_study_load(path, &s);
    if (rc == CX_OK && cx_study_bind(s, 0, &p) == CX_OK) {
        cx_test_true("file task: path resolved against the sweep file's directory, width 3",
                     strcmp(p.tasks[0].path, "study-files/orbit.csv") == 0 && p.dim == 3 &&
                         p.tasks[0].file_dt == 0.1,
                     p.tasks[0].path, "the CSV written above (3 columns)");
    } else {
        cx_test_true("file task loads", 0, cx_err_message(), SRC_SPEC);
        cx_err_clear();
    }
    cx_study_destroy(&s);
}

/* Lines of b that are not in a (both sorted, newline separated). */
static int diff_lines(const char *a, const char *b, char *first, size_t n)
{
    int count = 0;
    const char *p = b;
    first[0] = '\0';
    while (*p) {
        const char *e = strchr(p, '\n');
        size_t len = e ? (size_t)(e - p) : strlen(p);
        int found = 0;
        const char *q = a;
        while (*q && !found) {
            const char *qe = strchr(q, '\n');
            size_t ql = qe ? (size_t)(qe - q) : strlen(q);
            found = ql == len && strncmp(p, q, len) == 0;
            q = qe ? qe + 1 : q + ql;
        }
        if (!found) {
            if (count == 0)
                snprintf(first, n, "%.*s", (int)len, p);
            count++;
        }
        p = e ? e + 1 : p + len;
    }
    return count;
}

static void check_canonical(void)
{
    const char *a = "study: {name: canon}\n"
                    "tasks: [{kind: cycle, name: disc, radius: 1.5, speed: 2.0}]\n"
                    "axes:\n"
                    "  reservoir.spectral_radius: [0.5, 1.25]\n";
    const char *b = "# the same study, written differently\n"
                    "axes:\n"
                    "    reservoir.spectral_radius:\n"
                    "        - 0.50\n"
                    "        - 1.25e0\n"
                    "tasks:\n"
                    "    - name: disc\n"
                    "      kind: cycle\n"
                    "      speed: 2.0   # anticlockwise\n"
                    "      radius: 1.5\n"
                    "      centre: [0, 0]\n"
                    "      ellipticity: 1\n"
                    "study:\n"
                    "    name: canon\n"
                    "    seed: 1\n"
                    "reservoir: {nodes: 500, spectral_radius: 0.9, mean_degree: 3}\n"
                    "training: {ridge: 1.0e-6, blend: 0.5}\n"
                    "classify: {bound: 4}\n";
    const char *c = "study: {name: canon}\n"
                    "training: {ridge: 2.0e-6}\n"
                    "tasks: [{kind: cycle, name: disc, radius: 1.5, speed: 2.0}]\n"
                    "axes:\n"
                    "  reservoir.spectral_radius: [0.5, 1.25]\n";
    cx_study *sa = NULL, *sb = NULL, *sc = NULL;
    char first[512];
    if (load(a, "a.yaml", &sa) != CX_OK || load(b, "b.yaml", &sb) != CX_OK ||
        load(c, "c.yaml", &sc) != CX_OK) {
        cx_test_true("canonical: the three files load", 0, "", SRC_SPEC);
        goto done;
    }
    cx_test_true("canonical: equal for formatting, comments, order and written defaults",
                 strcmp(cx_study_canonical(sa), cx_study_canonical(sb)) == 0, "",
                 "YAML 1.2 spec: flow/block styles and comments carry no content");
    int nd = diff_lines(cx_study_canonical(sa), cx_study_canonical(sc), first, sizeof first);
    cx_test_true("canonical: a changed ridge changes exactly the ridge line",
                 nd == 1 && strncmp(first, "training.ridge: 1.9999999999999999e-06", 38) == 0,
                 first, "%.17g of 2e-6 (IEEE 754 double nearest 2e-6)");
    cx_test_true(
        "canonical: the axis key prints axis, not the fixed value",
        strstr(cx_study_canonical(sb), "reservoir.spectral_radius: axis\n") != NULL &&
            strstr(cx_study_canonical(sb), "axis.0.reservoir.spectral_radius: 0.5, 1.25\n") != NULL,
        "", SRC_SPEC);
    cx_test_true("canonical: task keys listed",
                 strstr(cx_study_canonical(sa), "tasks.disc.radius: 1.5\n") != NULL, "", SRC_SPEC);
    {
        /* Sorted: every line >= the one before. */
        const char *t = cx_study_canonical(sa), *prev = t;
        int sorted = 1;
        for (const char *e = strchr(t, '\n'); e != NULL && e[1]; e = strchr(e + 1, '\n')) {
            const char *next = e + 1;
            const char *ne = strchr(next, '\n');
            size_t l1 = (size_t)(e - prev), l2 = ne ? (size_t)(ne - next) : strlen(next);
            int cmp = strncmp(prev, next, l1 < l2 ? l1 : l2);
            if (cmp > 0 || (cmp == 0 && l1 > l2))
                sorted = 0;
            prev = next;
        }
        cx_test_true("canonical: lines sorted", sorted, "", "bytewise order (strcmp)");
    }
done:
    cx_err_clear();
    cx_study_destroy(&sa);
    cx_study_destroy(&sb);
    cx_study_destroy(&sc);
}

int main(void)
{
    check_defaults();
    check_full();
    check_families_and_sets();
    check_file_task();
    check_canonical();
    check_missing_file();
    check_bad();
    return cx_test_finish();
}
