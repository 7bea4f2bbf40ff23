#!/usr/bin/python3
"""coexist robustness: kill-and-resume torture under mpirun.

One uninterrupted reference run of tests/sweeps/robust_torture.yaml (96 cells), then TRIALS
seeded trials: start the same sweep on 3 ranks with --checkpoint 0 (every batch is followed by
a cube write, so a kill often lands during one), SIGKILL one rank chosen at random at a random
time during start-up (one trial in five) or once the journals hold a random number of
finished cells, let mpirun end the job, optionally damage the journals (every third trial: one
flipped byte inside a record and a torn tail), then resume with 1, 2 or 3 ranks until the run
exits 0. Every resumed cube must be byte-identical in its result datasets to the reference.

The random choices come from Python's random.Random(TRIAL_SEED), so a failing trial can be
rerun alone: `robust_torture.py WORKDIR --trial K`. References outside the program: byte
equality of result datasets read by h5py (Debian python3-h5py 3.7; the reproducibility contract
of DESIGN.md, compared with the function of tests/engine_cli.py), the CRC-32C damage counts of
README "What survives a crash", and the exit codes of README "Commands".
"""
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import time

sys.dont_write_bytecode = True  # no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import engine_cli  # noqa: E402  (same_results, rank_pids, check and the counts)

BIN, MPI = engine_cli.BIN, engine_cli.MPI
SWEEP = os.path.join(engine_cli.SWEEPS, "robust_torture.yaml")
TRIALS = 20
TRIAL_SEED = 4127
RECORD = 88 + 3 * (72 + 8 * 2) + 8  # record size for 3 runs and 2 tasks (src/engine/record.c)
check = engine_cli.check


def remove_cube(path):
    for p in (path, path + ".creating"):
        if os.path.exists(p):
            os.unlink(p)
    shutil.rmtree(path + ".journal", ignore_errors=True)


def journal_records(cube):
    jdir = cube + ".journal"
    try:
        names = os.listdir(jdir)
    except OSError:
        return 0
    n = 0
    for name in names:
        try:
            n += max(0, os.path.getsize(os.path.join(jdir, name)) - 64) // RECORD
        except OSError:
            pass
    return n


def damage(cube, rng):
    """Flip one byte inside the first record of one journal and append a torn tail to another
    (or the same); return how many records were damaged (0 when no journal had a record)."""
    jdir = cube + ".journal"
    if not os.path.isdir(jdir):
        return 0
    names = sorted(n for n in os.listdir(jdir) if n.endswith(".jnl"))
    full = [n for n in names if os.path.getsize(os.path.join(jdir, n)) >= 64 + RECORD]
    if not full:
        return 0
    hurt = 0
    victim = os.path.join(jdir, rng.choice(full))
    size = os.path.getsize(victim)
    # Only whole records: a file that already ends in a torn record keeps that one.
    nrec = (size - 64) // RECORD
    k = rng.randrange(nrec)
    off = 64 + k * RECORD + rng.randrange(RECORD)
    with open(victim, "r+b") as f:
        f.seek(off)
        b = f.read(1)
        f.seek(off)
        f.write(bytes([b[0] ^ (1 << rng.randrange(8))]))
    hurt += 1
    tail = os.path.join(jdir, rng.choice(names))
    if (os.path.getsize(tail) - 64) % RECORD == 0:
        with open(tail, "ab") as f:
            f.write(bytes(rng.randrange(256) for _ in range(rng.randrange(1, RECORD))))
        hurt += 1
    return hurt


