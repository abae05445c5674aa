"""Binomial interval endpoints against statsmodels and SciPy.

Sources:
  - statsmodels.stats.proportion.proportion_confint, methods "beta"
    (Clopper & Pearson 1934), "wilson" (Wilson 1927) and "jeffreys"
    (Brown, Cai & DasGupta 2001), Debian python3-statsmodels;
  - scipy.stats.beta.ppf for the beta quantiles behind Clopper-Pearson;
  - the rule of three (common practice; Hanley & Lippman-Hand 1983);
  - Newcombe (1998), "Two-sided confidence intervals for the single
    proportion: comparison of seven methods", Statistics in Medicine
    17:857-872, Table I (95%), to the printed 4 decimals;
  - a sweep of over 100,000 (k, n, confidence) points per method with n up
    to 1e12 against scipy.stats.beta.ppf / .isf (Boost's inverse incomplete
    beta in SciPy 1.10) for Clopper-Pearson and Jeffreys and against the
    Wilson closed form evaluated with mpmath at 30 digits. Where SciPy's
    quantile and ours differ by more than 1e-9 relative, SciPy is not taken
    as the truth (its incomplete beta loses digits for parameters in the
    billions and in far tails): our endpoint is then judged by mpmath
    (tests/reference/mpref.py: the incomplete beta at our endpoint, 40
    digits: for Clopper-Pearson's integer parameters exactly, by the
    binomial sum I_x(a, b) = P(Bin(a+b-1, x) >= a), Abramowitz & Stegun
    26.5.24; otherwise by quadrature, for a random subset), and the count
    of such points is printed.
"""
import re
import time

import mpmath
import numpy as np
from mpref import mp_beta_int_xerr, mp_beta_xerr
import subprocess

import os

from refcommon import REF_TOOL, ROOT, Counter
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


# ---- Newcombe (1998), Table I, 95% -------------------------------------
# (k, n): (Wilson score lower, upper), (Clopper-Pearson lower, upper)
NEWCOMBE = {
    (81, 263): ((0.2553, 0.3662), (0.2527, 0.3676)),
    (15, 148): ((0.0624, 0.1605), (0.0578, 0.1617)),
    (0, 20): ((0.0, 0.1611), (0.0, 0.1684)),
    (1, 29): ((0.0061, 0.1718), (0.0009, 0.1776)),
}
for method, col in (("wilson", 0), ("clopper_pearson", 1)):
    text = "".join("%d %d 0.95\n" % kn for kn in NEWCOMBE)
    out = subprocess.run([REF_TOOL, "interval", method], input=text,
                         capture_output=True, text=True, check=True).stdout
    for kn, line in zip(NEWCOMBE, out.splitlines()):
        lo, hi = map(float, line.split())
        want = NEWCOMBE[kn][col]
        c.check(round(lo, 4) == want[0] and round(hi, 4) == want[1],
                "Newcombe (1998) Table I %s %d/%d: ours (%.4f, %.4f), printed "
                "(%.4f, %.4f)" % (method, kn[0], kn[1], lo, hi, want[0], want[1]))

# ---- the work caps, read from the header that states them ---------------
with open(os.path.join(ROOT, "server", "core", "quantile.h")) as f:
    HDR = f.read()
STEPS_MAX = int(re.search(r"#define FG_Q_STEPS_MAX (\d+)", HDR).group(1))
TERMS_MAX = int(re.search(r"#define FG_Q_TERMS_MAX (\d+)", HDR).group(1))


def counted(method, pts):
    text = "".join("%d %d %.17g\n" % g for g in pts)
    out = subprocess.run([REF_TOOL, "interval_count", method], input=text,
                         capture_output=True, text=True, check=True,
                         timeout=600).stdout
    rows = [line.split() for line in out.splitlines()]
    return (np.array([[float(r[0]), float(r[1])] for r in rows]),
            np.array([[int(r[2]), int(r[3])] for r in rows]))


