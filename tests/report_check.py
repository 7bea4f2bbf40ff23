#!/usr/bin/python3
"""External checks of `coexist report` and `coexist replay` (run by ctest, tests/report.cmake).

usage: report_check.py SCENARIO WORKDIR, SCENARIO one of
  wilson     the C Wilson interval (tests/test_report --wilson-table) against scipy's
             scipy.stats.binomtest(k, n).proportion_ci(method="wilson") (Debian python3-scipy)
  synthetic  a cube written here with h5py in the engine's layout (src/engine/cube.c) with a
             known answer: capacity table, ensemble CSV, region map PNG pixels decoded with zlib
             and compared with the Okabe & Ito colours of the stored classes, SVG through
             xmllint, PDF header, rendering with no fonts at all
  replay     `coexist run` on jobs/demo-window.yaml, then `coexist replay` of several cells must
             report exact agreement; a cube with one stored value changed by one ulp must not;
             the report's probabilities equal numpy's means of the stored flags
Each check prints one PASS/FAIL line with its source. Exit 0 when all pass, 1 when one fails,
77 (ctest's skip) when a command the scenario needs does not exist yet.
"""
import os
import shutil
import struct
import subprocess
import sys
import zlib

import numpy as np

PASSED = 0
FAILED = 0


def check(what, ok, detail, source):
    global PASSED, FAILED
    if ok:
        PASSED += 1
    else:
        FAILED += 1
    print("%s: %s (%s) [source: %s]" % ("PASS" if ok else "FAIL", what, detail, source),
          flush=True)


def finish():
    print("%d passed, %d failed" % (PASSED, FAILED))
    sys.exit(0 if FAILED == 0 else 1)


BIN = os.environ.get("CX_BINARY", "coexist")
SRC = os.environ.get("CX_SOURCE_DIR", os.path.join(os.path.dirname(__file__), ".."))


def run(args, env=None, check_rc=True):
    e = dict(os.environ)
    e["OPENBLAS_NUM_THREADS"] = "1"
    if env:
        e.update(env)
    p = subprocess.run([BIN] + args, capture_output=True, text=True, env=e)
    if check_rc and p.returncode != 0:
        print(p.stdout)
        print(p.stderr)
    return p


# Okabe M, Ito K (2008) Color Universal Design (CUD): how to make figures and presentations that
# are friendly to colorblind people, J*FLY. Hex values quoted from memory. The assignment of
# classes to colours is the one documented in src/report/stats.c.
OKABE_ITO = {"orange": 0xE69F00, "sky blue": 0x56B4E9, "bluish green": 0x009E73,
             "yellow": 0xF0E442, "blue": 0x0072B2, "vermillion": 0xD55E00,
             "reddish purple": 0xCC79A7, "black": 0x000000}
CLASS_COLOUR = {"multifunctional": OKABE_ITO["bluish green"], "other-trained": OKABE_ITO["sky blue"],
                "fixed-point": OKABE_ITO["blue"], "untrained-cycle": OKABE_ITO["yellow"],
                "untrained-aperiodic": OKABE_ITO["orange"], "diverged": OKABE_ITO["vermillion"],
                "failed": OKABE_ITO["black"], "tied": OKABE_ITO["reddish purple"],
                "no-data": 0xFFFFFF}

OUTCOMES = ["not-run", "reconstructed", "other-trained", "fixed-point", "untrained-cycle",
            "untrained-aperiodic", "diverged"]
STATUSES = ["not-done", "computed", "failed-not-positive-definite", "failed-non-finite",
            "failed-invalid", "skipped"]


