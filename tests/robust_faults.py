#!/usr/bin/python3
"""coexist robustness: fault injection, one failure at a time.

Needs a build with CX_FAULT_INJECTION defined (and, for the leak and UB checks, -DCX_SANITIZE=ON):
there CX_FAIL_ALLOC=N fails the Nth allocation made through cx_malloc_array / cx_calloc_array
(src/core/error.c; the idea of SQLite's test_malloc.c, Hipp et al., sqlite.org), and
CX_FAIL_H5WRITE=N fails the Nth HDF5 write of a cube (a dataset or attribute write or a flush,
src/engine/cube.c) as if HDF5 had refused it. For N = 1, 2, ... until a command makes fewer than
N allocations (or writes) and succeeds:
 - `coexist check tests/sweeps/robust_tiny.yaml` (no MPI) with LeakSanitizer on: exit 1, an
   out-of-memory message, no ASan / LSan / UBSan report;
 - `coexist run` of it (MPI singleton, LeakSanitizer on): exit 1 with an out-of-memory
   message and no ASan / LSan / UBSan report, then the cube it left (if any) must open
   (`coexist status`) and a rerun without injection must complete with result datasets
   byte-identical to an uninterrupted run;
 - `coexist run` with the Nth HDF5 write failing: exit 1 with an HDF5 message naming the cube
   and no ASan / LSan / UBSan report, a cube (if one was left) that opens, and a rerun that
   completes with result datasets byte-identical to an uninterrupted run.
Leak checking of `run` needs full stacks (fast_unwind_on_malloc=0): Open MPI's plugins keep
memory until exit, and with the fast unwinder their stacks stop in frames LSan cannot name, so
tests/lsan.supp cannot match them; with the slow unwinder every such stack reaches libmpi or
libopen-pal and is suppressed, while an allocation of coexist's own is never suppressed.
N runs over 1..40 (or 60) and is then sampled with a stride, to fit the shared machine.

References outside the program: the exit codes of README "Commands", the reproducibility
contract of DESIGN.md, and the sanitizer reports of clang/gcc's ASan runtime.
Usage: robust_faults.py WORKDIR (environment: CX_BINARY = the fault-injection build).
"""
import os
import shutil
import subprocess
import sys

sys.dont_write_bytecode = True  # no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import engine_cli  # noqa: E402

BIN = engine_cli.BIN
SWEEP = os.path.join(engine_cli.SWEEPS, "robust_tiny.yaml")
SUPP = os.path.join(os.path.dirname(os.path.abspath(__file__)), "lsan.supp")
SANITIZER = ("ERROR: AddressSanitizer", "ERROR: LeakSanitizer", "runtime error:")
MAX_N = 2000
# CX_FAULT_STRIDE=1 tries every N (about 10 minutes for run on the project's machines).
STRIDE = int(os.environ.get("CX_FAULT_STRIDE", "0"))
check = engine_cli.check


def run(args, fail_at=None, leaks=False, write_fail_at=None):
    # With leak checking, full stacks (see above): slower, but MPI's leaks become suppressible.
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1",
               ASAN_OPTIONS="detect_leaks=%d:abort_on_error=0%s" % (
                   (1, ":fast_unwind_on_malloc=0") if leaks else (0, "")),
               LSAN_OPTIONS="suppressions=%s:print_suppressions=0" % SUPP,
               UBSAN_OPTIONS="print_stacktrace=1")
    env.pop("CX_FAIL_ALLOC", None)
    env.pop("CX_FAIL_H5WRITE", None)
    if fail_at is not None:
        env["CX_FAIL_ALLOC"] = str(fail_at)
    if write_fail_at is not None:
        env["CX_FAIL_H5WRITE"] = str(write_fail_at)
    p = subprocess.run([BIN] + args, capture_output=True, text=True, timeout=120, env=env)
    return p.returncode, p.stdout + p.stderr


def remove_cube(path):
    for p in (path, path + ".creating"):
        if os.path.exists(p):
            os.unlink(p)
    shutil.rmtree(path + ".journal", ignore_errors=True)


def schedule(first, stride, limit):
    """N = 1..first, then every stride-th allocation up to limit: every N would take too long
    on the shared machine (about a second per run under ASan), so later N are sampled."""
    n = 1
    while n <= limit:
        yield n
        n = n + 1 if n < first else n + stride


