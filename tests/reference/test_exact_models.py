"""The exact path end to end: random models affine in jointly normal inputs,
with coefficients that depend on decisions, checked through `feasgate
check`; joint.exact against R and against the simulation.

Sources:
  R mvtnorm::pmvnorm, algorithm GenzBretz (Genz & Bretz 2009, Springer;
    Debian r-cran-mvtnorm) through Rscript: P(lo <= A(x) z <= hi) for
    z ~ N(mu, S) is the normal rectangle probability with covariance
    A S A^T and bounds lo - A mu, hi - A mu; singular when rows outnumber
    inputs.
  The simulation's own estimate (binomial standard error, common
    practice): exact and simulated joint probabilities agree within 4.5
    standard errors (simulation's, plus the exact path's error).
Per-row exact violation probabilities are checked against the normal
tail 1 - Phi((b - a.mu)/sd) computed with scipy.stats.norm (SciPy).
"""
import os
import subprocess
import tempfile

import numpy as np
from refcommon import Counter, run_check
from scipy.stats import norm

c = Counter()
rng = np.random.default_rng(4242)
N = 100000


def fmt(v):
    return "%.12g" % v


def make(k):
    n = int(rng.integers(2, 7))            # inputs (one multivariate normal)
    m = int(rng.integers(2, 13))           # rows, often more than n
    p = 2                                  # decisions
    mu = rng.normal(size=n)
    B = rng.normal(size=(n, n)) * 0.6
    S = B @ B.T + 0.3 * np.eye(n)
    x = rng.uniform(0.5, 1.5, size=p)
    A0 = rng.normal(size=(m, n))
    A1 = rng.normal(size=(m, n)) * (rng.random((m, n)) < 0.3)  # * x[0]
    rows, lo, hi, A = [], [], [], []
    for i in range(m):
        terms = []
        for j in range(n):
            if A0[i, j] == 0 and A1[i, j] == 0:
                continue
            coef = fmt(A0[i, j])
            if A1[i, j] != 0:
                coef = "(%s + %s*x[0])" % (fmt(A0[i, j]), fmt(A1[i, j]))
            terms.append("%s*z[%d]" % (coef, j))
        expr = " + ".join(terms)
        a = A0[i] + A1[i] * x[0]
        sd = float(np.sqrt(a @ S @ a))
        mean = float(a @ mu)
        if i % 4 == 3:  # a range row
            l0 = mean - sd * rng.uniform(1.0, 2.5)
            u0 = mean + sd * rng.uniform(1.0, 2.5) - x[1]
            rows.append({"name": "r%d" % i,
                         "require": "%s <= %s <= %s + x[1]" % (fmt(l0), expr, fmt(u0))})
            lo.append(l0), hi.append(u0 + x[1])
        else:
            b0 = mean + sd * rng.uniform(1.2, 3.0) - 2 * x[1]
            rows.append({"name": "r%d" % i, "require": "%s <= %s + 2*x[1]" % (expr, fmt(b0))})
            lo.append(-np.inf), hi.append(b0 + 2 * x[1])
        A.append(a)
    model = {
        "format": 1, "name": "exact%d" % k,
        "decisions": [{"name": "x", "size": p, "lower": 0, "upper": 10}],
        "uncertain": [{"name": "z", "size": n, "distribution": {
            "family": "multivariate_normal", "mean": [float(v) for v in mu],
            "covariance": [[float(v) for v in r] for r in S]}}],
        "constraints": rows}
    if n >= 2 and k % 3 == 0:  # an independent normal input instead
        model["uncertain"] = [{"name": "z", "size": n, "distribution": {
            "family": "normal", "mean": [float(v) for v in mu],
            "sd": [float(v) for v in np.sqrt(np.diag(S))]}}]
        S = np.diag(np.diag(S))
    request = {"decision": {"x": [float(v) for v in x]}, "samples": N, "seed": 77 + k}
    return model, request, np.array(A), mu, S, np.array(lo), np.array(hi)