def trial(wd, k, ref):
    rng = random.Random(TRIAL_SEED * 1000 + k)
    cube = os.path.join(wd, "trial%02d.h5" % k)
    remove_cube(cube)
    victim = rng.randrange(3)
    # One trial in five kills during start-up (MPI start, cube creation) at a random time; the
    # others once the journals hold a random number of finished cells (they are flushed after
    # every batch), so the kill lands mid-sweep whatever the load on the machine.
    early = rng.random() < 0.2
    at = rng.uniform(0.05, 1.0) if early else 0.0
    target = 0 if early else rng.randrange(1, 92)
    proc = subprocess.Popen([MPI, "-n", "3", BIN, "run", SWEEP, "-o", cube, "--checkpoint", "0"],
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            start_new_session=True)
    t0 = time.time()
    killed = False
    while proc.poll() is None and time.time() - t0 < 60:
        if time.time() - t0 >= at and journal_records(cube) >= target:
            pids = engine_cli.rank_pids(cube)
            if victim in pids:
                try:
                    os.kill(pids[victim], signal.SIGKILL)
                    killed = True
                except ProcessLookupError:
                    pass
                break
        time.sleep(0.002)
    try:
        proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)  # our own mpirun's session only
        proc.communicate()
    hurt = damage(cube, rng) if killed and k % 3 == 2 else 0
    ranks = 1 + rng.randrange(3)
    rc, log = engine_cli.run(["run", SWEEP, "-o", cube], ranks=ranks, timeout=180)
    m = re.search(r"(\d+) damaged journal records dropped", log)
    dropped = int(m.group(1)) if m else -1
    when = "%.2f s after start" % at if early else "after %d journal records" % target
    what = "trial %d: kill rank %d %s%s, resume on %d rank(s)" % (
        k, victim, when, "" if killed else " (the run ended first)", ranks)
    check(what + ": exit 0", rc == 0, "exit %d, killed run exit %s" % (rc, proc.returncode),
          "README Commands: 0 = done")
    if rc != 0:
        print(log[-2000:])
        return killed
    m = re.search(r"to compute: (\d+) cells .*?; (\d+) already in the cube, (\d+) merged from "
                  r"journals", log)
    x, y, z = (int(g) for g in m.groups()) if m else (-1, -1, -1)
    check(what + ": computed + in the cube + merged == 96 cells", x + y + z == 96,
          "%d + %d + %d" % (x, y, z), "96 cells in tests/sweeps/robust_torture.yaml")
    if killed and not early:
        # Every record counted above had reached the operating system before the kill.
        check(what + ": no acknowledged cell lost", y + z >= target - hurt,
              "%d kept, >= %d journal records at the kill - %d damaged" % (y + z, target, hurt),
              "README: a killed rank loses only the cells it was computing")
    if hurt:
        check(what + ": damaged journal records detected and dropped", dropped >= hurt,
              "%d dropped, %d damaged by the test" % (dropped, hurt),
              "README: a torn or corrupted record is detected by its CRC-32C and dropped")
    differ = engine_cli.same_results(ref, cube)
    check(what + ": result datasets == uninterrupted run", not differ, "differing: %s" % differ,
          "DESIGN.md: a resumed cube is byte-identical in every result dataset")
    remove_cube(cube)
    return killed


def main():
    wd = sys.argv[1]
    only = int(sys.argv[3]) if len(sys.argv) > 3 and sys.argv[2] == "--trial" else None
    os.makedirs(wd, exist_ok=True)
    ref = os.path.join(wd, "reference.h5")
    remove_cube(ref)
    t0 = time.time()
    rc, log = engine_cli.run(["run", SWEEP, "-o", ref, "--checkpoint", "0"], ranks=3)
    ref_wall = time.time() - t0
    check("uninterrupted reference run on 3 ranks", rc == 0, "exit %d, %.2f s" % (rc, ref_wall),
          "README Commands")
    if rc != 0:
        print(log)
        return 1
    kills = 0
    for k in range(TRIALS) if only is None else [only]:
        kills += 1 if trial(wd, k, ref) else 0
    if only is None:
        check("at least 15 of %d trials killed a rank mid-run" % TRIALS, kills >= 15,
              "%d killed" % kills, "test set-up")
    c = engine_cli.counts
    print("%d passed, %d failed" % (c["passed"], c["failed"]))
    return 0 if c["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