def read_png(path):
    """Decode an 8-bit RGB or RGBA PNG (ISO/IEC 15948:2004, W3C PNG 2nd edition: chunks, zlib
    stream, the five scanline filters) into an array of shape (height, width, channels)."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, width = 8, b"", None
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        pos += 12 + n
        if kind == b"IHDR":
            width, height, depth, ctype, _, _, interlace = struct.unpack(">IIBBBBB", body)
            assert depth == 8 and ctype in (2, 6) and interlace == 0, (depth, ctype, interlace)
            ch = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat += body
        elif kind == b"IEND":
            break
    raw = zlib.decompress(idat)
    stride = width * ch
    out = np.zeros((height, stride), dtype=np.int32)
    prev = np.zeros(stride, dtype=np.int32)
    for y in range(height):
        f = raw[y * (stride + 1)]
        line = np.frombuffer(raw, dtype=np.uint8, count=stride, offset=y * (stride + 1) + 1)
        line = line.astype(np.int32)
        cur = np.zeros(stride, dtype=np.int32)
        if f == 0:
            cur = line
        elif f == 2:
            cur = (line + prev) & 0xFF
        else:
            for i in range(stride):
                a = cur[i - ch] if i >= ch else 0
                b = prev[i]
                c = prev[i - ch] if i >= ch else 0
                if f == 1:
                    pred = a
                elif f == 3:
                    pred = (a + b) // 2
                else:
                    pa, pb, pc = abs(b - c), abs(a - c), abs(a + b - 2 * c)
                    pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                cur[i] = (line[i] + pred) & 0xFF
        out[y] = cur
        prev = cur
    return out.reshape(height, width, ch)


def wilson_scenario(work):
    from scipy.stats import binomtest
    exe = os.environ["CX_TEST_REPORT"]
    lines = subprocess.run([exe, "--wilson-table"], capture_output=True, text=True,
                           check=True).stdout.split("\n")
    worst, cases, edge = 0.0, 0, []
    for ln in lines:
        if not ln.strip():
            continue
        k, n, lo, hi = ln.split()
        k, n, lo, hi = int(k), int(n), float(lo), float(hi)
        ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
        worst = max(worst, abs(lo - ci.low), abs(hi - ci.high))
        cases += 1
        if k in (0, n):
            edge.append((k, n, lo, hi, ci.low, ci.high))
    src = 'scipy.stats.binomtest(k, n).proportion_ci(method="wilson"), Debian python3-scipy'
    check("Wilson interval on %d (k, n) cases, k from 0 to n, n from 1 to 12345" % cases,
          worst <= 1e-12, "largest difference %.3g, abs tol 1e-12" % worst, src)
    ok0 = all(abs(r[2] - r[4]) <= 1e-12 and abs(r[3] - r[5]) <= 1e-12 for r in edge)
    check("Wilson interval at k = 0 and k = n (%d cases)" % len(edge), ok0 and len(edge) >= 20,
          "abs tol 1e-12", src)
    finish()


# A sweep file that gives the synthetic grid; it binds, so the report gets each cell's task
# count from it (task_count tasks). Our own scenario, only its shape matters.
SYNTH_SWEEP = """study:
  name: synthetic-ring
  seed: 4242
tasks:
  - kind: family
    name: loop
    arrangement: cycles-ring
    count: 1
    spacing: 2.5
    template: {kind: cycle, radius: 0.7, speed: 1.9}
probe:
  random_starts: 3
axes:
  reservoir.nodes: [50, 100, 200, 400]
  task_count: [1, 2, 3, 4]
  seed: {count: 12}
