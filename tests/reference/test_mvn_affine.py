"""Joint feasibility of models affine in a jointly normal vector, against
Genz's method as implemented in SciPy.

Source: scipy.stats.multivariate_normal.cdf (Genz 1992, J. Comput. Graph.
Statist. 1:141; Debian python3-scipy). When every constraint row is
a_i . x <= b_i with x ~ N(mu, S), the rows hold together with probability
P(A x <= b) = Phi_{A S A^T}(b - A mu), a multivariate normal rectangle
probability. feasgate's estimate must fall within 4 standard errors of it,
and its 95% interval should usually cover it.
"""
import math

import numpy as np
from refcommon import Counter, run_check
from scipy.stats import multivariate_normal

c = Counter()
N = 400000


def exact(A, mu, S, b):
    A, mu, S, b = map(np.asarray, (A, mu, S, b))
    m = A @ mu
    C = A @ S @ A.T
    return float(multivariate_normal.cdf(b - m, mean=np.zeros(len(b)), cov=C,
                                         abseps=1e-8, releps=1e-8, maxpts=2000000))


def compare(name, model, request, A, mu, S, b):
    request = dict(request, samples=N, seed=request.get("seed", 11))
    rc, res = run_check(model, request)
    p = exact(A, mu, S, b)
    j = res["joint"]
    se = math.sqrt(p * (1 - p) / j["samples"])
    z = (j["probability"] - p) / se
    print("%-28s feasgate %.5f  scipy %.5f  z = %+.2f  interval [%.5f, %.5f]"
          % (name, j["probability"], p, z, j["interval"]["lower"], j["interval"]["upper"]))
    c.check(j["samples"] == N, name + ": sample count")
    c.check(abs(z) <= 4, name + ": |estimate - Genz| within 4 standard errors")
    c.check(j["interval"]["lower"] <= j["probability"] <= j["interval"]["upper"],
            name + ": interval brackets the estimate")
    return res


# 1. Three correlated inputs given by a covariance matrix, three rows on
#    different combinations; the right-hand sides depend on the decision.
S1 = [[4.0, 1.2, -0.8], [1.2, 2.25, 0.6], [-0.8, 0.6, 1.0]]
mu1 = [1.0, -0.5, 2.0]
m1 = {
    "format": 1, "name": "ref-mvn-three",
    "decisions": [{"name": "cap", "size": 2}],
    "uncertain": [{"name": "x", "size": 3, "distribution": {
        "family": "multivariate_normal", "mean": mu1, "covariance": S1}}],
    "constraints": [
        {"name": "pair", "require": "x[0] + x[1] <= cap[0]"},
        {"name": "tilt", "require": "x[2] - 0.5 * x[0] <= 3"},
        {"name": "upper_second", "require": "x[1] <= cap[1] + 0.25"},
    ],
}
A1 = [[1, 1, 0], [-0.5, 0, 1], [0, 1, 0]]
compare("three inputs, covariance", m1, {"decision": {"cap": [3.0, 1.0]}},
        A1, mu1, S1, [3.0, 3.0, 1.25])

# 2. sd + correlation, a vector constraint expanding to four rows, written
#    with a definition; one row in ">=" form.
sd2 = [1.0, 2.0, 0.5, 1.5]
R2 = [[1, 0.5, 0.3, 0.1], [0.5, 1, 0.4, 0.2], [0.3, 0.4, 1, 0.6], [0.1, 0.2, 0.6, 1]]
S2 = (np.outer(sd2, sd2) * np.array(R2)).tolist()
mu2 = [10, 20, 5, 8]
m2 = {
    "format": 1, "name": "ref-mvn-vector",
    "decisions": [{"name": "stock", "size": 4, "lower": 0}],
    "uncertain": [{"name": "demand", "size": 4, "distribution": {
        "family": "multivariate_normal", "mean": mu2, "sd": sd2, "correlation": R2}}],
    "definitions": [{"name": "short", "value": "demand - stock"}],
    "constraints": [
        {"name": "cover", "require": "short <= 0"},
    ],
}
stock = [11.5, 23.0, 5.6, 9.7]
res = compare("vector rows, sd+correlation", m2, {"decision": {"stock": stock}},
              np.eye(4), mu2, S2, stock)
c.check(len(res["constraints"]) == 4 and
        sorted(r["name"] for r in res["constraints"]) ==
        ["cover[0]", "cover[1]", "cover[2]", "cover[3]"], "vector constraint rows named cover[i]")

# Each row alone: a univariate normal tail, Phi((b - mu)/sd).
from scipy.stats import norm  # noqa: E402
for r in res["constraints"]:
    i = int(r["name"][6])
    p_viol = float(norm.sf((stock[i] - mu2[i]) / sd2[i]))
    se = math.sqrt(p_viol * (1 - p_viol) / N)
    c.check(abs(r["probability"] - p_viol) <= 4 * se,
            "%s violation probability %.5f vs normal tail %.5f" % (r["name"], r["probability"], p_viol))

# 3. A range constraint and a ">=" row mixing an independent normal input
#    with the vector: lo <= x0 + y <= hi and 2*x1 - y >= -4.
S3 = [[1.0, 0.7], [0.7, 2.0]]
mu3 = [0.0, 1.0]
m3 = {
    "format": 1, "name": "ref-mvn-range",
    "decisions": [{"name": "lo"}, {"name": "hi"}],
    "uncertain": [
        {"name": "x", "size": 2, "distribution": {"family": "multivariate_normal",
                                                  "mean": mu3, "covariance": S3}},
        {"name": "y", "distribution": {"family": "normal", "mean": 0.5, "sd": 0.8}},
    ],
    "constraints": [
        {"name": "band", "require": "lo <= x[0] + y <= hi"},
        {"name": "slope", "require": "2 * x[1] - y >= -4"},
    ],
}
# Variables (x0, x1, y) are jointly normal; with u = x0 + y and
# v = -2 x1 + y the rows hold together when lo <= u <= hi and v <= 4, a
# rectangle probability of the bivariate normal (u, v).
S3full = [[1.0, 0.7, 0.0], [0.7, 2.0, 0.0], [0.0, 0.0, 0.64]]
mu3full = [0.0, 1.0, 0.5]
B = np.array([[1, 0, 1], [0, -2, 1]])
Cuv = B @ np.array(S3full) @ B.T
muv = B @ np.array(mu3full)
lo, hi = -1.5, 2.5
p3 = float(multivariate_normal.cdf([hi, 4.0], mean=muv, cov=Cuv, abseps=1e-9)
           - multivariate_normal.cdf([lo, 4.0], mean=muv, cov=Cuv, abseps=1e-9))
rc, res3 = run_check(m3, {"decision": {"lo": lo, "hi": hi}, "samples": N, "seed": 5})
j = res3["joint"]
se = math.sqrt(p3 * (1 - p3) / N)
print("%-28s feasgate %.5f  scipy %.5f  z = %+.2f" % ("range and >= rows", j["probability"], p3,
                                                    (j["probability"] - p3) / se))
c.check(abs(j["probability"] - p3) <= 4 * se, "range constraint within 4 standard errors")

# Verdict consistency with the reported interval (the rule of the API).
for r in (res, res3):
    lo_, hi_ = r["joint"]["interval"]["lower"], r["joint"]["interval"]["upper"]
    t = r["target"]
    want = "pass" if lo_ >= t else ("fail" if hi_ < t else "inconclusive")
    c.check(r["verdict"] == want, "verdict follows the interval rule")

c.finish()