def r_rect(cases):
    with tempfile.TemporaryDirectory() as d:
        for k, (A, mu, S, lo, hi) in enumerate(cases):
            np.savetxt(os.path.join(d, "S%d.txt" % k), A @ S @ A.T, fmt="%.17g")
            np.savetxt(os.path.join(d, "l%d.txt" % k), lo - A @ mu, fmt="%.17g")
            np.savetxt(os.path.join(d, "u%d.txt" % k), hi - A @ mu, fmt="%.17g")
        script = """
library(mvtnorm)
set.seed(3)
d <- "%s"
for (k in 0:%d) {
  S <- as.matrix(read.table(file.path(d, sprintf("S%%d.txt", k))))
  dimnames(S) <- NULL
  l <- scan(file.path(d, sprintf("l%%d.txt", k)), quiet = TRUE)
  u <- scan(file.path(d, sprintf("u%%d.txt", k)), quiet = TRUE)
  p <- pmvnorm(lower = l, upper = u, sigma = S,
               algorithm = GenzBretz(maxpts = 2e6, abseps = 2e-7, releps = 0))
  cat(sprintf("%%.12g %%.6g\\n", p[1], attr(p, "error")))
}
""" % (d, len(cases) - 1)
        out = subprocess.run(["Rscript", "-e", script], capture_output=True,
                             text=True, check=True).stdout.split()
    v = list(map(float, out))
    return [(v[2 * k], v[2 * k + 1]) for k in range(len(cases))]


cases, runs = [], []
for k in range(20):
    model, request, A, mu, S, lo, hi = make(k)
    cases.append((A, mu, S, lo, hi))
    runs.append((model, request))
ref = r_rect(cases)
for k, ((model, request), (A, mu, S, lo, hi), (rp, rerr)) in enumerate(zip(runs, cases, ref)):
    rc, res = run_check(model, request)
    if rc not in (0, 1, 2) or "joint" not in res:
        c.check(False, "model %d: feasgate check failed (%s)" % (k, rc))
        continue
    ex = res["joint"].get("exact", {})
    p, err = ex.get("probability"), ex.get("error")
    if p is None:
        c.check(False, "model %d: no exact answer: %s" % (k, ex))
        continue
    # R mvtnorm::pmvnorm (GenzBretz)
    # our error <= 1e-4 where the rows do not outnumber the inputs; with
    # more rows the integrand has kinks and the work bound can stop at a
    # few 1e-4 (R's own error is then of that order too)
    c.check(abs(p - rp) <= err + rerr + 1e-6 and (err <= 1e-4 or len(A) > len(mu)),
            "model %d: exact %.7f +- %.1e, R %.7f +- %.1e" % (k, p, err, rp, rerr))
    sp, se = res["joint"]["probability"], res["joint"]["std_error"]
    # the simulation (binomial standard error, common practice)
    c.check(abs(sp - p) <= 4.5 * max(se, 1e-12) + err,
            "model %d: simulated %.5f +- %.5f vs exact %.5f" % (k, sp, se, p))
    # per row: one-sided rows are normal tails (scipy.stats.norm)
    byname = {r["name"]: r for r in res["constraints"]}
    for i in range(len(A)):
        if not np.isinf(lo[i]):
            continue
        sd = float(np.sqrt(A[i] @ S @ A[i]))
        want = float(norm.sf((hi[i] - A[i] @ mu) / sd))
        got = byname["r%d" % i]["exact"]["probability"]
        c.check(abs(got - want) <= 1e-9 + 1e-7 * want,
                "model %d row %d: exact violation %.10g, SciPy %.10g" % (k, i, got, want))
    print("model %2d rows %2d inputs %d  exact %.6f +- %.1e  R %.6f  sim %.5f +- %.5f"
          % (k, len(A), len(mu), p, err, rp, sp, se), flush=True)
c.finish()
