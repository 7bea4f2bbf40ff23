#!/usr/bin/python3
"""coexist on a real one-node SLURM (tools/slurm-cluster.sh: Debian 12's slurmctld, slurmd,
munge): batch scripts written by `coexist jobs`, submitted with sbatch, compared with plain
mpirun runs of the same sweep file: `slurm_cli.py cluster WORKDIR`. The same shard, merge,
status and grace paths without SLURM, under mpirun: `slurm_cli.py local WORKDIR`.

References outside the code under test: byte equality of every result dataset read by h5py
(Debian python3-h5py 3.7) against `mpirun -n 2 coexist run` (the reproducibility contract of
DESIGN.md: results do not depend on ranks, shards or restarts); job states, exit codes and
restart counts as reported by SLURM's own scontrol(1); the validation message as printed by
`coexist check` outside SLURM. The interruption is forced deterministically with
`scancel --signal=USR1 --batch` (the signal that `#SBATCH --signal=B:USR1@N` sends before the
time limit; PLATFORM.md measured that signal to come 36-66 s early, too loosely for a short test).

Exit 77 (skipped) when not root: the cluster test starts the SLURM daemons.
"""
import os
import re
import shutil
import signal
import subprocess
import sys
import time

import h5py

SRC = os.environ["CX_SOURCE_DIR"]
BIN = os.environ["CX_BINARY"]
MPI = os.environ.get("CX_MPIEXEC") or "mpirun"
SWEEPS = os.path.join(SRC, "tests", "sweeps")
SMALL = os.path.join(SWEEPS, "engine_small.yaml")
SLOW = os.path.join(SWEEPS, "slurm_slow.yaml")
HEAVY = os.path.join(SWEEPS, "grace_heavy.yaml")
CLUSTER = os.path.join(SRC, "tools", "slurm-cluster.sh")
NOT_RESULTS = {"wall_time"}
counts = {"passed": 0, "failed": 0}
CONTRACT = "DESIGN.md reproducibility contract; bytes read by h5py 3.7 (Debian)"


def check(what, cond, detail, source):
    counts["passed" if cond else "failed"] += 1
    print("%s: %s (%s) [source: %s]" % ("PASS" if cond else "FAIL", what, detail, source),
          flush=True)
    return cond


def sh(cmd, timeout=120, env=None):
    p = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=env)
    return p.returncode, p.stdout + p.stderr


def result_bytes(path):
    out = {}
    with h5py.File(path, "r") as f:
        for name, obj in f.items():
            if isinstance(obj, h5py.Dataset) and name not in NOT_RESULTS:
                out[name] = (obj.dtype.str, obj.shape, obj[...].tobytes())
    return out


def differ(a, b):
    ra, rb = result_bytes(a), result_bytes(b)
    return sorted(k for k in set(ra) | set(rb) if ra.get(k) != rb.get(k))


def job_info(jid):
    rc, out = sh(["scontrol", "show", "job", "-o", str(jid)])
    info = {}
    for line in out.splitlines():
        for m in re.finditer(r"(\w+)=(\S*)", line):
            info.setdefault(m.group(1), m.group(2))
    return info


def wait_job(jid, timeout, on_poll=None):
    """Poll until the job (or every task of an array) has ended; returns the last info."""
    t0 = time.time()
    while time.time() - t0 < timeout:
        rc, out = sh(["scontrol", "show", "job", "-o", str(jid)])
        states = re.findall(r"JobState=(\S+)", out)
        if on_poll is not None:
            on_poll(job_info(jid))
        if states and all(s in ("COMPLETED", "FAILED", "CANCELLED", "TIMEOUT", "NODE_FAIL",
                                "OUT_OF_MEMORY") for s in states):
            return out, time.time() - t0
        time.sleep(0.5)
    sh(["scancel", str(jid)])
    return None, time.time() - t0


def submit(args, env):
    rc, out = sh(["sbatch", "--parsable"] + args, env=env)
    if rc != 0:
        print(out)
        return None
    return out.strip().split(";")[0]


def script(wd, name, sweep, cube, extra):
    path = os.path.join(wd, name)
    if os.path.exists(path):
        os.unlink(path)
    rc, out = sh([BIN, "jobs", sweep, "-o", path, "--cube", cube] + extra)
    check("coexist jobs writes %s" % name, rc == 0 and os.path.exists(path), out.strip()[-200:],
          "commands.h exit codes")
    return path


