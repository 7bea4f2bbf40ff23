"""coexist cell --dump read back with h5py and numpy (Debian's python3-h5py, python3-numpy).

Checks, each against an independent computation in numpy:
  - the dumped M (CSR) has spectral radius equal to the cell's target (numpy.linalg.eigvals,
    LAPACK dgeev underneath) to 1e-9 relative;
  - the first output of every closed-loop run equals W_out q(r_start) with q = [r; r^2]
    (the readout definition, Lu, Hunt & Ott 2018, Chaos 28, 061104) to 1e-12 relative;
  - the first output of a task's run reproduces that task's last training sample to within the
    training error (ridge regression fits the training data; loose bound 5 %).
"""
import os
import subprocess
import sys

import h5py
import numpy as np

passed = failed = 0


def check(what, ok, detail, source):
    global passed, failed
    passed += bool(ok)
    failed += not ok
    print(f"{'PASS' if ok else 'FAIL'}: {what} ({detail}) [source: {source}]")


exe, sweep = sys.argv[1], sys.argv[2]
out = "dump-check.h5"
if os.path.exists(out):
    os.remove(out)
rho = 1.3
r = subprocess.run([exe, "cell", sweep, "--at", f"reservoir.spectral_radius={rho},seed=1",
                    "--dump", out], capture_output=True, text=True)
check("coexist cell --dump exits 0", r.returncode == 0, f"exit {r.returncode}", "")
if r.returncode != 0:
    print(r.stderr)
    print(f"{passed} passed, {failed} failed")
    sys.exit(1)

r2 = subprocess.run([exe, "cell", sweep, "--at", f"reservoir.spectral_radius={rho},seed=1",
                     "--dump", out], capture_output=True, text=True)
check("a second --dump onto the same file is refused", r2.returncode != 0,
      f"exit {r2.returncode}: {r2.stderr.strip()[:80]}", "never overwrite without asking")

with h5py.File(out, "r") as f:
    n = int(f.attrs["nodes"])
    rowptr, col, val = f["network/rowptr"][:], f["network/col"][:], f["network/val"][:]
    m = np.zeros((n, n))
    for i in range(n):
        for k in range(rowptr[i], rowptr[i + 1]):
            m[i, col[k]] = val[k]
    got = np.max(np.abs(np.linalg.eigvals(m)))
    check("spectral radius of the dumped M equals the target", abs(got - rho) <= 1e-9 * rho,
          f"got {got:.12g}, want {rho}, rel tol 1e-9", "numpy.linalg.eigvals (LAPACK dgeev)")
    w_out = f["readout/w_out"][:]
    worst = 0.0
    runs = sorted(f["runs"].keys(), key=int)
    for j in runs:
        g = f["runs"][j]
        r0 = g["start_state"][:]
        q = np.concatenate([r0, r0 * r0])
        y0 = w_out @ q
        err = np.max(np.abs(y0 - g["output"][0])) / max(1e-300, np.max(np.abs(y0)))
        worst = max(worst, err)
    check("first output of each run equals W_out q(r_start)", worst <= 1e-12,
          f"worst rel err {worst:.3g} over {len(runs)} runs, tol 1e-12",
          "readout definition y = W_out [r; r^2]")
    ntasks = int(f.attrs["tasks"])
    for k in range(ntasks):
        last = f["tasks"][str(k)]["training"][-1]
        y0 = f["runs"][str(k)]["output"][0]
        scale = np.sqrt(np.mean(np.sum((f["tasks"][str(k)]["training"][:] - 
                                        f["tasks"][str(k)]["training"][:].mean(0)) ** 2, 1)))
        err = np.linalg.norm(y0 - last) / scale
        check(f"task {k}: the run starts where its training ended", err <= 0.05,
              f"error {err:.3g} of the task's RMS radius, tol 0.05",
              "ridge fit of the training data (loose bound, common practice)")
os.remove(out)
print(f"{passed} passed, {failed} failed")
sys.exit(0 if failed == 0 else 1)