# ---- regressions: parameters where other beta quantiles never returned --
# (k = 9,009,382 of n = 1e7; k = n/2 for n = 2e6) against SciPy (Boost).
reg = [(9009382, 10000000, 0.95), (1000000, 2000000, 0.95),
       (1000000, 2000000, 0.999999999), (999424, 1998848, 0.95)]
iv, cnt = counted("clopper_pearson", reg)
for (k, n, level), (lo, hi), (st, te) in zip(reg, iv, cnt):
    a = 1 - level
    rlo = beta.ppf(a / 2, k, n - k + 1)
    rhi = beta.isf(a / 2, k + 1, n - k)
    c.check(rel(lo, rlo) < 1e-9 and rel(hi, rhi) < 1e-9
            and st <= STEPS_MAX and te <= TERMS_MAX,
            "Clopper-Pearson k=%d n=%d level=%g ends: ours (%.17g, %.17g) "
            "scipy (%.17g, %.17g), %d steps, %d terms"
            % (k, n, level, lo, hi, rlo, rhi, st, te))

# ---- the sweep --------------------------------------------------------------
rng = np.random.default_rng(20261202)
ns = sorted(set(int(round(v)) for v in np.logspace(0, 12, 560)))
levels = [0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.975, 0.99, 0.995, 0.999, 0.9999,
          1 - 1e-5, 1 - 1e-6, 1 - 1e-7, 1 - 1e-8, 0.999999999]
