"""Exact-only checks ("exact": "only") through the offline `feasgate
check`: verdicts on models whose joint probability is known, Gaussian
copulas with normal margins, the refusal of a model that does not
qualify, and the same answer on 1 and 2 workers.

Sources:
  Independent normal rows u_i <= c_i: P = prod Phi((c_i - mu_i) / sd_i),
    the normal CDF from scipy.stats.norm (SciPy) -- closed form.
  A bivariate normal rectangle: scipy.stats.multivariate_normal.cdf
    (SciPy; Genz's method, abseps 1e-7).
  Gaussian copula members with normal margins are jointly normal with
    covariance sd_i sd_j C_ij (the copula's correlation restricted to
    them; Nelsen 2006, "An Introduction to Copulas", sec. 2.10: a Gaussian
    copula with normal margins is the multivariate normal law); the
    rectangle probability of the rows A u <= b from
    scipy.stats.multivariate_normal.cdf with covariance A S A^T. The
    simulation of the same check (binomial standard error, common
    practice) must agree within 4.5 standard errors.
The verdict rule checked is the one "exact": "only" states: pass when
P - E >= target, fail when P + E < target, else inconclusive.
"""
import json
import os
import subprocess
import tempfile

import numpy as np
from refcommon import BIN, Counter, run_check
from scipy.stats import multivariate_normal, norm

c = Counter()

TANKS = {
    "format": 1, "name": "tanks",
    "decisions": [{"name": "cap", "size": 3, "lower": 0, "upper": 100}],
    "uncertain": [{"name": "inflow", "size": 3, "distribution": {
        "family": "normal", "mean": [10, 20, 15], "sd": [2, 3, 1.5]}}],
    "constraints": [{"name": "holds", "require": "inflow <= cap"}],
}


def closed_tanks(cap):
    mu, sd = np.array([10, 20, 15]), np.array([2, 3, 1.5])
    return float(np.prod(norm.cdf((np.array(cap) - mu) / sd)))


def only(model, decision, target=None, seed=5, workers=2):
    req = {"decision": decision, "seed": seed, "exact": "only"}
    if target is not None:
        req["target"] = target
    return run_check(model, req, workers=workers)


# ---- verdicts on independent rows (closed form) ----
for cap, target, want, code in (([16, 30, 20], 0.95, "pass", 0),
                                ([13, 24, 16], 0.7, "fail", 1)):
    p = closed_tanks(cap)
    rc, res = only(TANKS, {"cap": cap}, target)
    ex = res["joint"]["exact"]
    # scipy.stats.norm (closed form product)
    c.check(abs(ex["probability"] - p) <= ex["error"] + 1e-12,
            "independent rows %r: exact %.15f +- %.1e, closed form %.15f"
            % (cap, ex["probability"], ex["error"], p))
    c.check(res["verdict"] == want and rc == code,
            "independent rows %r, target %g: verdict %s (exit %d), expected %s"
            % (cap, target, res["verdict"], rc, want))
    c.check(res["joint"]["samples"] == 0 and res["joint"]["probability"] == ex["probability"]
            and res["joint"]["std_error"] is None,
            "exact only: joint.samples 0, probability the exact one")
    for r in res["constraints"]:
        i = int(r["name"][len("holds["):-1])
        mu, sd = [10, 20, 15][i], [2, 3, 1.5][i]
        v = float(norm.sf((cap[i] - mu) / sd))
        # per row: a normal tail (scipy.stats.norm)
        c.check(abs(r["probability"] - v) <= 1e-12 + 1e-9 * v and r["violated"] == 0,
                "row %s: exact violation %.12g, SciPy %.12g" % (r["name"], r["probability"], v))
    print("tanks %r: P %.9f (closed form %.9f) target %g -> %s"
          % (cap, ex["probability"], p, target, res["verdict"]), flush=True)

# ---- a correlated pair: SciPy's rectangle, and the inconclusive verdict ----
PAIR = {
    "format": 1, "name": "pair",
    "decisions": [{"name": "x", "lower": -10, "upper": 10}],
    "uncertain": [{"name": "z", "size": 2, "distribution": {
        "family": "multivariate_normal", "mean": [1, 2],
        "covariance": [[1.0, 0.6], [0.6, 2.0]]}}],
    "constraints": [{"name": "a", "require": "z[0] <= x"},
                    {"name": "b", "require": "z[0] + z[1] <= 2 * x + 1"}],
}
x = 2.0
A = np.array([[1.0, 0.0], [1.0, 1.0]])
S = np.array([[1.0, 0.6], [0.6, 2.0]])
mu = np.array([1.0, 2.0])
ref = float(multivariate_normal.cdf(np.array([x, 2 * x + 1]) - A @ mu,
                                    mean=np.zeros(2), cov=A @ S @ A.T,
                                    abseps=1e-7, releps=0))
rc, res = only(PAIR, {"x": x}, 0.5)
ex = res["joint"]["exact"]
# scipy.stats.multivariate_normal.cdf (Genz)
c.check(abs(ex["probability"] - ref) <= ex["error"] + 2e-7,
        "pair: exact %.8f +- %.1e, SciPy %.8f" % (ex["probability"], ex["error"], ref))
c.check(res["verdict"] == "pass" and ex["probability"] - ex["error"] >= 0.5,
        "pair at target 0.5: pass (%s)" % res["verdict"])
rc, res = only(PAIR, {"x": x}, 0.95)
c.check(res["verdict"] == "fail" and rc == 1,
        "pair at target 0.95 (P = %.4f): fail (%s)" % (ref, res["verdict"]))
