"""Drivers ("explain": true) against the mean of a truncated normal.

Source: the inverse Mills ratio. For Y standard normal,
E[Y | Y > t] = phi(t) / (1 - Phi(t)) and Var[Y | Y > t] = 1 + t L - L^2
with L that ratio (Johnson, Kotz & Balakrishnan, Continuous Univariate
Distributions, vol. 1, truncated normal). For a row a . x <= b with x ~
N(mu, S), the row is violated when a . (x - mu) > c = b - a . mu; with
s = sqrt(a^T S a), tau = c / s and x_j - mu_j = beta_j Y + (independent
noise), beta_j = (S a)_j / s, so
    E[x_j - mu_j | violated] = beta_j L(tau),
and feasgate's shift_j (the violators' mean minus the overall mean, over
the overall standard deviation sd_j = sqrt(S_jj)) should be
    beta_j / sd_j * L(tau),
computed here with scipy.stats.norm.pdf / norm.sf (Debian python3-scipy).
Each listed shift must lie within 5 standard errors, the error of the
violators' mean sqrt(Var[x_j | violated] / n_v) plus that of the overall
mean sqrt(S_jj / n) (added in quadrature, which overstates it: the two
means are positively correlated). Also: drivers are ranked by |shift|,
at most 5, null for a row never violated, and the figures agree across
--workers 1 / 2 and --chunk 256 / the default to 1e-9 relative.
"""
import math

import numpy as np
from refcommon import Counter, run_check
from scipy.stats import norm

c = Counter()
N = 200000


def model(name, mu, S, rows):
    return {
        "format": 1, "name": name,
        "decisions": [{"name": "unused"}],
        "uncertain": [{"name": "x", "size": len(mu), "distribution": {
            "family": "multivariate_normal", "mean": mu, "covariance": S}}],
        "constraints": [
            {"name": n, "require": "%s <= %r" % (
                " + ".join("%r * x[%d]" % (a, i) for i, a in enumerate(co) if a), b)}
            for n, co, b in rows],
    }


def expected(mu, S, co, b):
    mu, S, a = np.asarray(mu, float), np.asarray(S, float), np.asarray(co, float)
    s = math.sqrt(float(a @ S @ a))
    tau = (b - float(a @ mu)) / s
    lam = norm.pdf(tau) / norm.sf(tau)
    beta = (S @ a) / s
    sd = np.sqrt(np.diag(S))
    pv = norm.sf(tau)
    var_y = 1 + tau * lam - lam * lam
    out = {}
    for j in range(len(mu)):
        shift = beta[j] / sd[j] * lam
        var_v = S[j, j] - beta[j] ** 2 * (1 - var_y)
        se = math.sqrt(var_v / (N * pv) + S[j, j] / N) / sd[j]
        out["x[%d]" % j] = (shift, se)
    return out


def compare(name, mu, S, rows, seed):
    m = model(name, mu, S, rows)
    req = {"decision": {"unused": 0}, "samples": N, "seed": seed, "explain": True}
    _, res = run_check(m, req, workers=2)
    _, res1 = run_check(m, req, workers=1, extra=("--chunk", "256"))
    got = {r["name"]: r for r in res["constraints"]}
    got1 = {r["name"]: r for r in res1["constraints"]}
    for rn, co, b in rows:
        d = got[rn]["drivers"]
        exp = expected(mu, S, co, b)
        listed = isinstance(d, list) and 0 < len(d) <= 5
        c.check(listed, "%s/%s: drivers listed" % (name, rn))
        if not listed:
            continue
        c.check(all(abs(d[i]["shift"]) >= abs(d[i + 1]["shift"])
                    for i in range(len(d) - 1)), "%s/%s: ranked by |shift|" % (name, rn))
        c.check(len(d) == min(5, len(mu)), "%s/%s: every component listed (%d)"
                % (name, rn, len(d)))
        for e in d:
            shift, se = exp[e["input"]]
            z = (e["shift"] - shift) / se
            print("%-10s %-6s %-5s shift %+.4f  closed form %+.4f  z = %+.2f"
                  % (name, rn, e["input"], e["shift"], shift, z))
            c.check(abs(z) <= 5, "%s/%s/%s: shift %.5f vs %.5f (z %.2f)"
                    % (name, rn, e["input"], e["shift"], shift, z))
        d1 = {e["input"]: e["shift"] for e in got1[rn]["drivers"]}
        c.check(all(abs(d1[e["input"]] - e["shift"]) <= 1e-9 * max(1, abs(e["shift"]))
                    for e in d), "%s/%s: same on 1 worker, chunk 256" % (name, rn))
    return res


# 1. independent components, unequal spreads
compare("indep", [1.0, -2.0, 0.5], [[1, 0, 0], [0, 4, 0], [0, 0, 0.25]],
        [("total", [1, 1, 1], 1.5), ("lean", [2, -0.5, 0], 4.0)], 31)
# 2. correlated, three rows
S2 = [[4.0, 1.2, -0.8], [1.2, 2.25, 0.6], [-0.8, 0.6, 1.0]]
compare("corr", [1.0, -0.5, 2.0], S2,
        [("pair", [1, 1, 0], 3.0), ("tilt", [-0.5, 0, 1], 3.5),
         ("single", [0, 0, 1], 2.8)], 32)
# 3. five components, a rare violation (tau about 2.3)
S3 = np.eye(5) * 0.5 + 0.5 * np.full((5, 5), 0.3)
np.fill_diagonal(S3, 1.0)
res = compare("five", [0.0] * 5, S3.tolist(),
              [("wide", [1, 0.5, -0.5, 0.25, 2], 6.0)], 33)

# a row never violated has null drivers; one row alone: joint = row
m = model("never", [0.0], [[1.0]], [("far", [1], 50.0)])
_, r = run_check(m, {"decision": {"unused": 0}, "samples": 5000, "seed": 3,
                     "explain": True})
c.check(r["constraints"][0]["drivers"] is None and r["joint"]["drivers"] is None,
        "a row never violated: drivers null (row and joint)")
m = model("alone", [0.0, 1.0], [[1.0, 0.3], [0.3, 2.0]], [("one", [1, 1], 2.0)])
_, r = run_check(m, {"decision": {"unused": 0}, "samples": 20000, "seed": 4,
                     "explain": True})
c.check(r["joint"]["drivers"] == r["constraints"][0]["drivers"],
        "a single row: joint drivers equal the row's")
_, r = run_check(m, {"decision": {"unused": 0}, "samples": 2000, "seed": 4})
c.check("drivers" not in r["joint"] and "drivers" not in r["constraints"][0],
        "without explain: no drivers")
c.finish()
