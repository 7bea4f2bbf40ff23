#!/usr/bin/python3
"""coexist robustness: security basics of `coexist run` (one process, no mpirun).

 1. a sweep file never runs a command: a $(...) and a `...` in the free-text description (a
    valid sweep file) create nothing;
 2. new files are not created through symlinks onto existing files: a symlink planted at the
    cube's temporary name, at the cube's own name, and at a rank journal's name, each pointing
    at a file of the user's, leaves that file byte-identical;
 3. an existing cube is never overwritten without --fresh: rerunning a complete cube leaves its
    result datasets as they were (its start_time and end_time attributes are rewritten);
    --fresh replaces it;
 4. new files get the user's umask: with umask 027 the cube and the journal are mode 0640.

References outside the program: file bytes and modes from the operating system (os.stat,
os.lstat), POSIX umask semantics (IEEE Std 1003.1-2017, umask(): created files get mode
0666 & ~umask), and README "Running a sweep" (--fresh). Usage: robust_security.py WORKDIR.
"""
import os
import shutil
import stat
import subprocess
import sys

sys.dont_write_bytecode = True  # no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import engine_cli  # noqa: E402

BIN = engine_cli.BIN
TINY = os.path.join(engine_cli.SWEEPS, "robust_tiny.yaml")
check = engine_cli.check


def run(args, umask=None):
    def pre():
        if umask is not None:
            os.umask(umask)
    p = subprocess.run([BIN] + args, capture_output=True, text=True, timeout=120,
                       env=dict(os.environ, OPENBLAS_NUM_THREADS="1"), preexec_fn=pre)
    return p.returncode, p.stdout + p.stderr


def victim(path):
    with open(path, "w") as f:
        f.write("a file of the user's: 2.385\n")
    return open(path, "rb").read()


def main():
    wd = sys.argv[1]
    shutil.rmtree(wd, ignore_errors=True)
    os.makedirs(wd)
    text = open(TINY).read()

    marks = [os.path.join(wd, "ran-dollar"), os.path.join(wd, "ran-backtick")]
    sweep = os.path.join(wd, "described.yaml")
    with open(sweep, "w") as f:
        f.write(text.replace("  seed: 6299\n", "  seed: 6299\n  description: \"$(touch %s) `touch %s`\"\n"
                             % (marks[0], marks[1])))
    rc, log = run(["run", sweep, "-o", os.path.join(wd, "described.h5")])
    check("a sweep file with commands in its description runs", rc == 0, "exit %d" % rc,
          "README The sweep file: description is free text")
    check("no command in the sweep file was run", not any(os.path.exists(m) for m in marks),
          "%s" % marks, "os.path")

    v = os.path.join(wd, "victim.txt")
    for label, link, extra in (("cube's temporary name", "a.h5.creating", []),
                               ("cube's own name", "b.h5", []),
                               ("cube's own name, --fresh", "b.h5", ["--fresh"])):
        want = victim(v)
        lp = os.path.join(wd, link)
        if os.path.lexists(lp):
            os.unlink(lp)
        os.symlink(v, lp)
        cube = lp[: -len(".creating")] if link.endswith(".creating") else lp
        rc, log = run(["run", TINY, "-o", cube] + extra)
        check("symlink at the %s onto a user's file: the file is unchanged" % label,
              open(v, "rb").read() == want, "exit %d" % rc, "file bytes")
    # A journal name planted as a symlink onto an existing (empty) file of the user's, and a
    # dangling one: the journal must not be written through either.
    for label, make in (("an empty file of the user's", "empty"), ("a missing file", "dangling")):
        cube = os.path.join(wd, "j-%s.h5" % make)
        jdir = cube + ".journal"
        os.makedirs(jdir)
        target = os.path.join(wd, "target-%s" % make)
        if make == "empty":
            open(target, "w").close()
        os.symlink(target, os.path.join(jdir, "rank-0000.jnl"))
        rc, log = run(["run", TINY, "-o", cube])
        if make == "empty":
            ok = os.path.getsize(target) == 0
        else:
            ok = not os.path.exists(target)
        check("journal name planted as a symlink to %s: nothing written through it" % label, ok,
              "exit %d, target %s" % (rc, "size %d" % os.path.getsize(target)
                                      if os.path.exists(target) else "absent"),
              "os.stat; POSIX open(O_NOFOLLOW | O_EXCL) semantics")

    cube = os.path.join(wd, "done.h5")
    rc, log = run(["run", TINY, "-o", cube])
    before = engine_cli.result_bytes(cube)
    rc2, log2 = run(["run", TINY, "-o", cube])
    check("rerun of a complete cube without --fresh: exit 0, result datasets unchanged",
          rc == 0 and rc2 == 0 and engine_cli.result_bytes(cube) == before,
          "exit %d then %d" % (rc, rc2), "h5py dataset bytes; README --fresh")
    before = engine_cli.file_state(cube)
    rc3, log3 = run(["run", TINY, "-o", cube, "--fresh"])
    after = engine_cli.file_state(cube)
    check("--fresh replaces it", rc3 == 0 and after[0] != before[0], "exit %d" % rc3,
          "README Running a sweep: --fresh starts over")

    cube = os.path.join(wd, "umask.h5")
    rc, log = run(["run", TINY, "-o", cube, "--keep-journals"], umask=0o027)
    modes = {}
    for p in (cube, os.path.join(cube + ".journal", "rank-0000.jnl")):
        modes[os.path.basename(p)] = stat.S_IMODE(os.stat(p).st_mode) if os.path.exists(p) else None
    check("umask 027: cube and journal are mode 0640", rc == 0 and
          all(m == 0o640 for m in modes.values()),
          "exit %d, %s" % (rc, {k: oct(m) if m is not None else None for k, m in modes.items()}),
          "POSIX umask(): mode 0666 & ~027 = 0640")
    c = engine_cli.counts
    print("%d passed, %d failed" % (c["passed"], c["failed"]))
    return 0 if c["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
