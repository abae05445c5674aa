"""slack_to_target of a constraint row against the normal quantile.

Source: scipy.stats.norm.ppf (Debian python3-scipy). For a row a . x <= c
with x ~ N(mu, S), the row's excess e = a . x - c is normal with mean
m = a . mu - c and sd s = sqrt(a^T S a); the smallest loosening d >= 0
with P(e <= d) >= target is d = max(0, m + s * norm.ppf(target)).
feasgate reads it from the row's excess histogram, within 1/128 relative
(FG_HIST_REL_ERROR), and from n samples, whose target quantile has
standard error s * sqrt(t (1 - t) / n) / phi(ppf(t)) (the asymptotic
variance of a sample quantile, common practice). Each check must land
within the histogram's error plus 5 such standard errors; a row that
already holds with the target must report 0.

NaN excess never holds (DEVELOPERS.md, the model language's IEEE rules):
the row sqrt(x) <= 1 with x ~ N(0, 1) is NaN for x < 0 (probability 1/2),
holds for 0 <= x <= 1 and misses by sqrt(x) - 1 above. A loosening s
makes it hold with probability Phi((1 + s)^2) - 1/2, so the slack at
target t < 1/2 is sqrt(norm.ppf(t + 1/2)) - 1 (0 when t <= Phi(1) - 1/2),
and at any t > 1/2 no finite loosening reaches it: slack_to_target null.
The sampling error is the same sample quantile's, through the map
x -> sqrt(x) - 1 (delta method, common practice).
"""
import math

import numpy as np
from refcommon import Counter, run_check
from scipy.stats import norm

c = Counter()
N = 200000

S = [[4.0, 1.2, -0.8], [1.2, 2.25, 0.6], [-0.8, 0.6, 1.0]]
MU = [1.0, -0.5, 2.0]
ROWS = [  # name, coefficients a, limit c
    ("pair", [1, 1, 0], 0.5),
    ("tilt", [-0.5, 0, 1], 1.0),
    ("single", [0, 0, 1], 2.3),
    ("easy", [0, 1, 0], 6.0),     # holds with any usual target: slack 0
]
MODEL = {
    "format": 1, "name": "ref-slack",
    "decisions": [{"name": "unused"}],
    "uncertain": [{"name": "x", "size": 3, "distribution": {
        "family": "multivariate_normal", "mean": MU, "covariance": S}}],
    "constraints": [
        {"name": n, "require": "%s <= %r" % (
            " + ".join("%r * x[%d]" % (a, i) for i, a in enumerate(co) if a), lim)}
        for n, co, lim in ROWS],
}

for target, seed in ((0.9, 5), (0.97, 6), (0.75, 7)):
    rc, res = run_check(MODEL, {"decision": {"unused": 0}, "samples": N,
                                "seed": seed, "target": target})
    rows = {r["name"]: r for r in res["constraints"]}
    for name, co, lim in ROWS:
        a = np.asarray(co, float)
        m = float(a @ np.asarray(MU)) - lim
        s = math.sqrt(float(a @ np.asarray(S) @ a))
        z = norm.ppf(target)
        exact = max(0.0, m + s * z)
        got = rows[name]["slack_to_target"]
        se = s * math.sqrt(target * (1 - target) / N) / norm.pdf(z)
        tol = abs(exact) / 128 + 5 * se
        print("target %.2f %-7s slack %.5f  scipy %.5f  tolerance %.5f"
              % (target, name, got, exact, tol))
        if exact == 0 and m + s * z < -10 * se:
            c.check(got == 0, "%s at %g: holds already, slack 0 (got %r)"
                    % (name, target, got))
        else:
            c.check(got is not None and abs(got - exact) <= tol,
                    "%s at %g: slack %r vs norm.ppf %r within %g"
                    % (name, target, got, exact, tol))
# NaN excess: sqrt of a negative draw
NAN_MODEL = {
    "format": 1, "name": "ref-slack-nan",
    "decisions": [{"name": "unused"}],
    "uncertain": [{"name": "x", "distribution": {"family": "normal", "mean": 0, "sd": 1}}],
    "constraints": [{"name": "root", "require": "sqrt(x) <= 1"}],
}
for target, seed in ((0.45, 8), (0.42, 9), (0.3, 10), (0.9, 11), (0.55, 12)):
    rc, res = run_check(NAN_MODEL, {"decision": {"unused": 0}, "samples": N,
                                    "seed": seed, "target": target})
    row = res["constraints"][0]
    got = row["slack_to_target"]
    c.check(row["nonfinite"] > 0.45 * N, "NaN rows counted: %d" % row["nonfinite"])
    if target > 0.5:
        print("NaN row, target %.2f: slack %r (none can reach it)" % (target, got))
        c.check(got is None, "target %g above the finite share: slack null, got %r"
                % (target, got))
        continue
    q = norm.ppf(target + 0.5)             # x quantile where the row must hold
    exact = max(0.0, math.sqrt(q) - 1)
    # sample quantile of x at probability t + 1/2, mapped by sqrt(x) - 1
    se = math.sqrt((target + 0.5) * (0.5 - target) / N) / norm.pdf(q) / (2 * math.sqrt(q))
    tol = exact / 128 + 5 * se
    print("NaN row, target %.2f: slack %.5f  scipy %.5f  tolerance %.5f"
          % (target, got if got is not None else float("nan"), exact, tol))
    if math.sqrt(q) - 1 < -10 * se:
        c.check(got == 0, "NaN row at %g: holds already, slack 0 (got %r)" % (target, got))
    else:
        c.check(got is not None and abs(got - exact) <= tol,
                "NaN row at %g: slack %r vs %r within %g" % (target, got, exact, tol))
c.finish()
