#!/usr/bin/python3
"""coexist engine tests that drive the coexist binary under mpirun and read the cubes with
h5py and xarray (Debian's python3-h5py 3.7 and python3-xarray 2023.01, independent readers of
the HDF5 file). One scenario per ctest entry: `engine_cli.py SCENARIO WORKDIR`.

The references are outside the engine: byte equality of result datasets between runs (the
reproducibility contract of DESIGN.md), counts derived by hand from the stage-key table in
include/coexist/cell.h, the enum names of include/coexist/classify.h and cell.h as read back by
h5py, and file bytes and mtimes read by the operating system.
"""
import os
import re
import shutil
import signal
import subprocess
import sys
import time

import h5py
import numpy as np

BIN = os.environ["CX_BINARY"]
MPI = os.environ.get("CX_MPIEXEC") or "mpirun"
SRC = os.environ["CX_SOURCE_DIR"]
SWEEPS = os.path.join(SRC, "tests", "sweeps")
SMALL = os.path.join(SWEEPS, "engine_small.yaml")
BIG = os.path.join(SWEEPS, "engine_bench64.yaml")
NOT_RESULTS = {"wall_time"}  # per-cell wall time depends on the machine: not a result
RESULTS = {"outcome", "attractor", "distance", "coverage", "roundness", "rotation", "period",
           "valid_time", "lyapunov", "stop_time", "status", "multifunctional", "untrained",
           "rho_unscaled", "wout_norm", "wout_square_norm", "done"}

counts = {"passed": 0, "failed": 0}


def check(what, cond, detail, source):
    counts["passed" if cond else "failed"] += 1
    print("%s: %s (%s) [source: %s]" % ("PASS" if cond else "FAIL", what, detail, source),
          flush=True)


def run(args, ranks=None, timeout=240):
    cmd = ([MPI, "-n", str(ranks)] if ranks else []) + [BIN] + args
    p = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    return p.returncode, p.stdout + p.stderr


def result_bytes(path):
    out = {}
    with h5py.File(path, "r") as f:
        for name, obj in f.items():
            if isinstance(obj, h5py.Dataset) and name not in NOT_RESULTS:
                out[name] = (obj.dtype.str, obj.shape, obj[...].tobytes())
    return out


def attr(path, name):
    with h5py.File(path, "r") as f:
        v = f.attrs[name]
        return v.decode() if isinstance(v, bytes) else v


def same_results(a, b):
    ra, rb = result_bytes(a), result_bytes(b)
    differ = sorted(k for k in set(ra) | set(rb) if ra.get(k) != rb.get(k))
    return differ


def file_state(path):
    st = os.stat(path)
    with open(path, "rb") as f:
        return (st.st_mtime_ns, st.st_size, f.read())


def scenario_ranks(wd):
    src = "DESIGN.md reproducibility contract: result datasets independent of the rank count"
    cubes = {}
    for n in (1, 2, 3):
        cube = os.path.join(wd, "ranks%d.h5" % n)
        # -n 3 writes into the cube after every cell, so two ranks write interleaved cells
        # into the same datasets while the sweep runs.
        extra = ["--checkpoint", "0"] if n == 3 else []
        rc, log = run(["run", SMALL, "-o", cube, "--fresh"] + extra, ranks=n)
        check("run -n %d exits 0" % n, rc == 0, "exit %d" % rc, "commands.h exit codes")
        if rc != 0:
            print(log)
            return
        cubes[n] = cube
    names = set(result_bytes(cubes[1]))
    check("cube holds every result dataset", RESULTS <= names,
          "missing %s" % sorted(RESULTS - names), "cube layout in src/engine/cube.c")
    for n in (2, 3):
        differ = same_results(cubes[1], cubes[n])
        check("-n 1 and -n %d give byte-identical result datasets" % n, not differ,
              "differing: %s" % differ, src)
    with h5py.File(cubes[3], "r") as f:
        done = f["done"][...]
        check("every cell done", bool(done.all()), "%d of %d" % (done.sum(), done.size),
              "the run printed complete")
        check("rank count attribute", int(f.attrs["ranks"]) == 3, "ranks=%s" % f.attrs["ranks"],
              "mpirun -n 3")