def log_text(wd, pattern):
    text = ""
    for f in sorted(os.listdir(wd)):
        if re.fullmatch(pattern, f):
            text += open(os.path.join(wd, f), errors="replace").read()
    return text


def mpirun(n, args, env=None, timeout=240):
    return sh([MPI, "-n", str(n), BIN] + args, timeout=timeout, env=env)


def local(wd):
    """Shards, merge, status and the grace period without SLURM."""
    t_all = time.time()
    ref = os.path.join(wd, "ref.h5")
    rc, out = mpirun(2, ["run", SMALL, "-o", ref])
    check("reference mpirun -n 2 run", rc == 0, "exit %d" % rc, "commands.h exit codes")
    # Any partition, merged, gives the reference bytes; each cell is computed exactly once.
    for parts, ranks in ((1, 1), (2, 1), (3, 2), (5, 1)):
        cube = os.path.join(wd, "p%d.h5" % parts)
        codes = []
        for i in range(parts):
            rc, out = mpirun(ranks, ["run", SMALL, "-o", cube, "--shard", "%d/%d" % (i, parts)])
            codes.append(rc)
        check("n=%d: every shard exits 0" % parts, codes == [0] * parts, "%s" % codes,
              "commands.h exit codes")
        check("n=%d: no shard created the cube" % parts, not os.path.exists(cube), "",
              "a shard writes journals only")
        rc, out = sh([BIN, "status", cube, "--sweep", SMALL])
        records = sum(int(x) for x in re.findall(r"shard \d+/\d+ rank \d+: (\d+) records", out))
        check("n=%d: status before merge counts 24 of 24 done in shard journals" % parts,
              rc == 0 and "done: 24 of 24" in out, out.strip().splitlines()[1] if rc == 0 else out,
              "24 cells in tests/sweeps/engine_small.yaml")
        check("n=%d: shard journals hold exactly 24 records (no cell computed twice)" % parts,
              records == 24, "%d records" % records, "definition of a partition")
        rc, out = sh([BIN, "merge", SMALL, "-o", cube])
        check("n=%d: merge exits 0 and removes the journals" % parts,
              rc == 0 and not os.path.exists(cube + ".journal"), "exit %d" % rc,
              "commands.h exit codes")
        if rc == 0:
            d = differ(ref, cube)
            check("n=%d: merged shards == one big run (result datasets, bytes)" % parts, not d,
                  "differing %s" % d, CONTRACT)
    # A missing shard: merge reports it and exits 3; status shows it; the cube is refused to
    # another study.
    cube = os.path.join(wd, "gap.h5")
    for i in (0, 2):
        mpirun(1, ["run", SMALL, "-o", cube, "--shard", "%d/3" % i])
    rc, out = sh([BIN, "status", cube])
    check("status without a cube or --sweep says what to pass", rc == 2 and "--sweep" in out,
          out.strip()[-160:], "commands.h exit codes")
    rc, out = sh([BIN, "merge", SMALL, "-o", cube])
    check("merge with shard 1/3 missing exits 3", rc == 3, "exit %d" % rc, "commands.h exit 3")
    check("merge names the incomplete shard", "shard 1/3 looks incomplete" in out and
          "no journal from it" in out, out.strip().splitlines()[-1], "merge report")
    rc, out = sh([BIN, "status", cube, "--sweep", SMALL])
    check("status counts cells per shard", re.search(r"shard 1/3: 0 of \d+ cells done", out)
          is not None and "shard 0/3" in out, "", "shards.c partition")
    rc, out = sh([BIN, "merge", SLOW, "-o", cube])
    check("merge refuses a cube of another study", rc == 2, "exit %d" % rc,
          "commands.h exit 2")
    rc, out = mpirun(1, ["run", SMALL, "-o", cube, "--shard", "1/3"])
    rc2, out2 = sh([BIN, "merge", SMALL, "-o", cube])
    check("after the missing shard runs, merge completes", rc == 0 and rc2 == 0,
          "exit %d, %d" % (rc, rc2), "commands.h exit codes")
    if rc2 == 0:
        d = differ(ref, cube)
        check("gap filled: cube == one big run", not d, "differing %s" % d, CONTRACT)
    # The shard comes from SLURM's array variables when --shard is absent.
    env = dict(os.environ, SLURM_ARRAY_TASK_COUNT="4", SLURM_ARRAY_TASK_ID="12",
               SLURM_ARRAY_TASK_MIN="10", SLURM_ARRAY_TASK_STEP="1")
    cube = os.path.join(wd, "env.h5")
    rc, out = sh([BIN, "run", SMALL, "-o", cube], env=env)
    check("SLURM_ARRAY_TASK_ID=12, MIN=10, COUNT=4 runs shard 2/4", rc == 0 and
          "shard 2/4" in out and os.path.exists(
              os.path.join(cube + ".journal", "shard-0002-of-0004-rank-0000.jnl")),
          "exit %d" % rc, "sbatch(1) OUTPUT ENVIRONMENT VARIABLES")
    rc, out = sh([BIN, "run", SMALL, "-o", cube, "--shard", "4/4"])
    check("--shard 4/4 is refused", rc == 2, "exit %d" % rc, "0 <= I < N")
    # Grace 0: a signal while a cell computes leaves it; the rerun finishes the same bytes. Two
    # cells of several seconds each in two work units: the first cell's record reaches the
    # journal when its batch ends, and the second cell is then computing.
    refslow = os.path.join(wd, "refheavy.h5")
    rc, out = mpirun(2, ["run", HEAVY, "-o", refslow])
    cube = os.path.join(wd, "grace.h5")
    jdir = cube + ".journal"
    p = subprocess.Popen([BIN, "run", HEAVY, "-o", cube, "--grace", "0"],
                         stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    t0 = time.time()
    while time.time() - t0 < 120 and p.poll() is None:
        if os.path.isdir(jdir) and any(os.path.getsize(os.path.join(jdir, f)) > 64
                                       for f in os.listdir(jdir)):
            break
        time.sleep(0.05)
    time.sleep(0.5)
    t_sig = time.time()
    p.send_signal(signal.SIGUSR1)
    out = p.communicate(timeout=120)[0]
    took = time.time() - t_sig
    check("--grace 0: exit 3 soon after the signal", p.returncode == 3 and took < 2.0,
          "exit %d after %.2f s" % (p.returncode, took), "commands.h exit 3")
    check("--grace 0: the running cell is left not done", "left not done" in out,
          out.strip().splitlines()[-1] if out.strip() else "", "engine.c grace watchdog")
    rc, out = sh([BIN, "run", HEAVY, "-o", cube], timeout=240)
    m = re.search(r"to compute: (\d+) cells.*?(\d+) already in the cube, (\d+) merged from "
                  r"journals", out)
    check("rerun after the grace exit: the finished cell from the journal, the left one computed",
          rc == 0 and m is not None and m.group(1) == "1" and m.group(3) == "1",
          m.group(0) if m else out[-300:], "2 cells in tests/sweeps/grace_heavy.yaml")
    if rc == 0:
        d = differ(refslow, cube)
        check("interrupted (grace 0) and rerun == one run (bytes)", not d, "differing %s" % d,
              CONTRACT)
    # coexist jobs: memory from the estimate, and a warning when the estimate does not fit.
    rc, chk = sh([BIN, "check", SLOW])
    m = re.search(r"memory: at most ([\d.]+) MiB per rank", chk)
    path = os.path.join(wd, "warn.sh")
    rc, out = sh([BIN, "jobs", SLOW, "-o", path, "--time", "00:00:10", "--tasks-per-node", "2"])
    text = open(path).read() if os.path.exists(path) else ""
    mem = re.search(r"--mem-per-cpu=(\d+)M", text)
    check("jobs: memory per rank covers the largest cell that coexist check reports",
          m is not None and mem is not None and float(mem.group(1)) >= float(m.group(1)),
          "%s MiB asked, %s MiB per cell" % (mem.group(1) if mem else None,
                                             m.group(1) if m else None), "coexist check")
    check("jobs: warns when the estimate does not fit --time 00:00:10",
          rc == 0 and "does not fit the time limit" in out, out.strip().splitlines()[-1],
          "the estimate printed by coexist check (cost / rate / ranks)")
    rc, out = sh([BIN, "jobs", SLOW, "--time", "01:00:00"])
    check("jobs: no warning when it fits --time 01:00:00", rc == 0 and "does not fit" not in out,
          "", "the estimate printed by coexist check")
    print("timing: local shard tests %.1f s" % (time.time() - t_all))


def main():
    mode, wd = sys.argv[1], sys.argv[2]
    shutil.rmtree(wd, ignore_errors=True)
    os.makedirs(wd)
    if mode == "local":
        local(wd)
        print("%d passed, %d failed" % (counts["passed"], counts["failed"]))
        return 1 if counts["failed"] else 0
    if os.geteuid() != 0:
        print("SKIP: not root, cannot start the SLURM daemons")
        return 77
    t_all = time.time()
    rc, out = sh(["sh", CLUSTER, "up"], timeout=300)
    if not check("tools/slurm-cluster.sh up", rc == 0, out.strip()[-300:], "sinfo"):
        return 1
    rc, out = sh(["sh", CLUSTER, "env"])
    m = re.search(r"SLURM_CONF=(\S+)", out)
    env = dict(os.environ)
    env["SLURM_CONF"] = m.group(1)
    os.environ["SLURM_CONF"] = m.group(1)
    env["COEXIST"] = BIN
    env["OPENBLAS_NUM_THREADS"] = "1"

    refs = {}
    for tag, sweep in (("small", SMALL), ("slow", SLOW)):
        cube = os.path.join(wd, "ref-%s.h5" % tag)
        rc, out = sh([MPI, "-n", "2", BIN, "run", sweep, "-o", cube], timeout=240)
        check("reference mpirun -n 2 run of %s" % os.path.basename(sweep), rc == 0,
              "exit %d" % rc, "commands.h exit codes")
        refs[tag] = cube

    # 1. One MPI job of two ranks under srun --mpi=pmix.
    t0 = time.time()
    job = script(wd, "one.sh", SMALL, "one.h5", ["--tasks-per-node", "2", "--time", "00:05:00"])
    jid = submit(["--chdir", wd, job], env)
    out, waited = wait_job(jid, 150) if jid else (None, 0)
    info = job_info(jid) if jid else {}
    check("2-rank srun job completes with exit 0:0", info.get("JobState") == "COMPLETED" and
          info.get("ExitCode") == "0:0", "%s %s after %.1f s" % (info.get("JobState"),
                                                                info.get("ExitCode"), waited),
          "scontrol show job")
    if os.path.exists(os.path.join(wd, "one.h5")):
        d = differ(refs["small"], os.path.join(wd, "one.h5"))
        check("srun cube == mpirun cube (result datasets, bytes)", not d, "differing %s" % d,
              CONTRACT)
    else:
        check("srun job wrote its cube", False, log_text(wd, r"two-rings-small-\d+\.log")[-800:],
              "")
    print("timing: srun job %.1f s" % (time.time() - t0), flush=True)

    # 2. A 4-task array of shards and a dependent merge job.
    t0 = time.time()
    job = script(wd, "array.sh", SMALL, "array.h5", ["--array", "4", "--tasks-per-node", "1",
                                                     "--time", "00:05:00"])
    jid = submit(["--chdir", wd, job], env)
    mid = submit(["--chdir", wd, "--dependency=afterany:%s" % jid, "--output", "merge-%j.log",
                  "--wrap", "%s merge %s -o array.h5" % (BIN, SMALL)], env) if jid else None
    out, waited = wait_job(jid, 150) if jid else (None, 0)
    states = re.findall(r"JobState=(\S+)", out or "")
    codes = re.findall(r" ExitCode=(\S+)", out or "")
    check("4 array tasks complete with exit 0:0", len(states) == 4 and
          all(s == "COMPLETED" for s in states) and all(c == "0:0" for c in codes),
          "%s %s" % (states, codes), "scontrol show job")
    logs = log_text(wd, r"two-rings-small-\d+_\d\.log")
    shards = sorted(set(re.findall(r"-> shard (\d)/4", logs)))
    check("each task ran its own shard k/4 from SLURM_ARRAY_TASK_ID", shards == ["0", "1", "2", "3"],
          "%s" % shards, "sbatch(1) SLURM_ARRAY_TASK_ID / _COUNT")
    out, waited = wait_job(mid, 90) if mid else (None, 0)
    info = job_info(mid) if mid else {}
    check("merge job (afterany) completes with exit 0:0", info.get("JobState") == "COMPLETED" and
          info.get("ExitCode") == "0:0", "%s %s" % (info.get("JobState"), info.get("ExitCode")),
          "scontrol show job")
    cube = os.path.join(wd, "array.h5")
    if os.path.exists(cube):
        d = differ(refs["small"], cube)
        check("array+merge cube == mpirun cube (result datasets, bytes)", not d,
              "differing %s" % d, CONTRACT)
    else:
        check("merge job wrote the cube", False, log_text(wd, r"merge-\d+\.log")[-800:], "")
    print("timing: array + merge %.1f s" % (time.time() - t0), flush=True)

    # 3. Interrupted by USR1, checkpoints, requeues itself, finishes.
    t0 = time.time()
    job = script(wd, "long.sh", SLOW, "long.h5", ["--tasks-per-node", "2", "--time", "00:05:00"])
    jid = submit(["--chdir", wd, job], env)
    jdir = os.path.join(wd, "long.h5.journal")
    signalled = {"done": False, "released": False, "max_restarts": 0, "pending_since": None}

    def poll(info):
        r = int(info.get("Restarts", "0") or 0)
        signalled["max_restarts"] = max(signalled["max_restarts"], r)
        if not signalled["done"] and info.get("JobState") == "RUNNING" and os.path.isdir(jdir):
            # Wait for at least one record past a 64-byte journal header, so the first run
            # leaves work done and work to do.
            if any(os.path.getsize(os.path.join(jdir, f)) > 64 for f in os.listdir(jdir)):
                sh(["scancel", "--signal=USR1", "--batch", str(jid)])
                signalled["done"] = True
        if signalled["done"] and not signalled["released"] and r >= 1 and \
                info.get("JobState") == "PENDING":
            # A requeued job otherwise waits about 2 minutes to start again (PLATFORM.md).
            # Released at once, slurmd refused it ("Job credential revoked": the first run's
            # credential was revoked in the same second); seen here, so wait a few seconds.
            if signalled["pending_since"] is None:
                signalled["pending_since"] = time.time()
            elif time.time() - signalled["pending_since"] >= 5:
                sh(["scontrol", "update", "jobid=%s" % jid, "starttime=now"])
                signalled["released"] = True

    out, waited = wait_job(jid, 200, poll) if jid else (None, 0)
    info = job_info(jid) if jid else {}
    log = log_text(wd, r"two-rings-slow-\d+\.log")
    check("the job was signalled while computing", signalled["done"], "", "scancel(1) --batch")
    check("the job requeued itself at least once (Restarts >= 1)",
          int(info.get("Restarts", "0") or 0) >= 1, "Restarts=%s" % info.get("Restarts"),
          "scontrol show job; SLURM_RESTART_COUNT")
    check("the run exited with the incomplete status and the script requeued it",
          "requeueing job" in log and "restart 1" in log,
          "log has restart 1: %s" % ("restart 1" in log), "commands.h exit code 3")
    check("requeued job completes with exit 0:0", info.get("JobState") == "COMPLETED" and
          info.get("ExitCode") == "0:0", "%s %s after %.1f s" % (info.get("JobState"),
                                                                info.get("ExitCode"), waited),
          "scontrol show job")
    m = re.search(r"to compute: (\d+) cells.*?; (\d+) already in the cube, (\d+) merged",
                  log.split("restart 1")[-1])
    kept = int(m.group(2)) + int(m.group(3)) if m else 0
    check("the second run kept the first run's checkpoint and computed only the rest",
          m is not None and kept > 0 and int(m.group(1)) + kept == 24,
          "to compute %s, kept %d of 24" % (m.group(1) if m else None, kept),
          "checkpoint in cube and journals, DESIGN.md; 24 cells in tests/sweeps/slurm_slow.yaml")
    cube = os.path.join(wd, "long.h5")
    if os.path.exists(cube):
        d = differ(refs["slow"], cube)
        check("interrupted+requeued cube == mpirun cube (result datasets, bytes)", not d,
              "differing %s" % d, CONTRACT)
    else:
        check("requeued job wrote the cube", False, log[-1500:], "")
    print("timing: interrupted + requeued job %.1f s" % (time.time() - t0), flush=True)

    # 4. An invalid sweep file fails at the start of the job with the validation message.
    bad = os.path.join(wd, "bad.yaml")
    with open(SMALL) as f:
        text = f.read().replace("nodes: 40", "nodes: -7")
    with open(bad, "w") as f:
        f.write(text)
    rc, want = sh([BIN, "check", bad])
    check("coexist check refuses the bad file outside SLURM", rc == 2, "exit %d" % rc,
          "commands.h exit codes")
    job = script(wd, "bad.sh", SMALL, "bad.h5", ["--time", "00:05:00"])
    with open(job) as f:
        text = re.sub(r"^SWEEP=\S+", "SWEEP=" + bad, f.read(), flags=re.M)
    with open(job, "w") as f:
        f.write(text)
    jid = submit(["--chdir", wd, "--output", "bad-%j.log", job], env)
    out, waited = wait_job(jid, 60) if jid else (None, 0)
    info = job_info(jid) if jid else {}
    log = log_text(wd, r"bad-\d+\.log")
    first = want.strip().splitlines()[0] if want.strip() else "?"
    check("job with an invalid sweep file fails (exit 2)", info.get("JobState") == "FAILED" and
          info.get("ExitCode") == "2:0", "%s %s" % (info.get("JobState"), info.get("ExitCode")),
          "scontrol show job; commands.h exit codes")
    check("the validation message is in the job log", first in log and "srun" not in log,
          "looked for: %s" % first, "coexist check output outside SLURM")
    check("no cube was started for the invalid file", not os.path.exists(os.path.join(wd, "bad.h5")),
          "", "the script runs coexist check first")

    # 5. The hand-edited templates in jobs/, with the EDIT lines changed the way a user would.
    t0 = time.time()
    edits = [(r"^SWEEP=\S+", "SWEEP=" + SMALL), (r"--nodes=\d+ ", "--nodes=1 "),
             (r"--ntasks-per-node=\d+ ", "--ntasks-per-node=2 "), (r"--array=0-\d+ ", "--array=0-3 "),
             (r"--time=\S+ ", "--time=00:05:00 ")]
    ids = {}
    for name in ("slurm-one-job", "slurm-shards", "slurm-long"):
        with open(os.path.join(SRC, "jobs", name + ".sh")) as f:
            text = f.read()
        for pat, new in edits:
            text = re.sub(pat, new, text, flags=re.M)
        text = re.sub(r"^CUBE=\S+", "CUBE=tpl-%s.h5" % name, text, flags=re.M)
        text = re.sub(r"^#SBATCH --output=\S+", "#SBATCH --output=tpl-%s-%%j.log" % name, text,
                      flags=re.M)
        path = os.path.join(wd, "tpl-%s.sh" % name)
        with open(path, "w") as f:
            f.write(text)
        ids[name] = submit(["--chdir", wd, path], env)
    ids["merge"] = submit(["--chdir", wd, "--dependency=afterany:%s" % ids["slurm-shards"],
                           "--output", "tpl-merge-%j.log", "--wrap",
                           "%s merge %s -o tpl-slurm-shards.h5" % (BIN, SMALL)], env)
    for name in ("slurm-one-job", "slurm-shards", "slurm-long", "merge"):
        out, waited = wait_job(ids[name], 150) if ids[name] else (None, 0)
        states = re.findall(r"JobState=(\S+)", out or "")
        codes = re.findall(r" ExitCode=(\S+)", out or "")
        check("jobs/%s.sh (edited) completes with exit 0:0" % name if name != "merge" else
              "merge job after jobs/slurm-shards.sh completes",
              states and all(x == "COMPLETED" for x in states) and all(c == "0:0" for c in codes),
              "%s %s" % (states, codes), "scontrol show job")
    for name in ("slurm-one-job", "slurm-shards", "slurm-long"):
        cube = os.path.join(wd, "tpl-%s.h5" % name)
        d = differ(refs["small"], cube) if os.path.exists(cube) else ["no cube"]
        check("jobs/%s.sh cube == mpirun cube (bytes)" % name, not d, "differing %s" % d,
              CONTRACT)
    print("timing: jobs/ templates %.1f s" % (time.time() - t0), flush=True)

    print("timing: slurm test total %.1f s" % (time.time() - t_all))
    print("%d passed, %d failed" % (counts["passed"], counts["failed"]))
    return 1 if counts["failed"] else 0


if __name__ == "__main__":
    sys.exit(main())
