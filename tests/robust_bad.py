#!/usr/bin/python3
"""coexist robustness: the bad-input catalogue (tests/bad/catalogue.txt).

Makes a real small cube with `coexist run tests/sweeps/engine_small.yaml`, records its bytes
(SHA-256 from Python's hashlib) and mtime, then runs every catalogued bad sweep file and bad
command line. Each case must exit with status 2 and print the expected fragment(s), and must
leave the cube byte-identical, with no journal directory next to it.

The references are outside the program: the message contract of README "The sweep file"
(FILE:LINE:COL: KEY: expected WHAT, got VALUE), the exit codes of README "Commands",
positions counted by hand in each file of tests/bad, and file bytes read by the operating
system. Usage: robust_bad.py WORKDIR (environment: CX_BINARY, CX_SOURCE_DIR).
"""
import hashlib
import os
import shutil
import subprocess
import sys

BIN = os.environ["CX_BINARY"]
SRC = os.environ["CX_SOURCE_DIR"]
BAD = os.path.join(SRC, "tests", "bad")
GOOD = os.path.join(SRC, "tests", "sweeps", "engine_small.yaml")
MARKER = "/tmp/coexist-bad-was-run"  # what tests/bad/command_in_value.yaml would create

counts = {"passed": 0, "failed": 0}


def check(what, cond, detail, source):
    counts["passed" if cond else "failed"] += 1
    print("%s: %s (%s) [source: %s]" % ("PASS" if cond else "FAIL", what, detail, source),
          flush=True)


def state(path):
    st = os.stat(path)
    with open(path, "rb") as f:
        return st.st_mtime_ns, st.st_size, hashlib.sha256(f.read()).hexdigest()


def read_catalogue():
    cases = []
    with open(os.path.join(BAD, "catalogue.txt")) as f:
        for lineno, line in enumerate(f, 1):
            line = line.rstrip("\n")
            if not line.strip() or line.lstrip().startswith("#"):
                continue
            parts = [p.strip() for p in line.split(" | ")]
            if len(parts) != 4:
                raise SystemExit("catalogue.txt:%d: expected 4 columns, got %d" %
                                 (lineno, len(parts)))
            name, command, code, frag = parts
            cases.append((lineno, name, command, int(code),
                          [x.strip() for x in frag.split(" && ") if x.strip()]))
    return cases


def main():
    wd = sys.argv[1]
    shutil.rmtree(wd, ignore_errors=True)
    os.makedirs(wd)
    cube = os.path.join(wd, "cube.h5")
    adir = os.path.join(wd, "a-directory")
    os.makedirs(adir)
    plain = os.path.join(wd, "plain.txt")
    with open(plain, "w") as f:
        f.write("a file of the user's\n")
    other = os.path.join(wd, "other.yaml")
    with open(GOOD) as f:
        text = f.read()
    with open(other, "w") as f:
        f.write(text.replace("training.ridge: [1.0e-6, 1.0e-4]", "training.ridge: [1.0e-6, 3.5e-4]"))
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    p = subprocess.run([BIN, "run", GOOD, "-o", cube], capture_output=True, text=True,
                       timeout=240, env=env)
    check("make the reference cube", p.returncode == 0, "exit %d" % p.returncode,
          "README Commands: 0 = success")
    if p.returncode != 0:
        print(p.stdout + p.stderr)
        return 1
    before = state(cube)
    print("cube %s: %d bytes, sha256 %s" % (cube, before[1], before[2]))
    if os.path.exists(MARKER):
        os.unlink(MARKER)

    subst = {"{good}": GOOD, "{other}": other, "{cube}": cube, "{adir}": adir,
             "{plain}": plain, "{bad}": BAD}
    cases = read_catalogue()
    files = [c for c in cases if c[2] == "check+run"]
    check("catalogue holds at least 40 bad sweep files", len(files) >= 40, "%d" % len(files),
          "issue: at least 40 malformed sweep files and command lines")
    runs = 0
    for lineno, name, command, code, frags in cases:
        if command == "check+run":
            path = os.path.join(BAD, name)
            argvs = [["check", path], ["run", path, "-o", cube]]
        else:
            argv = [] if command == "(nothing)" else command.split()
            for k, v in subst.items():
                argv = [a.replace(k, v) for a in argv]
            argvs = [argv]
        for argv in argvs:
            runs += 1
            label = "%s [%s]" % (name, argv[0] if argv else "no command")
            try:
                r = subprocess.run([BIN] + argv, capture_output=True, text=True, timeout=60,
                                   env=env, cwd=wd)
                rc, out = r.returncode, r.stdout + r.stderr
            except subprocess.TimeoutExpired:
                rc, out = -1, "(timed out after 60 s)"
            last = " | ".join(l for l in out.strip().splitlines()[-2:])[:240]
            missing = [f for f in frags if f not in out]
            src = "catalogue.txt:%d; README Commands and The sweep file" % lineno
            check("%s: exit %d" % (label, code), rc == code, "exit %d: %s" % (rc, last), src)
            check("%s: message" % label, not missing,
                  "missing %s" % missing if missing else frags[0][:80], src)
            now = state(cube)
            check("%s: cube byte-identical" % label, now[1:] == before[1:] and now[0] == before[0],
                  "size, sha256, mtime", "hashlib.sha256 of the file bytes, os.stat")
            check("%s: no journal directory" % label, not os.path.exists(cube + ".journal"),
                  "", "os.path")
            if now != before:
                print("  the cube changed; stopping: later cases would compare against a "
                      "different file")
                return 1
    check("no sweep file ran a command", not os.path.exists(MARKER), MARKER,
          "tests/bad/command_in_value.yaml names this file in a $(...) substitution")
    print("%d cases, %d commands run" % (len(cases), runs))
    print("%d passed, %d failed" % (counts["passed"], counts["failed"]))
    return 0 if counts["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
