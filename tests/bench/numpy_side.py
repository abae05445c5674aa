"""tests/bench/numpy_side.py -- the NumPy implementation of each benchmark
workload, the yardstick feasgate's throughput is compared against.

Usage: /usr/bin/python3 numpy_side.py WORKLOAD PARAMS.json SAMPLES
prints one JSON line {"samples", "seconds", "joint", "rows", "blas"};
"blas" lists the BLAS/LAPACK libraries the process had mapped after a
matrix product (read from /proc/self/maps), so every figure says which
BLAS NumPy ran on.

Design: a straightforward, vectorised NumPy program of the kind a team
writes in a notebook: numpy.random.default_rng (PCG64, NumPy's ziggurat
normals), batches of BATCH samples as (batch x dims) arrays, the rows as
array expressions, counts by reductions. Only the simulation loop is timed
(imports and parameter set-up are not). It computes what feasgate's check
needs for its verdict and row table (joint count, per-row violation
counts), not feasgate's histograms, so the comparison favours NumPy.
The driver runs it with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE removed from
its environment. Its joint probability is printed beside feasgate's as a
check that both sides simulate the same law.

Thread use: single process; NumPy's BLAS may use its own threads.
"""

import json
import math
import sys
import time

import numpy as np

BATCH = 100000


def affine(p, rng, b):
    mean = np.array(p["mean"])
    sd = np.array(p["sd"])
    low = np.linalg.cholesky(np.array(p["corr"])) * sd[:, None]
    coef = np.array(p["coef"])
    cap = np.array(p["cap"])

    def run(n):
        z = rng.standard_normal((n, len(mean))) @ low.T + mean
        return z @ coef.T - cap > 0
    return run


def chain(p, rng, b):
    m, s = np.array(p["mean"]), np.array(p["sd"])
    sdlog = np.sqrt(np.log1p((s / m) ** 2))
    meanlog = np.log(m) - sdlog ** 2 / 2
    start, due = np.array(p["start"], float), np.array(p["due"], float)
    k = len(m)

    def run(n):
        dur = np.exp(meanlog + sdlog * rng.standard_normal((n, k)))
        fin = np.empty((n, k))
        fin[:, 0] = start[0] + dur[:, 0]
        for i in range(1, k):
            fin[:, i] = np.maximum(start[i], fin[:, i - 1]) + dur[:, i]
        prev = np.concatenate([np.zeros((n, 1)), fin[:, :-1]], axis=1)
        wait = np.maximum(prev - start, 0)
        return np.concatenate([wait > p["wait"], fin > due], axis=1)
    return run


def table(p, rng, b):
    data = np.array(p["data"])
    w = np.array(p["weights"], float)
    w /= w.sum()
    t = np.array(p["terms"])
    cap = np.array(p["cap"])

    def run(n):
        s = data[rng.choice(len(data), size=n, p=w)]
        v = s[:, t[:, 0]] + 0.5 * s[:, t[:, 1]] - 0.25 * s[:, t[:, 2]]
        return v - cap > 0
    return run


def _dist(model, name):
    return next(u for u in model["uncertain"] if u["name"] == name)["distribution"]


