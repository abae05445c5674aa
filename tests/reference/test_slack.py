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
c.finish()
