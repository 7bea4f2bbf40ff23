#!/usr/bin/python3
"""coexist robustness: a full disk (needs root: the test mounts small tmpfs file systems).

 1. a tmpfs too small for the cube itself: `coexist run` must end with exit 1 and a message
    naming the lack of space, without a crash, leaving no file behind;
 2. a tmpfs with room for the cube but not for the whole journal: exit 1 and a message
    naming the lack of space; the cube still opens (`coexist status`);
 3. the same tmpfs remounted larger: rerunning the same command completes (exit 0) with result
    datasets byte-identical to a run on an ordinary disk (h5py, as in tests/engine_cli.py).

References outside the program: ENOSPC semantics of POSIX write() (IEEE Std 1003.1-2017), the
tmpfs size= option (Linux Documentation/filesystems/tmpfs.rst), README "Commands" exit codes
and the reproducibility contract of DESIGN.md. The sizes suit tests/sweeps/robust_torture.yaml
(a 61 KB cube and a 31 KB journal, measured). Usage: robust_diskfull.py WORKDIR.
"""
import os
import shutil
import subprocess
import sys

sys.dont_write_bytecode = True  # no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import engine_cli  # noqa: E402

BIN = engine_cli.BIN
SWEEP = os.path.join(engine_cli.SWEEPS, "robust_torture.yaml")
check = engine_cli.check
SPACE = ("No space", "no space", "disk is full", "disk full")  # strerror(ENOSPC) or own words


def run(args):
    p = subprocess.run([BIN] + args, capture_output=True, text=True, timeout=240,
                       env=dict(os.environ, OPENBLAS_NUM_THREADS="1"))
    return p.returncode, p.stdout + p.stderr


def mount(mnt, size, remount=False):
    opts = ("remount,size=%s" % size) if remount else ("size=%s" % size)
    subprocess.run(["mount", "-t", "tmpfs", "-o", opts, "tmpfs", mnt], check=True)


def main():
    wd = sys.argv[1]
    if os.geteuid() != 0:
        print("SKIP: robust_diskfull needs root to mount tmpfs")
        return 77
    os.makedirs(wd, exist_ok=True)
    ref = os.path.join(wd, "reference.h5")
    if os.path.exists(ref):
        os.unlink(ref)
    rc, log = run(["run", SWEEP, "-o", ref])
    check("reference run on an ordinary disk", rc == 0, "exit %d" % rc, "README Commands")
    mnt = os.path.join(wd, "small")
    os.makedirs(mnt, exist_ok=True)
    try:
        mount(mnt, "40k")
        cube = os.path.join(mnt, "c.h5")
        rc, log = run(["run", SWEEP, "-o", cube])
        said = [s for s in SPACE if s in log]
        check("no room for the cube: exit 1, no crash", rc == 1, "exit %d: %s" % (
            rc, " | ".join(log.strip().splitlines()[-2:])[:200]),
            "README Commands: 1 = the machine failed (I/O)")
        check("no room for the cube: the message names the lack of space", bool(said),
              "%s" % said, "POSIX write(): ENOSPC")
        check("no room for the cube: nothing left behind", os.listdir(mnt) == [] or
              os.listdir(mnt) == ["c.h5.journal"], "%s" % os.listdir(mnt), "os.listdir")
        subprocess.run(["umount", mnt], check=True)

        mount(mnt, "96k")  # room for the 65 KB cube (and its space check), not for every journal record
        rc, log = run(["run", SWEEP, "-o", cube, "--checkpoint", "0"])
        said = [s for s in SPACE if s in log]
        check("journal fills the disk: exit 1", rc == 1, "exit %d: %s" % (
            rc, " | ".join(log.strip().splitlines()[-1:])[:200]),
            "README Commands: 1 = the machine failed (I/O), not 3")
        check("journal fills the disk: the message names the lack of space", bool(said),
              "%s" % said, "POSIX write(): ENOSPC")
        src, st = run(["status", cube])
        check("journal fills the disk: the cube still opens", src == 0, "exit %d" % src,
              "README: status is read-only and safe")

        mount(mnt, "400k", remount=True)
        rc, log = run(["run", SWEEP, "-o", cube])
        check("space again: the rerun completes", rc == 0 and "(complete)" in log,
              "exit %d" % rc, "README Running a sweep: rerunning continues")
        differ = engine_cli.same_results(ref, cube) if rc == 0 else ["(rerun failed)"]
        check("space again: result datasets == the run on an ordinary disk", not differ,
              "differing: %s" % differ, "DESIGN.md reproducibility contract")
    finally:
        subprocess.run(["umount", mnt], stderr=subprocess.DEVNULL)
        shutil.rmtree(mnt, ignore_errors=True)
    c = engine_cli.counts
    print("%d passed, %d failed" % (c["passed"], c["failed"]))
    return 0 if c["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
