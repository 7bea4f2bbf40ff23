#!/usr/bin/python3
"""coexist benchmark: the cells of the benchmark sweep computed the way a researcher's own
NumPy/SciPy script would, recomputing everything per cell, as the yardstick for tools/bench.c.

Same model and the same amount of work per cell as coexist, not the same bits:
  - Erdos-Renyi network (Erdos & Renyi 1959, Publ. Math. Debrecen 6, 290) with uniform weights,
    rescaled to the target spectral radius (largest eigenvalue modulus by scipy's ARPACK eigs);
  - continuous reservoir dr/dt = gamma (-r + tanh(M r + sigma W_in u)) (Lu, Hunt & Ott 2018,
    Chaos 28, 061104), classical RK4 with the input at the step start, midpoint and end;
  - features [r; r^2]; every state of the training part is kept (as a script would), the Gram
    matrix is Q^T Q and C = U^T Q per task; blended ridge readout (Hoerl & Kennard 1970,
    Technometrics 12, 55) solved by scipy.linalg.solve (Cholesky, assume_a="pos");
  - one closed-loop run of `horizon` time units from the end of each task's training, the
    readout recomputed at every RK4 stage, then a check of the tail (bounded; spread).
Usage: bench_numpy.py JSON-PARAMETERS; prints one JSON object with wall seconds per stage and
the CPU seconds of each cell (run with OPENBLAS_NUM_THREADS=1: one core).
"""
import json
import sys
import time

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg


def cycle(task, t):
    c = np.asarray(task["centre"], dtype=float)
    ph = task["speed"] * t
    x = c[0] + task["radius"] * np.cos(ph)
    y = c[1] + task["radius"] * task.get("ellipticity", 1.0) * np.sin(ph)
    return np.stack([x, y], axis=1)


def one_cell(p, rng):
    timing = {}
    t0 = time.perf_counter()
    n = p["nodes"]
    dens = p["mean_degree"] / n
    m = scipy.sparse.random(n, n, density=dens, format="csr", random_state=rng,
                            data_rvs=lambda k: rng.uniform(-1.0, 1.0, k))
    rho0 = abs(scipy.sparse.linalg.eigs(m, k=1, which="LM", return_eigenvectors=False)[0])
    m = (m * (p["spectral_radius"] / rho0)).tocsr()
    dim = 2
    win = np.zeros((n, dim))
    win[np.arange(n), rng.integers(0, dim, n)] = rng.uniform(-1.0, 1.0, n)
    win *= p["input_scaling"]
    timing["network"] = time.perf_counter() - t0

    dt, gamma = p["dt"], p["rate"]
    wash = int(round(p["washout"] / dt))
    train = int(round(p["length"] / dt))
    horizon = int(round(p["horizon"] / dt))

    def f(r, u):
        return gamma * (-r + np.tanh(m @ r + win @ u))

    t0 = time.perf_counter()
    grams, cs, ends, sigs = [], [], [], []
    for task in p["tasks"]:
        u = cycle(task, 0.5 * dt * np.arange(2 * (wash + train) + 1))
        r = np.zeros(n)
        q = np.empty((train, 2 * n))
        for i in range(wash + train):
            u0, uh, u1 = u[2 * i], u[2 * i + 1], u[2 * i + 2]
            k1 = f(r, u0)
            k2 = f(r + 0.5 * dt * k1, uh)
            k3 = f(r + 0.5 * dt * k2, uh)
            k4 = f(r + dt * k3, u1)
            r = r + dt / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)
            if i >= wash:
                q[i - wash, :n] = r
                q[i - wash, n:] = r * r
        target = u[2 * wash + 2::2][:train]
        tg = time.perf_counter()
        grams.append(q.T @ q)
        cs.append(target.T @ q)
        timing["gram"] = timing.get("gram", 0.0) + time.perf_counter() - tg
        ends.append(r)
        sigs.append(target)
    timing["drive"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    w = [p["blend"], 1.0 - p["blend"]]
    a = sum(wk * wk * g for wk, g in zip(w, grams)) + p["ridge"] * np.eye(2 * n)
    b = sum(wk * wk * c for wk, c in zip(w, cs))
    wout = scipy.linalg.solve(a, b.T, assume_a="pos").T
    timing["solve"] = time.perf_counter() - t0

    t0 = time.perf_counter()
    allsig = np.concatenate(sigs)
    centre = 0.5 * (allsig.max(axis=0) + allsig.min(axis=0))
    half = 0.5 * (allsig.max(axis=0) - allsig.min(axis=0)) * p["bound"]
    lo, hi = centre - half, centre + half

    def out(r):
        return wout @ np.concatenate([r, r * r])

    def g(r):
        return f(r, out(r))

    labels = []
    for r0 in ends:
        r = r0.copy()
        ys = np.empty((horizon + 1, dim))
        ys[0] = out(r)
        steps = horizon
        for i in range(1, horizon + 1):
            k1 = g(r)
            k2 = g(r + 0.5 * dt * k1)
            k3 = g(r + 0.5 * dt * k2)
            k4 = g(r + dt * k3)
            r = r + dt / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)
            ys[i] = out(r)
            if not np.all(np.isfinite(ys[i])) or np.any(ys[i] < lo) or np.any(ys[i] > hi):
                steps = i
                break
        tail = ys[max(0, steps + 1 - int(round(p["tail"] / dt))):steps + 1]
        spread = np.sqrt(np.mean(np.sum((tail - tail.mean(axis=0)) ** 2, axis=1)))
        labels.append("diverged" if steps < horizon else
                      ("fixed-point" if spread < 1e-3 else "moving"))
    timing["probes"] = time.perf_counter() - t0
    timing["labels"] = labels
    return timing


def main():
    p = json.loads(sys.argv[1])
    rng = np.random.default_rng(p.get("seed", 1))
    cells = []
    for cell in p["cells"]:
        q = dict(p)
        q.update(cell)
        t0, c0 = time.perf_counter(), time.process_time()
        t = one_cell(q, rng)
        t["total"] = time.perf_counter() - t0
        t["cpu"] = time.process_time() - c0
        cells.append(t)
    print(json.dumps({"cells": cells}))


if __name__ == "__main__":
    main()