def scenario_reuse(wd):
    src = ("stage-key table of include/coexist/cell.h: networks <- seed axis (2 values), drives "
           "<- networks x spectral radius (3 values), solves per cell, probes = cells x runs")
    for n in (1, 3):
        cube = os.path.join(wd, "reuse%d.h5" % n)
        rc, log = run(["run", SMALL, "-o", cube, "--fresh"], ranks=n)
        if rc != 0:
            print(log)
        check("run -n %d exits 0" % n, rc == 0, "exit %d" % rc, "commands.h exit codes")
        nets, drives = int(attr(cube, "stage_networks")), int(attr(cube, "stage_drives"))
        solves, probes = int(attr(cube, "stage_solves")), int(attr(cube, "stage_probes"))
        if n == 1:
            check("-n 1: networks built == distinct network keys", nets == 2, "%d, want 2" % nets,
                  src)
        else:
            # Two workers each own one network group; a worker that runs out takes units from
            # the back of the other's group (load balance), which builds that network once
            # more: at most one extra network per worker.
            check("-n 3: distinct network keys <= networks built <= keys + workers",
                  2 <= nets <= 4, "%d, want 2..4" % nets, src)
        check("-n %d: drives == distinct drive keys" % n, drives == 6, "%d, want 6" % drives, src)
        check("-n %d: solves == cells" % n, solves == 24, "%d, want 24" % solves, src)
        check("-n %d: probes == cells x runs" % n, probes == 96, "%d, want 96" % probes, src)


def scenario_readers(wd):
    cube = os.path.join(wd, "readers.h5")
    rc, log = run(["run", SMALL, "-o", cube, "--fresh"], ranks=1)
    check("run exits 0", rc == 0, "exit %d" % rc, "commands.h exit codes")
    import xarray as xr
    ds = xr.open_dataset(cube, engine="h5netcdf")
    want_dims = {"seed": 2, "reservoir_spectral_radius": 3, "training_ridge": 2,
                 "training_blend": 2, "run": 4, "task": 2}
    got = dict(ds.sizes)
    check("xarray (h5netcdf) sees named dimensions", got == want_dims, "%s" % got,
          "sweep file tests/sweeps/engine_small.yaml axes; HDF5 dimension scales")
    check("distance has dims (axes..., run, task)",
          ds["distance"].dims == ("seed", "reservoir_spectral_radius", "training_ridge",
                                  "training_blend", "run", "task"),
          "%s" % (ds["distance"].dims,), "cube layout")
    check("coordinate values read back", np.allclose(ds["reservoir_spectral_radius"].values,
                                                     [0.6, 0.9, 1.2]),
          "%s" % ds["reservoir_spectral_radius"].values, "tests/sweeps/engine_small.yaml")
    check("units attribute on a metric", ds["period"].attrs.get("units") == "time units",
          "%s" % ds["period"].attrs.get("units"), "cube layout")
    ds.close()
    ds = xr.open_dataset(cube, engine="netcdf4")
    check("xarray (netCDF4 library) sees every variable and named dimension",
          dict(ds.sizes) == want_dims and RESULTS <= set(ds.data_vars),
          "missing %s" % sorted(RESULTS - set(ds.data_vars)),
          "netCDF-4 reads committed enum types and dimension scales")
    ds.close()
    with h5py.File(cube, "r") as f:
        e = h5py.check_enum_dtype(f["outcome"].dtype)
        want = {"not-run": 0, "reconstructed": 1, "other-trained": 2, "fixed-point": 3,
                "untrained-cycle": 4, "untrained-aperiodic": 5, "diverged": 6}
        check("h5py shows the outcome enum labels", e == want, "%s" % e,
              "enum cx_outcome in include/coexist/classify.h")
        s = h5py.check_enum_dtype(f["status"].dtype)
        check("h5py shows the status enum", s is not None and s.get("computed") == 1,
              "%s" % s, "enum cx_cell_status in include/coexist/cell.h")
        check("sweep file text stored", attr(cube, "sweep_file") == open(SMALL).read(),
              "%d bytes" % len(attr(cube, "sweep_file")), "tests/sweeps/engine_small.yaml")
        check("axis name kept", f["reservoir_spectral_radius"].attrs["axis_name"].decode()
              == "reservoir.spectral_radius", "", "tests/sweeps/engine_small.yaml")
    rc, log = run(["status", cube])
    check("status of a complete cube", rc == 0 and "done: 24 of 24" in log, log.strip()[:200],
          "24 cells in tests/sweeps/engine_small.yaml")


def rank_pids(cube):
    """Ranks of the run writing `cube` (the path tells it from other tests' runs)."""
    out = {}
    for d in os.listdir("/proc"):
        if not d.isdigit():
            continue
        try:
            with open("/proc/%s/environ" % d, "rb") as f:
                env = f.read().split(b"\0")
            with open("/proc/%s/cmdline" % d, "rb") as f:
                cmd = f.read()
        except OSError:
            continue
        if BIN.encode() not in cmd or cube.encode() not in cmd:
            continue
        for kv in env:
            if kv.startswith(b"OMPI_COMM_WORLD_RANK="):
                out[int(kv.split(b"=")[1])] = int(d)
    return out