# target exactly at the reported probability: P - E < target <= P + E
if ex["error"] > 0:
    rc, res2 = only(PAIR, {"x": x}, ex["probability"])
    c.check(res2["verdict"] == "inconclusive" and rc == 2
            and res2["joint"]["exact"]["probability"] == ex["probability"],
            "pair at target = P: inconclusive (%s)" % res2["verdict"])
    c.check(res2["samples_to_settle"] is None, "no samples_to_settle with exact only")
else:
    c.check(False, "pair: the lattice reported error 0, the inconclusive case cannot be hit")
print("pair: P %.8f +- %.1e, SciPy %.8f" % (ex["probability"], ex["error"], ref), flush=True)

# ---- Gaussian copulas with normal margins ----
def corr(form, d):
    r = 0.55
    if form == "ar1":
        return {"ar1": r}, np.array([[r ** abs(i - j) for j in range(d)] for i in range(d)])
    if form == "equal":
        return {"equal": r}, np.full((d, d), r) + (1 - r) * np.eye(d)
    rng = np.random.default_rng(9)
    B = rng.normal(size=(d, d))
    M = B @ B.T + d * np.eye(d)
    s = np.sqrt(np.diag(M))
    C = M / np.outer(s, s)
    return [[float(v) for v in row] for row in C], C


for k, form in enumerate(("ar1", "equal", "full")):
    # members: a (2 normals), g (gamma, not used by any row), b (normal)
    spec, C = corr(form, 4)
    model = {
        "format": 1, "name": "copula-%s" % form,
        "decisions": [{"name": "cap", "size": 3, "lower": 0, "upper": 100}],
        "uncertain": [
            {"name": "a", "size": 2, "distribution": {"family": "normal", "mean": [10, 20], "sd": [2, 3]}},
            {"name": "g", "distribution": {"family": "gamma", "shape": 2, "scale": 1}},
            {"name": "b", "distribution": {"family": "normal", "mean": 5, "sd": 1.5}}],
        "dependence": [{"kind": "gaussian_copula", "members": ["a", "g", "b"], "correlation": spec}],
        "constraints": [{"name": "fit", "require": "a <= cap[0:2]"},
                        {"name": "total", "require": "a[0] - 0.5 * a[1] + 2 * b <= cap[2]"}],
    }
    cap = [13.0, 24.0, 12.0]
    idx = [0, 1, 3]
    sd = np.array([2.0, 3.0, 1.5])
    Sn = np.outer(sd, sd) * C[np.ix_(idx, idx)]
    Am = np.array([[1, 0, 0], [0, 1, 0], [1, -0.5, 2]])
    m = Am @ np.array([10.0, 20.0, 5.0])
    want = float(multivariate_normal.cdf(np.array(cap) - m, mean=np.zeros(3),
                                         cov=Am @ Sn @ Am.T, abseps=1e-7, releps=0))
    rc, res = only(model, {"cap": cap}, 0.5, seed=11 + k)
    ex = res["joint"]["exact"]
    # scipy.stats.multivariate_normal.cdf with the copula's covariance
    c.check(ex["probability"] is not None and abs(ex["probability"] - want) <= ex["error"] + 2e-7,
            "copula %s: exact %s +- %s, SciPy %.7f" % (form, ex.get("probability"), ex.get("error"), want))
    rc, sim = run_check(model, {"decision": {"cap": cap}, "seed": 11 + k, "samples": 200000})
    sp, se = sim["joint"]["probability"], sim["joint"]["std_error"]
    ea = sim["joint"]["exact"]
    # the simulation (binomial standard error, common practice)
    c.check(abs(sp - want) <= 4.5 * se + 1e-6 and abs(ea["probability"] - ex["probability"]) <= 1e-15,
            "copula %s: simulated %.5f +- %.5f, SciPy %.5f; auto's exact equals only's"
            % (form, sp, se, want))
    print("copula %s: exact %.7f +- %.1e  SciPy %.7f  simulated %.5f +- %.5f"
          % (form, ex["probability"], ex["error"], want, sp, se), flush=True)

# a truncated normal member does not qualify: refused, pointing at it
trunc = json.loads(json.dumps(TANKS))
trunc["uncertain"].append({"name": "spill", "distribution": {
    "family": "normal", "mean": 0, "sd": 1, "lower": -3}})
trunc["constraints"].append({"name": "spilt", "require": "spill <= cap[0]"})
with tempfile.TemporaryDirectory() as d:
    mp, rp = os.path.join(d, "m.json"), os.path.join(d, "r.json")
    json.dump(trunc, open(mp, "w"))
    json.dump({"decision": {"cap": [16, 30, 20]}, "exact": "only"}, open(rp, "w"))
    p = subprocess.run([BIN, "check", mp, rp], capture_output=True, text=True, timeout=120)
    c.check(p.returncode == 3 and "/uncertain/1/distribution" in p.stderr
            and "spilt" in p.stderr and "truncated" in p.stderr,
            "truncated normal refused at its distribution: exit %d %r" % (p.returncode, p.stderr))

# ---- 1 and 2 workers: identical answers ----
def figures(res):
    j = dict(res["joint"])
    e = dict(j["exact"])
    e.pop("elapsed_ms", None)
    j["exact"] = e
    rows = [(r["name"], r["violated"], r["probability"], r.get("exact")) for r in res["constraints"]]
    return json.dumps([res["verdict"], j, rows], sort_keys=True)


for mode in ("only", "auto"):
    req = {"decision": {"x": x}, "seed": 21, "exact": mode, "samples": 50000}
    _, r1 = run_check(PAIR, req, workers=1)
    _, r2 = run_check(PAIR, req, workers=2)
    c.check(figures(r1) == figures(r2), "exact %s: 1 and 2 workers give the same figures" % mode)
c.finish()