def theatre(p, rng, b):
    mdl, dec = p["model"], p["decision"]
    dd = _dist(mdl, "dur")
    m, s = np.array(dd["mean"], float), np.array(dd["sd"], float)
    sdlog = np.sqrt(np.log1p((s / m) ** 2))
    meanlog = np.log(m) - sdlog ** 2 / 2
    tt = _dist(mdl, "turnover")
    lam = _dist(mdl, "urgent")["mean"]
    start = np.array(dec["start"], float)
    late = dec["late_team"]
    # the overrun allowance per late team, read from the row
    over = next(c["require"] for c in mdl["constraints"] if c["name"] == "overrun")
    per_team = float(over.split("+")[1].split("*")[0])
    # durations tied by a Gaussian copula with equal correlation (the
    # lognormal member maps the correlated normal directly)
    low = np.eye(6)
    for dep in mdl.get("dependence", []):
        if dep["members"] == ["dur"]:
            r = dep["correlation"]["equal"]
            low = np.linalg.cholesky(np.full((6, 6), r) + (1 - r) * np.eye(6))

    def run(n):
        z = rng.standard_normal((n, 6)) @ low.T
        dur = np.exp(meanlog + sdlog * z)
        turn = rng.triangular(tt["low"], tt["mode"], tt["high"], (n, 6))
        urgent = rng.poisson(lam, n)
        leave = np.empty((n, 6))
        leave[:, 0] = start[0] + dur[:, 0] + turn[:, 0]
        for i in range(1, 6):
            leave[:, i] = np.maximum(start[i], leave[:, i - 1]) + dur[:, i] + turn[:, i]
        prev = np.concatenate([np.zeros((n, 1)), leave[:, :-1]], axis=1)
        wait = np.maximum(prev - start, 0)
        end = leave[:, 5] + 55 * urgent
        return np.concatenate([(end > 540 + per_team * late)[:, None], wait > 60], axis=1)
    return run


def microgrid(p, rng, b):
    mdl, dec = p["model"], p["decision"]
    de = _dist(mdl, "demand_err")
    low = np.linalg.cholesky(np.array(de["covariance"]))
    mu = np.array(de["mean"], float)
    cl = _dist(mdl, "cloud")
    gen = np.array(dec["gen"], float)
    base = np.array([38, 46, 52, 55, 57, 60, 58, 56, 59, 66, 78, 85], float)
    sun = np.array([2, 10, 24, 38, 48, 54, 55, 50, 40, 26, 12, 3], float)

    def truncated(n):
        x = rng.normal(cl["mean"], cl["sd"], (n, 12))
        bad = (x < cl["lower"]) | (x > cl["upper"])
        while bad.any():  # redraw the few outside the bounds
            x[bad] = rng.normal(cl["mean"], cl["sd"], int(bad.sum()))
            bad = (x < cl["lower"]) | (x > cl["upper"])
        return x

    def run(n):
        err = rng.standard_normal((n, 12)) @ low.T + mu
        cloud = truncated(n)
        net = gen + sun * (1 + cloud) - (base + err)
        charge = np.minimum(120 + np.cumsum(np.clip(net, -40, 40), axis=1), 200)
        return np.concatenate([net < -40, charge < 40], axis=1)
    return run


def blas_in_use():
    """The BLAS/LAPACK shared objects this process has mapped after a
    matrix product (NumPy picks libblas.so.3 through Debian's alternatives:
    OpenBLAS when libopenblas0-pthread is installed, else the reference
    BLAS)."""
    a = np.ones((64, 64))
    _ = a @ a
    libs = set()
    with open("/proc/self/maps") as f:
        for ln in f:
            path = ln.split()[-1] if len(ln.split()) >= 6 else ""
            base = path.rsplit("/", 1)[-1]
            if "blas" in base or "lapack" in base:
                libs.add(path)
    return sorted(libs)


def main():
    name, path, samples = sys.argv[1], sys.argv[2], int(sys.argv[3])
    with open(path) as f:
        params = json.load(f)
    rng = np.random.default_rng(20261201)
    run = globals()[name](params, rng, BATCH)
    run(1000)  # warm up (first-call costs)
    t0 = time.perf_counter()
    joint, rows, done = 0, None, 0
    while done < samples:
        n = min(BATCH, samples - done)
        viol = run(n)
        joint += int(n - viol.any(axis=1).sum())
        r = viol.sum(axis=0)
        rows = r if rows is None else rows + r
        done += n
    secs = time.perf_counter() - t0
    print(json.dumps({"samples": samples, "seconds": secs, "joint": joint,
                      "rows": [int(x) for x in rows], "blas": blas_in_use()}))


if __name__ == "__main__":
    main()