sweep = []
for n in ns:
    ks = {0, 1, n // 2, n - 1, n}
    ks |= set(int(v) for v in rng.integers(0, n + 1, size=8))
    for k in sorted(x for x in ks if 0 <= x <= n):
        for level in levels:
            sweep.append((k, n, level))
print("sweep: %d (k, n, confidence) points per method, n up to %.0e"
      % (len(sweep), max(ns)))
c.check(len(sweep) >= 100000, "the sweep has at least 100,000 points (%d)" % len(sweep))
K = np.array([g[0] for g in sweep], dtype=float)
N = np.array([g[1] for g in sweep], dtype=float)
A = 1 - np.array([g[2] for g in sweep])


def rel_arr(x, ref):
    d = np.abs(x - ref)
    return np.where(d == 0, 0.0, d / np.maximum(np.abs(ref), 1e-300))


MP_BUDGET = 60  # mpmath judgements per method at most (each ~0.2 s), a random choice
for method in ("clopper_pearson", "jeffreys"):
    t0 = time.time()
    iv, cnt = counted(method, sweep)
    t_tool = time.time() - t0
    off = 0.5 if method == "jeffreys" else 0.0
    # lower endpoint: B^-1(alpha/2; k + off, n - k + 1 - 2 off) for k > 0
    la, lb = K + off, N - K + 1 - 2 * off
    ua, ub = K + 1 - 2 * off + off, N - K + off
    if method == "jeffreys":
        la, lb, ua, ub = K + 0.5, N - K + 0.5, K + 0.5, N - K + 0.5
    else:
        la, lb, ua, ub = K, N - K + 1, K + 1, N - K
    with np.errstate(all="ignore"):
        rlo = np.where(K > 0, beta.ppf(A / 2, np.maximum(la, 1e-300), lb), 0.0)
        rhi = np.where(K < N, beta.isf(A / 2, ua, np.maximum(ub, 1e-300)), 1.0)
    finite = np.all(np.isfinite(iv))
    c.check(finite, "%s: every endpoint finite" % method)
    # steps are summed over the two endpoints' quantiles: below one cap
    c.check(int(cnt[:, 0].max()) <= STEPS_MAX and int(cnt[:, 1].max()) <= TERMS_MAX,
            "%s: work within the caps (max %d steps for both quantiles, cap %d "
            "each; max %d terms, cap %d)" % (method, cnt[:, 0].max(), STEPS_MAX,
                                             cnt[:, 1].max(), TERMS_MAX))
    elo, ehi = rel_arr(iv[:, 0], rlo), rel_arr(iv[:, 1], rhi)
    c.check(bool(np.all((K > 0) | (iv[:, 0] == 0)) and np.all((K < N) | (iv[:, 1] == 1))),
            "%s: lower 0 at k = 0 and upper 1 at k = n" % method)
    # points where SciPy and ours disagree: judged by mpmath
    bad = []
    for i in np.nonzero((elo > 1e-9) & (K > 0))[0]:
        bad.append((A[i] / 2, 1 - A[i] / 2, la[i], lb[i], iv[i, 0], i))
    for i in np.nonzero((ehi > 1e-9) & (K < N))[0]:
        bad.append((1 - A[i] / 2, A[i] / 2, ua[i], ub[i], iv[i, 1], i))
    agree = 2 * len(sweep) - len(bad)
    worst_mp = 0.0
    # Clopper-Pearson's parameters are integers: every disagreement with
    # a short binomial sum is judged exactly (A&S 26.5.24, mpmath); the
    # rest (and Jeffreys') by quadrature, at most MP_BUDGET chosen at random.
    exact = [r for r in bad if method == "clopper_pearson" and min(r[2], r[3]) <= 2000]
    rest = [r for r in bad if r not in exact]
    judged = exact + (rest if len(rest) <= MP_BUDGET else [rest[j] for j in sorted(
        rng.choice(len(rest), MP_BUDGET, replace=False))])
    for (u, uc, a_, b_, x, i) in judged:
        e = None
        if method == "clopper_pearson":
            e = mp_beta_int_xerr(u, uc, a_, b_, x)
        if e is None:
            e = mp_beta_xerr(u, uc, a_, b_, x, 1 - x)
        worst_mp = max(worst_mp, e)
        c.check(e <= 1e-9, "%s k=%d n=%d level=%.10g: ours %.17g is off by %.3g "
                "relative by mpmath (SciPy differs)" % (method, K[i], N[i],
                                                         1 - A[i], x, e))
    c.check(len(rest) <= MP_BUDGET or len(rest) < 0.02 * len(sweep),
            "%s: SciPy disagrees at few points without an exact judge (%d)"
            % (method, len(rest)))
    print("%-16s %d endpoints within 1e-9 of SciPy, %d judged by mpmath "
          "(of %d SciPy disagreements), worst mpmath relative error %.2e; "
          "max %d steps, %d terms; ref_tool %.1f s"
          % (method, agree, len(judged), len(bad), worst_mp, cnt[:, 0].max(),
             cnt[:, 1].max(), t_tool))

# Wilson: the closed form at 30 digits (mpmath) as the reference.
iv, _ = counted("wilson", sweep)
mpmath.mp.dps = 30
worst = 0.0
zs = {}
for level in levels:
    zs[level] = mpmath.sqrt(2) * mpmath.erfinv(mpmath.mpf(level))
for idx, (k, n, level) in enumerate(sweep):
    z = zs[level]
    kk, nn = mpmath.mpf(k), mpmath.mpf(n)
    p = kk / nn
    z2 = z * z
    den = 1 + z2 / nn
    centre = (p + z2 / (2 * nn)) / den
    half = z / den * mpmath.sqrt(p * (1 - p) / nn + z2 / (4 * nn * nn))
    rlo = 0 if k == 0 else centre - half
    rhi = 1 if k == n else centre + half
    e = max(float(abs(iv[idx, 0] - rlo) / max(abs(rlo), mpmath.mpf(10) ** -300)),
            float(abs(iv[idx, 1] - rhi) / max(abs(rhi), mpmath.mpf(10) ** -300)))
    worst = max(worst, e)
    if e > 1e-9:
        c.check(False, "wilson k=%d n=%d level=%.10g: ours (%.17g, %.17g), "
                "closed form (%s, %s)" % (k, n, level, iv[idx, 0], iv[idx, 1],
                                          mpmath.nstr(rlo, 17), mpmath.nstr(rhi, 17)))
c.check(worst <= 1e-9, "wilson: %d points within 1e-9 of the closed form "
        "(worst %.2e)" % (len(sweep), worst))
print("wilson           %d points against the closed form (mpmath), worst "
      "relative difference %.2e" % (len(sweep), worst))

c.finish()