"""

NODES = [50, 100, 200, 400]
KS = [1, 2, 3, 4]
SEEDS = 12
# multifunctional cells out of 12 at each (nodes, task count); nodes = 400 is not done at all.
SUCCESS = {50: [12, 7, 3, 0], 100: [12, 12, 9, 2], 200: [12, 11, 3, 8]}
# the failure class of the other cells of each node count; (100, 4) splits 5 / 5, a tie;
# (200, 3) has 3 cells that failed with a non-positive-definite Gram matrix.
FAILURE = {50: "fixed-point", 100: "untrained-aperiodic", 200: "other-trained"}


def build_synthetic(path):
    import h5py
    shape = (len(NODES), len(KS), SEEDS)
    max_runs, max_tasks = 4 + 3, 4
    outcome = np.zeros(shape + (max_runs,), dtype=np.int8)
    multi = np.full(shape, -1, dtype=np.int8)
    status = np.zeros(shape, dtype=np.int8)
    done = np.zeros(shape, dtype=np.uint8)
    expect = {}
    for a, n in enumerate(NODES):
        for b, k in enumerate(KS):
            classes = []
            for s in range(SEEDS):
                if n == 400:
                    classes.append("no-data")
                    continue
                done[a, b, s] = 1
                status[a, b, s] = 1
                nruns = k + 3
                outcome[a, b, s, k:nruns] = OUTCOMES.index("untrained-cycle")
                if s < SUCCESS[n][b]:
                    multi[a, b, s] = 1
                    outcome[a, b, s, :k] = OUTCOMES.index("reconstructed")
                    classes.append("multifunctional")
                    continue
                multi[a, b, s] = 0
                fail = FAILURE[n]
                if (n, k) == (100, 4) and s % 2 == 1:
                    fail = "untrained-cycle"
                if (n, k) == (200, 3) and s >= 9:
                    status[a, b, s] = STATUSES.index("failed-not-positive-definite")
                    outcome[a, b, s, :] = 0
                    classes.append("failed")
                    continue
                outcome[a, b, s, :k] = OUTCOMES.index(fail)
                classes.append(fail)
            expect[(n, k)] = classes
    with h5py.File(path, "w") as f:
        def sattr(obj, name, text):
            obj.attrs.create(name, np.bytes_(text.encode()))
        f.attrs["coexist_format"] = np.int64(1)
        sattr(f, "study_name", "synthetic-ring")
        sattr(f, "sweep_file", SYNTH_SWEEP)
        sattr(f, "canonical", "written by tests/report_check.py")
        f.attrs["cells"] = np.int64(np.prod(shape))
        f.attrs["max_runs"] = np.int64(max_runs)
        f.attrs["max_tasks"] = np.int64(max_tasks)
        axes = []
        for name, units, vals in (("reservoir.nodes", "nodes", NODES), ("task_count", "tasks", KS),
                                  ("seed", "replicate", list(range(SEEDS)))):
            d = f.create_dataset(name.replace(".", "_"), data=np.array(vals, dtype=np.float64))
            d.make_scale(name.replace(".", "_"))
            sattr(d, "axis_name", name)
            sattr(d, "units", units)
            axes.append(d)
        run = f.create_dataset("run", data=np.arange(max_runs, dtype=np.int32))
        run.make_scale("run")
        task = f.create_dataset("task", data=np.arange(max_tasks, dtype=np.int32))
        task.make_scale("task")
        oenum = h5py.enum_dtype({nm: i for i, nm in enumerate(OUTCOMES)}, basetype="i1")
        senum = h5py.enum_dtype({nm: i for i, nm in enumerate(STATUSES)}, basetype="i1")

        def var(name, data, dtype):
            d = f.create_dataset(name, data=data, dtype=dtype)
            for i, ax in enumerate(axes):
                d.dims[i].attach_scale(ax)
            if data.ndim > 3:
                d.dims[3].attach_scale(run)
            if data.ndim > 4:
                d.dims[4].attach_scale(task)
        var("outcome", outcome, oenum)
        var("attractor", np.full(shape + (max_runs,), -1, dtype=np.int8), np.int8)
        var("cluster", np.full(shape + (max_runs,), -1, dtype=np.int8), np.int8)
        var("distance", np.full(shape + (max_runs, max_tasks), np.nan), np.float64)
        for nm in ("coverage", "roundness", "rotation", "period", "valid_time", "lyapunov",
                   "stop_time"):
            var(nm, np.full(shape + (max_runs,), np.nan), np.float64)
        var("status", status, senum)
        var("multifunctional", multi, np.int8)
        var("untrained", np.where(done == 1, 3, -1).astype(np.int16), np.int16)
        for kind, n in (("untrained_fixed_points", 1), ("untrained_cycles", 2),
                        ("untrained_aperiodic", 0)):
            var(kind, np.where(done == 1, n, -1).astype(np.int16), np.int16)
        for nm in ("rho_unscaled", "wout_norm", "wout_square_norm", "wall_time"):
            var(nm, np.full(shape, np.nan), np.float64)
        var("done", done, np.uint8)
    return expect


def wilson(k, n):
    from scipy.stats import binomtest
    if n == 0:
        return 0.0, 1.0
    ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    return ci.low, ci.high


def capacity_by_definition(succ, dones, threshold):
    """Largest K with the statistic >= threshold at K and every smaller K (report.h)."""
    out = []
    for stat in ("p", "lo", "hi"):
        best = 0
        for k, s, n in zip(KS, succ, dones):
            lo, hi = wilson(s, n)
            v = {"p": s / n if n else -1, "lo": lo if n else -1, "hi": hi}[stat]
            if v >= threshold:
                best = k
            else:
                break
        out.append(best)
    return out


def majority(classes):
    if all(c == "no-data" for c in classes):
        return "no-data"
    counts = {}
    for c in classes:
        counts[c] = counts.get(c, 0) + 1
    top = max(counts.values())
    winners = [c for c, v in counts.items() if v == top]
    return winners[0] if len(winners) == 1 else "tied"


def synthetic_scenario(work):
    import csv
    import h5py
    os.makedirs(work, exist_ok=True)
    cube = os.path.join(work, "synthetic.h5")
    expect = build_synthetic(cube)
    out = os.path.join(work, "out")
    shutil.rmtree(out, ignore_errors=True)
    p = run(["report", cube, "--by", "reservoir.nodes,task_count", "-o", out])
    check("coexist report on the synthetic cube", p.returncode == 0, "exit %d" % p.returncode,
          "the command's contract")
    if p.returncode != 0:
        finish()
    print(p.stdout)
    # distinct untrained attractors: the synthetic cube stores 1 fixed point, 2 periodic orbits
    # and 0 aperiodic attractors in every computed cell
    with h5py.File(cube, "r") as f:
        computed = int(np.sum((f["done"][...] == 1) & (f["status"][...] == 1)))
    lines = {k: l for l in p.stdout.split("\n") for k in ("fixed points", "periodic orbits",
                                                          "aperiodic attractors") if k in l}
    want = {"fixed points": computed, "periodic orbits": 2 * computed, "aperiodic attractors": 0}
    ok = all(k in lines and (" %d in all" % v) in lines[k] for k, v in want.items())
    check("summary of distinct untrained attractors by kind", ok,
          "; ".join(lines.get(k, "missing").strip() for k in want), "the synthetic cube's counts")
    # capacity, hand-derived from the counts above and recomputed from scipy's intervals
    hand = {50: (2, 1, 3), 100: (3, 2, 3), 200: (2, 2, 4), 400: (0, 0, 4)}
    rows = list(csv.DictReader(open(os.path.join(out, "capacity.csv"))))
    got = {int(float(r["reservoir.nodes"])): (float(r["capacity"]), float(r["lower95"]),
                                              float(r["upper95"])) for r in rows}
    for n in NODES:
        succ = SUCCESS.get(n, [0, 0, 0, 0])
        dones = [0 if n == 400 else sum(1 for c in expect[(n, k)] if c != "no-data") for k in KS]
        ref = capacity_by_definition(succ, dones, 0.5)
        check("capacity at %d nodes (estimate, lower, upper)" % n,
              n in got and tuple(got[n]) == tuple(float(v) for v in ref) and
              tuple(ref) == hand[n],
              "got %s, want %s" % (got.get(n), hand[n]),
              "known answer by construction; the bounds from scipy's Wilson interval "
              "(binomtest.proportion_ci), definition in include/coexist/report.h")
    ens = list(csv.DictReader(open(os.path.join(out, "ensemble.csv"))))
    worst = 0.0
    for r in ens:
        n, k = int(float(r["reservoir.nodes"])), int(float(r["task_count"]))
        classes = expect[(n, k)]
        nd = sum(1 for c in classes if c != "no-data")
        if nd == 0:
            continue
        for cls in ("multifunctional", "fixed-point", "untrained-aperiodic", "failed"):
            kk = sum(1 for c in classes if c == cls)
            lo, hi = wilson(kk, nd)
            col = "p_" + cls if cls != "multifunctional" else "p_multifunctional"
            worst = max(worst, abs(float(r[col]) - kk / nd))
            l_col = "lo95_" + cls if cls != "multifunctional" else "lo95"
            h_col = "hi95_" + cls if cls != "multifunctional" else "hi95"
            worst = max(worst, abs(float(r[l_col]) - lo), abs(float(r[h_col]) - hi))
    check("ensemble.csv probabilities and intervals of four classes at 12 grid points",
          worst <= 1e-6, "largest difference %.3g, abs tol 1e-6 (six decimals)" % worst,
          "counts by construction; scipy binomtest(k, n).proportion_ci(method='wilson')")
    # the map: pixel colour at each rectangle's centre is the colour of its majority class
    img = read_png(os.path.join(out, "map-classes.png"))
    rows = list(csv.DictReader(open(os.path.join(out, "map-classes.csv"))))
    bad, seen = [], set()
    for r in rows:
        n, k = int(float(r["reservoir.nodes"])), int(float(r["task_count"]))
        want = majority(expect[(n, k)])
        seen.add(want)
        x, y = int(r["px"]), int(r["py"])
        pix = img[y, x, :3]
        rgb = (int(pix[0]) << 16) | (int(pix[1]) << 8) | int(pix[2])
        # also 5 pixels off centre in each direction: the whole rectangle, not one dot
        ring = [img[y + dy, x + dx, :3] for dx, dy in ((5, 0), (-5, 0), (0, 5), (0, -5))]
        ok_ring = all(((int(q[0]) << 16) | (int(q[1]) << 8) | int(q[2])) == CLASS_COLOUR[want]
                      for q in ring)
        if rgb != CLASS_COLOUR[want] or r["majority"] != want or not ok_ring:
            bad.append((n, k, want, "#%06X" % rgb, r["majority"]))
    check("map-classes.png: 16 rectangles carry the colour of their majority class",
          not bad and len(rows) == 16, "mismatches %s" % bad,
          "Okabe & Ito 2008 palette (hex from memory); classes by construction; PNG decoded "
          "with zlib per the PNG specification (W3C 2003)")
    check("the synthetic map shows multifunctional, fixed-point, other-trained, tied, no-data",
          {"multifunctional", "fixed-point", "other-trained", "tied", "no-data"} <= seen,
          "classes seen: %s" % sorted(seen), "construction of the synthetic cube")
    img = read_png(os.path.join(out, "map-multifunctional.png"))
    rows = list(csv.DictReader(open(os.path.join(out, "map-multifunctional.csv"))))
    ends = []
    for r in rows:
        x, y = int(r["px"]), int(r["py"])
        rgb = (int(img[y, x, 0]) << 16) | (int(img[y, x, 1]) << 8) | int(img[y, x, 2])
        if r["p_multifunctional"] == "1.000000":
            ends.append(rgb == OKABE_ITO["blue"])
        if r["p_multifunctional"] == "0.000000":
            ends.append(rgb == OKABE_ITO["yellow"])
        if r["p_multifunctional"] in ("nan", "-nan"):
            ends.append(rgb == 0xFFFFFF)
    check("probability map: p = 1 blue #0072B2, p = 0 yellow #F0E442, no data white",
          len(ends) >= 6 and all(ends), "%d of %d pixels" % (sum(ends), len(ends)),
          "Okabe & Ito 2008 (hex from memory); ends of our scale (src/report/figure.c)")
    for name in ("map-classes", "map-multifunctional", "capacity"):
        svg = os.path.join(out, name + ".svg")
        x = subprocess.run(["xmllint", "--noout", svg], capture_output=True, text=True)
        check("%s.svg is well-formed XML" % name, x.returncode == 0, x.stderr.strip()[:200],
              "xmllint (libxml2-utils), XML 1.0")
        head = open(os.path.join(out, name + ".pdf"), "rb").read(5)
        check("%s.pdf starts with a PDF header" % name, head == b"%PDF-", repr(head),
              "ISO 32000-1:2008, 7.5.2 (file header)")
    # no fonts at all: fontconfig given an empty configuration; drawing must still succeed
    conf = os.path.join(work, "empty-fonts.conf")
    with open(conf, "w") as f:
        f.write('<?xml version="1.0"?>\n<fontconfig></fontconfig>\n')
    out2 = os.path.join(work, "nofont")
    shutil.rmtree(out2, ignore_errors=True)
    p = run(["report", cube, "--by", "reservoir.nodes,task_count", "-o", out2],
            env={"FONTCONFIG_FILE": conf})
    ok = p.returncode == 0 and os.path.getsize(os.path.join(out2, "map-classes.png")) > 1000
    check("report renders with no font installed", ok, "exit %d" % p.returncode,
          "cairo toy text API falls back without a font (our requirement)")
    finish()


def replay_scenario(work):
    import h5py
    helptext = run(["--help"], check_rc=False).stdout
    if "\n  run " not in helptext or "\n  replay " not in helptext:
        print("SKIP: coexist run or replay does not exist yet in this build")
        sys.exit(77)
    os.makedirs(work, exist_ok=True)
    cube = os.path.join(work, "demo.h5")
    sweep = os.path.join(SRC, "jobs", "demo-window.yaml")
    p = run(["run", sweep, "-o", cube, "--fresh", "--progress", "60"])
    check("coexist run of jobs/demo-window.yaml", p.returncode == 0, "exit %d" % p.returncode,
          "the command's contract")
    if p.returncode != 0:
        finish()
    cells = ["reservoir.spectral_radius=1.3,seed=1", "reservoir.spectral_radius=0.1,seed=0",
             "reservoir.spectral_radius=2.5,seed=2", "reservoir.spectral_radius=0.9,seed=0"]
    for at in cells:
        p = run(["replay", cube, "--at", at])
        ok = p.returncode == 0 and "exact agreement" in p.stdout
        check("replay %s agrees bit for bit with the cube" % at, ok,
              p.stdout.strip().split("\n")[-1] if p.stdout else p.stderr.strip(),
              "the cube written by coexist run (the engine)")
    plots = os.path.join(work, "portraits")
    dump = os.path.join(work, "cell7.h5")
    for path in (dump,):
        if os.path.exists(path):
            os.remove(path)
    p = run(["replay", cube, "--index", "7", "--dump", dump, "--plot", plots])
    check("replay --index 7 with --dump and --plot agrees", p.returncode == 0 and
          "exact agreement" in p.stdout, "exit %d" % p.returncode, "the cube")
    pngs = sorted(x for x in os.listdir(plots) if x.endswith(".png")) if os.path.isdir(plots) else []
    with h5py.File(cube, "r") as f, h5py.File(dump, "r") as d:
        nruns = int(d.attrs["runs"])
        stored = f["outcome"][2, 1, :]  # cell 7 = (spectral radius index 2, seed 1)
        enum = h5py.check_enum_dtype(f["outcome"].dtype)
        names = {v: k for k, v in enum.items()}
        same = all(d["runs/%d" % j].attrs["outcome"].decode() == names[int(stored[j])]
                   for j in range(nruns))
    check("the dump's run outcomes equal the cube's for cell 7", same and nruns == 6,
          "%d runs" % nruns, "h5py reading both files")
    check("one portrait per run", len(pngs) == 6 and all(
        read_png(os.path.join(plots, x)).shape[:2] == (560, 560) for x in pngs),
        "%d PNGs" % len(pngs), "PNG decoded with zlib (W3C PNG specification)")
    # a changed stored value must be found: one ulp added to a period
    bad = os.path.join(work, "tampered.h5")
    shutil.copy(cube, bad)
    with h5py.File(bad, "r+") as f:
        per = f["period"][3, 1, 0]
        f["period"][3, 1, 0] = np.nextafter(per, np.inf)
    p = run(["replay", bad, "--at", "reservoir.spectral_radius=1.3,seed=1"], check_rc=False)
    check("replay finds a stored period changed by one ulp", p.returncode == 1 and
          "DIFFERENT: 1 of" in p.stdout, "exit %d" % p.returncode,
          "IEEE 754 nextafter through numpy")
    # the report's probabilities against numpy means of the stored flags
    out = os.path.join(work, "report")
    shutil.rmtree(out, ignore_errors=True)
    p = run(["report", cube, "-o", out])
    import csv
    rows = list(csv.DictReader(open(os.path.join(out, "ensemble.csv"))))
    with h5py.File(cube, "r") as f:
        mf = f["multifunctional"][...]
        rho = f["reservoir_spectral_radius"][...]
    worst = max(abs(float(r["p_multifunctional"]) - float(np.mean(mf[i] == 1)))
                for i, r in enumerate(rows))
    same_axis = all(abs(float(r["reservoir.spectral_radius"]) - rho[i]) < 1e-12
                    for i, r in enumerate(rows))
    check("report of the demo cube: P(multifunctional) per spectral radius = numpy mean over "
          "seeds", p.returncode == 0 and same_axis and worst <= 1e-6 and len(rows) == 6,
          "largest difference %.3g, abs tol 1e-6" % worst, "numpy.mean of the cube read by h5py")
    finish()


def main():
    scenario, work = sys.argv[1], sys.argv[2]
    os.makedirs(work, exist_ok=True)
    {"wilson": wilson_scenario, "synthetic": synthetic_scenario,
     "replay": replay_scenario}[scenario](work)


if __name__ == "__main__":
    main()