def scenario_crash(wd):
    src = "DESIGN.md: a resumed cube is byte-identical in every result dataset"
    ref = os.path.join(wd, "ref.h5")
    rc, log = run(["run", BIG, "-o", ref, "--fresh"], ranks=1)
    check("uninterrupted reference run", rc == 0, "exit %d" % rc, "commands.h exit codes")
    cube = os.path.join(wd, "crash.h5")
    for p in (cube,):
        if os.path.exists(p):
            os.unlink(p)
    shutil.rmtree(cube + ".journal", ignore_errors=True)
    # A long checkpoint: the cube gets no cells before the kill, so the rerun must take them
    # from the journals (flushed after every batch).
    args = [MPI, "-n", "3", BIN, BIG, "-o", cube, "--checkpoint", "600"]
    args.insert(4, "run")
    proc = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    rs = 88 + 4 * (72 + 8 * 2) + 8  # record size for 4 runs and 2 tasks (src/engine/record.c)
    jnl = os.path.join(cube + ".journal", "rank-0001.jnl")
    killed = False
    t0 = time.time()
    while time.time() - t0 < 120 and proc.poll() is None:
        if os.path.exists(jnl) and os.path.getsize(jnl) >= 64 + 2 * rs:
            pids = rank_pids(cube)
            if 1 in pids:
                os.kill(pids[1], signal.SIGKILL)
                killed = True
                break
        time.sleep(0.01)
    out, _ = proc.communicate(timeout=120)
    check("a worker was killed with SIGKILL mid-sweep", killed and proc.returncode != 0,
          "killed=%s, mpirun exit %s" % (killed, proc.returncode), "test set-up")
    with h5py.File(cube, "r") as f:
        d = int(f["done"][...].sum())
    check("the killed run left the sweep unfinished", d < 64, "%d of 64 done in the cube" % d,
          "test set-up")
    rc, st = run(["status", cube])
    check("status of an interrupted cube names rank journals", rc == 0 and "rank 1:" in st,
          st.strip().replace("\n", " | ")[:300], "journals written by ranks 1 and 2")
    # Damage the journals: a torn tail on rank 2's, one flipped byte in rank 1's first record.
    j2 = os.path.join(cube + ".journal", "rank-0002.jnl")
    with open(j2, "ab") as f:
        f.write(b"\x55" * (rs // 3))
    with open(jnl, "r+b") as f:
        f.seek(64 + 100)
        b = f.read(1)
        f.seek(64 + 100)
        f.write(bytes([b[0] ^ 0x10]))
    rc, log = run(["run", BIG, "-o", cube, "--checkpoint", "0.05"], ranks=3)
    check("rerun after the crash exits 0", rc == 0, "exit %d" % rc, "commands.h exit codes")
    m = re.search(r"to compute: (\d+) cells .*?; (\d+) already in the cube, (\d+) merged from "
                  r"journals, (\d+) damaged", log)
    if m is None:
        print(log)
    x, y, z, dropped = (int(g) for g in m.groups()) if m else (0, 0, 0, 0)
    check("rerun: computed + in cube + merged == 64 cells", x + y + z == 64,
          "%d + %d + %d" % (x, y, z), "64 cells in tests/sweeps/engine_bench64.yaml")
    check("rerun merged finished cells from the journals", z > 0, "%d merged" % z,
          "journals of the killed run")
    check("torn tail and flipped byte dropped and counted", dropped == 2, "dropped %d" % dropped,
          "the two records damaged above")
    solves = int(attr(cube, "stage_solves"))
    computed = int(attr(cube, "cells_computed"))
    check("no cell computed twice in the rerun", solves == x and computed == x,
          "solves %d, cells_computed %d, to compute %d" % (solves, computed, x),
          "one solve per cell (cell.h stage table)")
    differ = same_results(ref, cube)
    check("resumed cube == uninterrupted cube (result datasets)", not differ,
          "differing: %s" % differ, src)
    check("journals removed after completion", not os.path.exists(cube + ".journal"), "",
          "engine policy: the complete cube is the truth")


def scenario_signal(wd):
    """SIGTERM (what SLURM sends at the time limit) stops a run cleanly with exit 3."""
    cube = os.path.join(wd, "term.h5")
    if os.path.exists(cube):
        os.unlink(cube)
    shutil.rmtree(cube + ".journal", ignore_errors=True)
    proc = subprocess.Popen([BIN, "run", BIG, "-o", cube], stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True)
    jnl = os.path.join(cube + ".journal", "rank-0000.jnl")
    t0 = time.time()
    while time.time() - t0 < 120 and proc.poll() is None:
        if os.path.exists(jnl) and os.path.getsize(jnl) > 64:
            break
        time.sleep(0.01)
    sent = proc.poll() is None
    if sent:
        proc.send_signal(signal.SIGTERM)
    out, _ = proc.communicate(timeout=120)
    check("SIGTERM mid-sweep: exit 3", sent and proc.returncode == 3,
          "sent=%s, exit %s" % (sent, proc.returncode), "commands.h: 3 = stopped early")
    with h5py.File(cube, "r") as f:
        d = int(f["done"][...].sum())
        complete = int(f.attrs["complete"])
    check("the stopped cube is readable and incomplete", 0 < d < 64 and complete == 0,
          "%d of 64 done, complete=%d" % (d, complete), "test set-up")
    rc, log = run(["run", BIG, "-o", cube])
    check("rerun completes", rc == 0 and "(complete)" in log, "exit %d" % rc, "commands.h")
    full = os.path.join(wd, "full.h5")
    rc, log = run(["run", BIG, "-o", full, "--fresh"])
    differ = same_results(full, cube)
    check("stopped and resumed cube == uninterrupted cube", rc == 0 and not differ,
          "differing: %s" % differ, "DESIGN.md reproducibility contract")


def scenario_refusals(wd):
    base = os.path.join(wd, "own.h5")
    rc, log = run(["run", SMALL, "-o", base, "--fresh"])
    check("make a cube", rc == 0, "exit %d" % rc, "commands.h")
    before = file_state(base)
    other = os.path.join(wd, "other.yaml")
    with open(other, "w") as f:
        f.write(open(SMALL).read().replace("training.ridge: [1.0e-6, 1.0e-4]",
                                           "training.ridge: [1.0e-6, 3.0e-4]"))
    time.sleep(0.01)
    rc, log = run(["run", other, "-o", base])
    check("resume with a different sweep file: exit 2", rc == 2, "exit %d" % rc,
          "commands.h: 2 = a cube of a different study")
    check("the message names the differing key", "training.ridge" in log,
          log.strip().splitlines()[-1][:200] if log.strip() else "", "the edit above")
    check("the cube was not modified", file_state(base) == before, "mtime, size, bytes",
          "os.stat and file bytes")
    check("no journal directory created", not os.path.exists(base + ".journal"), "", "os.path")

    gone = os.path.join(wd, "no-such-dir", "x.h5")
    rc, log = run(["run", SMALL, "-o", gone])
    check("output in a missing directory: exit 2", rc == 2, "exit %d: %s" % (
        rc, log.strip()[-120:]), "commands.h")
    check("nothing created", not os.path.exists(os.path.dirname(gone)), "", "os.path")
    plain = os.path.join(wd, "plain.txt")
    with open(plain, "w") as f:
        f.write("a file of the user's\n")
    rc, log = run(["run", SMALL, "-o", os.path.join(plain, "x.h5")])
    check("output under a regular file: exit 2", rc == 2, "exit %d" % rc, "commands.h")

    for label, make in (("a text file", "text"), ("an HDF5 file of someone else", "hdf5")):
        p = os.path.join(wd, "foreign-%s.h5" % make)
        if make == "text":
            with open(p, "w") as f:
                f.write("not a cube\n")
        else:
            with h5py.File(p, "w") as f:
                f["x"] = np.arange(7.25, 9.0, 0.5)
        before = file_state(p)
        for extra in ([], ["--fresh"]):
            rc, log = run(["run", SMALL, "-o", p] + extra)
            check("%s as output %s: exit 2" % (label, " ".join(extra)), rc == 2,
                  "exit %d" % rc, "commands.h: 2 = a file that is not ours")
            check("%s untouched %s" % (label, " ".join(extra)), file_state(p) == before,
                  "mtime, size, bytes", "os.stat and file bytes")
        check("%s: no journal directory" % label, not os.path.exists(p + ".journal"), "",
              "os.path")
        rc, log = run(["status", p])
        check("status of %s: exit 2" % label, rc == 2, "exit %d" % rc, "commands.h")


def main():
    scenario, wd = sys.argv[1], sys.argv[2]
    os.makedirs(wd, exist_ok=True)
    globals()["scenario_" + scenario](wd)
    print("%d passed, %d failed" % (counts["passed"], counts["failed"]))
    return 0 if counts["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