def phase_check(wd):
    """coexist check (no MPI): every failed allocation must give exit 1 and no leak."""
    bad, n = 0, 0
    for n in schedule(60, STRIDE or 7, MAX_N):
        rc, log = run(["check", SWEEP], fail_at=n, leaks=True)
        if rc == 0:
            break
        reports = [s for s in SANITIZER if s in log]
        if not (rc == 1 and "out of memory" in log and not reports):
            bad += 1
            check("check: allocation %d fails cleanly" % n, False, "exit %d, sanitizer %s: %s" % (
                rc, reports, " | ".join(log.strip().splitlines()[-2:])[:200]),
                  "README Commands: 1 = machine failure; LeakSanitizer")
    check("check: failing allocations 1..%d (%s) give exit 1, out of memory, no leak or UB"
          % (n, "every one" if STRIDE == 1 else "sampled after 60"), bad == 0 and n > 1, "%d bad" % bad,
          "README Commands; ASan/LSan/UBSan silent")


def inject_runs(wd, ref, what, kind, first, stride, expect):
    """coexist run with the Nth `kind` failing (kind = "alloc": CX_FAIL_ALLOC, "write":
    CX_FAIL_H5WRITE) for N = 1..first, then every stride-th, until a run needs fewer than N:
    each must exit 1 with a message containing every string of `expect` and no ASan/UBSan
    report (leaks checked, see run()), leave a cube that opens (when it left one), and
    resume to result datasets identical to the reference."""
    cube = os.path.join(wd, "faulty-%s.h5" % kind)
    bad = 0
    n = 0
    for n in schedule(first, STRIDE or stride, MAX_N):
        remove_cube(cube)
        if kind == "alloc":
            rc, log = run(["run", SWEEP, "-o", cube], fail_at=n, leaks=True)
        else:
            rc, log = run(["run", SWEEP, "-o", cube], write_fail_at=n, leaks=True)
        if rc == 0:
            break  # the run made fewer than n allocations (writes)
        reports = [s for s in SANITIZER if s in log]
        clean = rc == 1 and all(e in log for e in expect) and not reports
        status_rc = run(["status", cube])[0] if os.path.exists(cube) else 0
        rrc, rlog = run(["run", SWEEP, "-o", cube])
        differ = engine_cli.same_results(ref, cube) if rrc == 0 else ["(rerun failed)"]
        if not (clean and status_rc == 0 and rrc == 0 and not differ):
            bad += 1
            last = " | ".join(log.strip().splitlines()[-2:])[:240]
            check("run: %s %d fails: exit 1 with %s, cube opens and resumes" % (what, n, expect),
                  False, "exit %d, sanitizer %s, status exit %d, rerun exit %d, differing %s: %s"
                  " | rerun: %s" % (rc, reports, status_rc, rrc, differ, last,
                                    rlog.strip()[-200:]),
                  "README Commands: 1 = machine failure; DESIGN.md reproducibility")
            if reports:
                print("\n".join(l for l in log.splitlines() if l.strip())[:4000])
    check("run: failing %ss 1..%d (%s) give a clean error, an openable cube and an identical "
          "resume" % (what, n, "every one" if STRIDE == 1 else "sampled after %d" % first),
          bad == 0 and n > 1, "%d bad" % bad,
          "README Commands; DESIGN.md reproducibility; ASan/LSan/UBSan silent")
    check("run: the %s injection reached a run that needs fewer" % what, n < MAX_N,
          "stopped at N = %d" % n, "test set-up")


def main():
    wd = sys.argv[1]
    os.makedirs(wd, exist_ok=True)
    ref = os.path.join(wd, "reference.h5")
    remove_cube(ref)
    rc, log = run(["run", SWEEP, "-o", ref], leaks=True)
    clean = not any(s in log for s in SANITIZER)
    check("uninterrupted run without injection", rc == 0 and clean, "exit %d" % rc,
          "README Commands; no sanitizer report")
    if rc != 0 or not clean:
        print(log[-3000:])
        return 1
    phase_check(wd)
    inject_runs(wd, ref, "allocation", "alloc", 40, 37, ["out of memory"])
    inject_runs(wd, ref, "HDF5 write", "write", 60, 5, ["HDF5:", "failed for"])
    c = engine_cli.counts
    print("%d passed, %d failed" % (c["passed"], c["failed"]))
    return 0 if c["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
