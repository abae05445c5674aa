"""Binomial interval endpoints against statsmodels and SciPy.

Sources:
  - statsmodels.stats.proportion.proportion_confint, methods "beta"
    (Clopper & Pearson 1934), "wilson" (Wilson 1927) and "jeffreys"
    (Brown, Cai & DasGupta 2001), Debian python3-statsmodels;
  - scipy.stats.beta.ppf for the beta quantiles behind Clopper-Pearson;
  - the rule of three (common practice; Hanley & Lippman-Hand 1983).
"""
import subprocess

from refcommon import REF_TOOL, Counter
from scipy.stats import beta
from statsmodels.stats.proportion import proportion_confint

c = Counter()

grid = []
for n in (1, 2, 5, 10, 37, 100, 1000, 12345, 100000, 1000000):
    ks = sorted({0, 1, n // 3, n // 2, (9 * n) // 10, n - 1, n} & set(range(n + 1)))
    for k in ks:
        for level in (0.8, 0.9, 0.95, 0.99, 0.999):
            grid.append((k, n, level))


def tool(method):
    text = "".join("%d %d %.17g\n" % g for g in grid)
    out = subprocess.run([REF_TOOL, "interval", method], input=text,
                         capture_output=True, text=True, check=True).stdout
    return [tuple(map(float, line.split())) for line in out.splitlines()]


def rel(a, b):
    if a == b:
        return 0.0
    return abs(a - b) / max(abs(b), 1e-300)


for method, sm_name, tol in (("clopper_pearson", "beta", 1e-9),
                             ("jeffreys", "jeffreys", 1e-9),
                             ("wilson", "wilson", 1e-12)):
    ours = tool(method)
    worst = 0.0
    for (k, n, level), (lo, hi) in zip(grid, ours):
        rlo, rhi = proportion_confint(k, n, alpha=1 - level, method=sm_name)
        # statsmodels leaves the k = 0 / k = n edges of "beta" and
        # "jeffreys" as NaN or 0/1 depending on version; the edges are 0
        # and 1 by definition (Clopper & Pearson 1934; Brown et al. 2001).
        # Wilson's edges are 0 and 1 in closed form too; statsmodels
        # computes them and leaves rounding noise of about 1e-20.
        if k == 0:
            rlo = 0.0
        if k == n:
            rhi = 1.0
        e = max(rel(lo, rlo), rel(hi, rhi))
        worst = max(worst, e)
        c.check(e <= tol, "%s k=%d n=%d level=%g: ours (%.17g, %.17g) statsmodels "
                "(%.17g, %.17g)" % (method, k, n, level, lo, hi, rlo, rhi))
    print("%-16s %d cases against statsmodels, worst relative difference %.2e"
          % (method, len(grid), worst))

# Clopper-Pearson directly against SciPy's beta quantiles, including large n
# where some beta routines give up (SciPy uses Boost's incomplete beta).
big = [(930000, 1000000, 0.95), (93000000, 100000000, 0.95),
       (930000000, 1000000000, 0.95), (999999999, 1000000000, 0.99),
       (123456, 987654321, 0.9)]
text = "".join("%d %d %.17g\n" % g for g in big)
out = subprocess.run([REF_TOOL, "interval", "clopper_pearson"], input=text,
                     capture_output=True, text=True, check=True).stdout
for (k, n, level), line in zip(big, out.splitlines()):
    lo, hi = map(float, line.split())
    a = 1 - level
    rlo = beta.ppf(a / 2, k, n - k + 1)
    rhi = beta.ppf(1 - a / 2, k + 1, n - k)
    c.check(rel(lo, rlo) < 1e-9 and rel(hi, rhi) < 1e-8,
            "large n k=%d n=%d: ours (%.17g, %.17g) scipy (%.17g, %.17g)"
            % (k, n, lo, hi, rlo, rhi))

# Rule of three (common practice): zero failures in n gives a one-sided 95%
# upper bound of about 3/n, the two-sided 90% Clopper-Pearson upper end.
for n in (300, 3000, 30000, 3000000):
    line = subprocess.run([REF_TOOL, "interval", "clopper_pearson"],
                          input="0 %d 0.9\n" % n, capture_output=True,
                          text=True, check=True).stdout
    hi = float(line.split()[1])
    c.check(abs(hi * n - 3.0) < 0.02, "rule of three n=%d: upper*n = %.4f" % (n, hi * n))

c.finish()
