"""tests/reference/test_families.py -- feasgate's random inputs against
outside references.

Scenarios come from `feasgate scenarios` (refcommon.run_scenarios), joint
probabilities from `feasgate check` (refcommon.run_check), both offline and
with fixed seeds, so every figure printed here is reproducible.

  1. Every family of the model format, 100000 draws each (one column per
     family in one model, so the columns are independent):
     - continuous families: Kolmogorov-Smirnov test against the matching
       frozen distribution of scipy.stats (scipy.stats.kstest), p > 1e-4
       and D < 0.01;
     - discrete families: Pearson chi-square on the probability mass
       (scipy.stats.chisquare; adjacent cells merged until each expects
       at least 5), p > 1e-4;
     - sample mean and variance against the closed forms written out here
       (each closed form is first compared with scipy.stats' moments, which
       also pins the parameter mapping), within 5 standard errors; the
       standard error of the variance uses the family's kurtosis from
       scipy.stats.
  2. Gaussian copula: Spearman rank correlation of every member pair
     within 0.02 of (6/pi) asin(rho/2), the relation that holds for a
     Gaussian copula with continuous margins (Kruskal 1958, JASA 53:814),
     for equal and ar1 correlation, with lognormal, gamma, poisson, weibull
     and beta members whose margins still pass their own tests.
  3. Multivariate normal: sample means and covariances within 5 standard
     errors of the declared ones (normal theory: var(s_ij) ~ (s_ii s_jj +
     s_ij^2) / n), both parametrisations.
  4. Joint probabilities through `feasgate check`, within 4 standard
     errors of closed forms: a sum of exponentials (Erlang law,
     scipy.stats.gamma.cdf), a maximum plus an independent input
     (product of CDFs integrated against the density, scipy.integrate.quad),
     lognormal tails (Phi((ln c - mu) / sigma), scipy.stats.norm.cdf).
  5. Determinism: scenario i alone equals row i in bulk (across block
     boundaries), design and validation share no scenario, and checks give
     the same counts with 1 and 2 workers and with chunks of 256 and 16384;
     the JSON answer follows schemas/scenarios.schema.json (jsonschema).

Prints one line per figure and "N passed, N failed" last.
"""
import csv
import io
import json
import math

import os

import jsonschema
import numpy as np
from refcommon import ROOT, Counter, run_check, run_scenarios
from scipy import integrate, stats

c = Counter()
N = 100000
SEED = 20261201
KS_P_MIN = 1e-4
KS_D_MAX = 0.01
CHI_P_MIN = 1e-4
MOMENT_SE = 5.0
SPEARMAN_TOL = 0.02
JOINT_SE = 4.0
with open(os.path.join(ROOT, "schemas", "scenarios.schema.json")) as _f:
    SCHEMA = jsonschema.Draft202012Validator(json.load(_f))


def table(model, count=N, seed=SEED, start=0, stream="design"):
    """(columns, float array count x columns) from the CSV output."""
    text = run_scenarios(model, count, seed, start=start, stream=stream, csv=True)
    rows = csv.reader(io.StringIO(text, newline=""))
    header = next(rows)
    data = np.array([[float(x) for x in r] for r in rows], dtype=float)
    return header, data.reshape(len(data), len(header))


def close(a, b, rel=1e-9):
    return abs(a - b) <= rel * max(1.0, abs(a), abs(b))


def moments(name, x, mean, var, dist):
    """Sample mean and variance against closed forms within MOMENT_SE
    standard errors; the closed forms are also checked against scipy."""
    n = len(x)
    sm, sv, sk = (float(v) for v in dist.stats(moments="mvk"))
    c.check(close(mean, sm) and close(var, sv),
            "%s: closed-form mean/variance %.6g/%.6g equal scipy's %.6g/%.6g"
            % (name, mean, var, sm, sv))
    mu4 = (sk + 3.0) * var * var
    se_m = math.sqrt(var / n)
    se_v = math.sqrt(max(mu4 - var * var, 0.0) / n)
    zm = (x.mean() - mean) / se_m
    zv = (x.var(ddof=1) - var) / se_v
    c.check(abs(zm) <= MOMENT_SE, "%s: mean %.6g vs %.6g (z = %+.2f)" % (name, x.mean(), mean, zm))
    c.check(abs(zv) <= MOMENT_SE, "%s: variance %.6g vs %.6g (z = %+.2f)"
            % (name, x.var(ddof=1), var, zv))
    return zm, zv


def ks(name, x, dist, mean, var):
    d, p = stats.kstest(x, dist.cdf)
    zm, zv = moments(name, x, mean, var, dist)
    print("%-14s KS D = %.5f  p = %.3f   mean z = %+.2f  var z = %+.2f" % (name, d, p, zm, zv))
    c.check(p > KS_P_MIN, "%s: KS p = %.3g > %g" % (name, p, KS_P_MIN))
    c.check(d < KS_D_MAX, "%s: KS D = %.5f < %g" % (name, d, KS_D_MAX))
    return d


def merge_cells(obs, exp, least=5.0):
    """Merge adjacent cells (in order) until each expects at least `least`;
    a short remainder joins the last full cell."""
    mo, me = [], []
    co = ce = 0.0
    for o, e in zip(obs, exp):
        co += o
        ce += e
        if ce >= least:
            mo.append(co)
            me.append(ce)
            co = ce = 0.0
    if ce > 0 or co > 0:
        if me:
            mo[-1] += co
            me[-1] += ce
        else:
            mo.append(co)
            me.append(ce)
    return np.array(mo), np.array(me)


def chi2(name, x, values, probs, mean, var, dist=None):
    """Chi-square of the draws on support `values` with masses `probs`
    (the last cell also takes whatever lies above the listed support)."""
    values = np.asarray(values, dtype=float)
    probs = np.asarray(probs, dtype=float)
    n = len(x)
    obs = np.array([np.count_nonzero(x == v) for v in values], dtype=float)
    outside = n - obs.sum()
    if dist is not None:  # a tail beyond the listed support: its own cell
        obs[-1] += outside
        outside = 0
    c.check(outside == 0, "%s: %d draws outside the support" % (name, outside))
    mo, me = merge_cells(obs, probs * n)
    stat, p = stats.chisquare(mo, me)
    if dist is None:
        sk = float(np.sum(probs * (values - mean) ** 4) / var ** 2 - 3.0)
        dist = _Moments(mean, var, sk)
    zm, zv = moments(name, x, mean, var, dist)
    print("%-14s chi2 = %.1f on %d cells  p = %.3f   mean z = %+.2f  var z = %+.2f"
          % (name, stat, len(mo), p, zm, zv))
    c.check(p > CHI_P_MIN, "%s: chi-square p = %.3g > %g" % (name, p, CHI_P_MIN))


class _Moments:
    """Moments of a finite distribution given directly (stand-in for a
    frozen scipy distribution in moments())."""

    def __init__(self, m, v, k):
        self.m, self.v, self.k = m, v, k

    def stats(self, moments="mvk"):
        return self.m, self.v, self.k


def count_support(dist, q=1 - 1e-12):
    hi = int(dist.ppf(q))
    ks_ = np.arange(0, hi + 1)
    pm = dist.pmf(ks_)
    pm[-1] += dist.sf(hi)
    return ks_, pm


# ---------------------------------------------------------------------------
# 1. every family
phi = stats.norm.pdf
Phi = stats.norm.cdf


def truncnorm_case(mu, sd, lo, hi):
    a, b = (lo - mu) / sd, (hi - mu) / sd
    z = Phi(b) - Phi(a)
    pa, pb = phi(a), (phi(b) if math.isfinite(b) else 0.0)
    apa = a * pa if math.isfinite(a) else 0.0
    bpb = b * pb if math.isfinite(b) else 0.0
    mean = mu + sd * (pa - pb) / z
    var = sd * sd * (1 + (apa - bpb) / z - ((pa - pb) / z) ** 2)
    return stats.truncnorm(a, b, loc=mu, scale=sd), mean, var


def lognormal_from_mean_sd(m, s):
    s2 = math.log(1 + (s / m) ** 2)
    return math.log(m) - s2 / 2, math.sqrt(s2)


def pert_case(lo, mode, hi, shape=4.0):
    a = 1 + shape * (mode - lo) / (hi - lo)
    b = 1 + shape * (hi - mode) / (hi - lo)
    mean = (lo + shape * mode + hi) / (shape + 2)
    var = (hi - lo) ** 2 * a * b / ((a + b) ** 2 * (a + b + 1))
    return stats.beta(a, b, loc=lo, scale=hi - lo), mean, var


def weibull_moments(k, lam):
    g1, g2 = math.gamma(1 + 1 / k), math.gamma(1 + 2 / k)
    return lam * g1, lam * lam * (g2 - g1 * g1)


LN2_MU, LN2_SIG = lognormal_from_mean_sd(10.0, 4.0)
tn1, tn1_m, tn1_v = truncnorm_case(1.0, 2.0, -0.5, 4.0)
tn2, tn2_m, tn2_v = truncnorm_case(0.0, 1.0, 2.5, math.inf)   # far upper tail
tn3, tn3_m, tn3_v = truncnorm_case(5.0, 3.0, -math.inf, 0.0)  # far lower tail
pert1, pert1_m, pert1_v = pert_case(10.0, 14.0, 30.0)
pert2, pert2_m, pert2_v = pert_case(0.0, 8.0, 10.0, 2.0)
wb_m, wb_v = weibull_moments(1.7, 3.0)
wb2_m, wb2_v = weibull_moments(0.8, 1.5)

# (column, frozen scipy distribution, closed-form mean, closed-form variance)
CONTINUOUS = [
    ("n", stats.norm(3.0, 2.0), 3.0, 4.0),
    ("tn", tn1, tn1_m, tn1_v),
    ("tn_upper", tn2, tn2_m, tn2_v),
    ("tn_lower", tn3, tn3_m, tn3_v),
    ("ln_log", stats.lognorm(0.5, scale=math.exp(1.2)),
     math.exp(1.2 + 0.125), (math.exp(0.25) - 1) * math.exp(2.4 + 0.25)),
    ("ln_mean", stats.lognorm(LN2_SIG, scale=math.exp(LN2_MU)), 10.0, 16.0),
    ("u", stats.uniform(-1.0, 4.0), 1.0, 16.0 / 12),
    ("tri", stats.triang(0.2, loc=2.0, scale=5.0), 4.0, (4 + 9 + 49 - 6 - 14 - 21) / 18.0),
    ("pert", pert1, pert1_m, pert1_v),
    ("pert_shape", pert2, pert2_m, pert2_v),
    ("ex", stats.expon(scale=2.5), 2.5, 6.25),
    ("ga", stats.gamma(2.5, scale=1.5), 3.75, 5.625),
    ("ga_small", stats.gamma(0.6, scale=2.0), 1.2, 2.4),
    ("be", stats.beta(2.0, 5.0, loc=10.0, scale=10.0), 10 + 10 * 2 / 7.0,
     100 * 10 / (49 * 8.0)),
    ("be_unit", stats.beta(0.7, 0.9), 0.7 / 1.6, 0.63 / (1.6 ** 2 * 2.6)),
    ("wb", stats.weibull_min(1.7, scale=3.0), wb_m, wb_v),
    ("wb_small", stats.weibull_min(0.8, scale=1.5), wb2_m, wb2_v),
    ("t", stats.t(7, loc=2.0, scale=0.5), 2.0, 0.25 * 7 / 5.0),
    ("vec[0]", stats.expon(scale=1.0), 1.0, 1.0),
    ("vec[1]", stats.expon(scale=4.0), 4.0, 16.0),
]

DISCRETE_VALUES = [1.0, 2.5, 7.0, 10.0]
DISCRETE_WEIGHTS = [1.0, 3.0, 2.0, 0.5]
EMPIRICAL_DATA = [3.0, 5.0, 5.0, 8.0, 13.0]
TABLE_ROWS = [[1.0, 10.0], [2.0, 20.0], [3.0, 5.0]]
TABLE_WEIGHTS = [1.0, 2.0, 1.0]
MVN_MEAN = [1.0, -2.0, 0.5]
MVN_COV = [[2.0, 0.6, -0.3], [0.6, 1.0, 0.2], [-0.3, 0.2, 0.5]]
MVN2_MEAN = [0.0, 10.0]
MVN2_SD = [1.5, 3.0]
MVN2_CORR = [[1.0, -0.7], [-0.7, 1.0]]

FAMILIES = {
    "format": 1,
    "name": "ref-families",
    "decisions": [{"name": "x"}],
    "uncertain": [
        {"name": "n", "distribution": {"family": "normal", "mean": 3, "sd": 2}},
        {"name": "tn", "distribution": {"family": "normal", "mean": 1, "sd": 2,
                                        "lower": -0.5, "upper": 4}},
        {"name": "tn_upper", "distribution": {"family": "normal", "mean": 0, "sd": 1,
                                              "lower": 2.5}},
        {"name": "tn_lower", "distribution": {"family": "normal", "mean": 5, "sd": 3,
                                              "upper": 0}},
        {"name": "ln_log", "distribution": {"family": "lognormal", "meanlog": 1.2,
                                            "sdlog": 0.5}},
        {"name": "ln_mean", "distribution": {"family": "lognormal", "mean": 10, "sd": 4}},
        {"name": "u", "distribution": {"family": "uniform", "low": -1, "high": 3}},
        {"name": "tri", "distribution": {"family": "triangular", "low": 2, "mode": 3,
                                         "high": 7}},
        {"name": "pert", "distribution": {"family": "pert", "low": 10, "mode": 14,
                                          "high": 30}},
        {"name": "pert_shape", "distribution": {"family": "pert", "low": 0, "mode": 8,
                                                "high": 10, "shape": 2}},
        {"name": "ex", "distribution": {"family": "exponential", "mean": 2.5}},
        {"name": "ga", "distribution": {"family": "gamma", "shape": 2.5, "scale": 1.5}},
        {"name": "ga_small", "distribution": {"family": "gamma", "shape": 0.6, "scale": 2}},
        {"name": "be", "distribution": {"family": "beta", "a": 2, "b": 5, "low": 10,
                                        "high": 20}},
        {"name": "be_unit", "distribution": {"family": "beta", "a": 0.7, "b": 0.9}},
        {"name": "wb", "distribution": {"family": "weibull", "shape": 1.7, "scale": 3}},
        {"name": "wb_small", "distribution": {"family": "weibull", "shape": 0.8,
                                              "scale": 1.5}},
        {"name": "t", "distribution": {"family": "student_t", "df": 7, "location": 2,
                                       "scale": 0.5}},
        {"name": "vec", "size": 2, "distribution": {"family": "exponential",
                                                    "mean": [1, 4]}},
        {"name": "po", "distribution": {"family": "poisson", "mean": 4.2}},
        {"name": "po_big", "distribution": {"family": "poisson", "mean": 60}},
        {"name": "bi", "distribution": {"family": "binomial", "trials": 12, "p": 0.3}},
        {"name": "di", "distribution": {"family": "discrete", "values": DISCRETE_VALUES,
                                        "weights": DISCRETE_WEIGHTS}},
        {"name": "em", "distribution": {"family": "empirical", "data": EMPIRICAL_DATA}},
        {"name": "mv", "size": 3, "distribution": {"family": "multivariate_normal",
                                                   "mean": MVN_MEAN,
                                                   "covariance": MVN_COV}},
        {"name": "mv2", "size": 2, "distribution": {"family": "multivariate_normal",
                                                    "mean": MVN2_MEAN, "sd": MVN2_SD,
                                                    "correlation": MVN2_CORR}},
        {"name": "tab", "size": 2, "distribution": {"family": "scenario_table",
                                                    "rows": TABLE_ROWS,
                                                    "weights": TABLE_WEIGHTS}},
    ],
    "constraints": [{"name": "c", "require": "n + po + tab[0] <= x"}],
}


def finite_moments(values, probs):
    values, probs = np.asarray(values), np.asarray(probs) / np.sum(probs)
    m = float(np.sum(probs * values))
    v = float(np.sum(probs * (values - m) ** 2))
    return values, probs, m, v


def test_families():
    cols, data = table(FAMILIES)
    col = {name: data[:, j] for j, name in enumerate(cols)}
    c.check(len(data) == N, "families: %d scenarios" % len(data))
    worst = 0.0
    for name, dist, mean, var in CONTINUOUS:
        worst = max(worst, ks(name, col[name], dist, mean, var))
    print("largest KS statistic over the continuous families: %.5f" % worst)

    po = stats.poisson(4.2)
    chi2("po", col["po"], *count_support(po), 4.2, 4.2, po)
    pb = stats.poisson(60)
    chi2("po_big", col["po_big"], *count_support(pb), 60.0, 60.0, pb)
    bi = stats.binom(12, 0.3)
    chi2("bi", col["bi"], np.arange(13), bi.pmf(np.arange(13)), 3.6, 12 * 0.3 * 0.7, bi)
    # discrete: mass proportional to the weights (they need not sum to 1)
    v, p, m, var = finite_moments(DISCRETE_VALUES, DISCRETE_WEIGHTS)
    chi2("di", col["di"], v, p, m, var)
    # empirical: each datum equally likely (bootstrap), repeated values add up
    uv = sorted(set(EMPIRICAL_DATA))
    v, p, m, var = finite_moments(uv, [EMPIRICAL_DATA.count(x) for x in uv])
    chi2("em", col["em"], v, p, m, var)

    # scenario table: whole rows, with probability proportional to the weights
    tab = np.stack([col["tab[0]"], col["tab[1]"]], axis=1)
    rows_ok = all(any((r == np.array(t)).all() for t in TABLE_ROWS) for r in tab[:2000])
    whole = np.isin(tab[:, 0], [r[0] for r in TABLE_ROWS]).all() and all(
        (tab[tab[:, 0] == r[0], 1] == r[1]).all() for r in TABLE_ROWS)
    c.check(rows_ok and whole, "scenario_table: every scenario is one whole table row")
    v, p, m, var = finite_moments([r[0] for r in TABLE_ROWS], TABLE_WEIGHTS)
    chi2("tab (row)", col["tab[0]"], v, p, m, var)

    # multivariate normal, covariance form and sd + correlation form
    test_mvn("mv", np.stack([col["mv[%d]" % i] for i in range(3)], axis=1),
             np.array(MVN_MEAN), np.array(MVN_COV))
    s = np.array(MVN2_SD)
    test_mvn("mv2", np.stack([col["mv2[0]"], col["mv2[1]"]], axis=1),
             np.array(MVN2_MEAN), np.array(MVN2_CORR) * np.outer(s, s))
    # independence between inputs: the families model declares none
    r = np.corrcoef(np.stack([col["n"], col["ga"], col["po"], col["mv[0]"]]))
    off = np.abs(r[np.triu_indices(4, 1)]).max()
    c.check(off < 5.0 / math.sqrt(N), "independent inputs: |correlation| %.4f < 5/sqrt(n)" % off)


def test_mvn(name, x, mean, cov):
    n, k = x.shape
    sm = x.mean(axis=0)
    sc = np.cov(x, rowvar=False)
    worst = 0.0
    for i in range(k):
        zm = (sm[i] - mean[i]) / math.sqrt(cov[i, i] / n)
        c.check(abs(zm) <= MOMENT_SE, "%s: mean[%d] %.5f vs %.5f (z = %+.2f)"
                % (name, i, sm[i], mean[i], zm))
        d, p = stats.kstest(x[:, i], stats.norm(mean[i], math.sqrt(cov[i, i])).cdf)
        c.check(p > KS_P_MIN and d < KS_D_MAX, "%s[%d]: normal margin KS D = %.5f p = %.3g"
                % (name, i, d, p))
        for j in range(i, k):
            se = math.sqrt((cov[i, i] * cov[j, j] + cov[i, j] ** 2) / n)
            z = (sc[i, j] - cov[i, j]) / se
            worst = max(worst, abs(z))
            c.check(abs(z) <= MOMENT_SE, "%s: covariance[%d][%d] %.5f vs %.5f (z = %+.2f)"
                    % (name, i, j, sc[i, j], cov[i, j], z))
    print("%-14s covariance entries within %.2f standard errors of the declared ones"
          % (name, worst))


# ---------------------------------------------------------------------------
# 2. Gaussian copula
COPULA = {
    "format": 1,
    "name": "ref-copula",
    "decisions": [{"name": "x"}],
    "uncertain": [
        {"name": "a", "size": 2, "distribution": {"family": "lognormal",
                                                  "meanlog": [1, 2], "sdlog": [0.4, 0.8]}},
        {"name": "g", "distribution": {"family": "gamma", "shape": 1.5, "scale": 2}},
        {"name": "p", "distribution": {"family": "poisson", "mean": 150}},
        {"name": "w", "size": 3, "distribution": {"family": "weibull", "shape": 2.2,
                                                  "scale": [1, 2, 3]}},
        {"name": "b", "distribution": {"family": "beta", "a": 2, "b": 3, "low": -1,
                                       "high": 1}},
        {"name": "free", "distribution": {"family": "exponential", "mean": 1}},
    ],
    "dependence": [
        {"kind": "gaussian_copula", "members": ["a", "g", "p"],
         "correlation": {"equal": 0.5}},
        {"kind": "gaussian_copula", "members": ["w", "b"],
         "correlation": {"ar1": -0.7}},
    ],
    "constraints": [{"name": "c", "require": "sum(a) + g + p + sum(w) + b + free <= x"}],
}


def spearman_gauss(rho):
    return 6.0 / math.pi * math.asin(rho / 2.0)


def test_copula():
    cols, data = table(COPULA, seed=SEED + 1)
    col = {name: data[:, j] for j, name in enumerate(cols)}
    # margins keep their declared laws (drawn through inverse CDFs here)
    ks("a[0] (copula)", col["a[0]"], stats.lognorm(0.4, scale=math.e),
       math.exp(1 + 0.08), (math.exp(0.16) - 1) * math.exp(2 + 0.16))
    ks("a[1] (copula)", col["a[1]"], stats.lognorm(0.8, scale=math.exp(2)),
       math.exp(2 + 0.32), (math.exp(0.64) - 1) * math.exp(4 + 0.64))
    ks("g (copula)", col["g"], stats.gamma(1.5, scale=2.0), 3.0, 6.0)
    for i, lam in enumerate((1.0, 2.0, 3.0)):
        m, v = weibull_moments(2.2, lam)
        ks("w[%d] (copula)" % i, col["w[%d]" % i], stats.weibull_min(2.2, scale=lam), m, v)
    ks("b (copula)", col["b"], stats.beta(2, 3, loc=-1, scale=2), -1 + 2 * 0.4,
       4 * 6 / (25 * 6.0))
    pd = stats.poisson(150)
    chi2("p (copula)", col["p"], *count_support(pd), 150.0, 150.0, pd)
    # Ties of the poisson member lower its rank correlations by a factor of
    # about sqrt(1 - sum p_k^3); with mean 150 that is below 1e-3, far
    # inside the tolerance (bound computed, not assumed).
    k, pm = count_support(pd)
    c.check(1 - math.sqrt(1 - float(np.sum(pm ** 3))) < 1e-3,
            "poisson member: tie attenuation below 1e-3")

    def pairs(names, corr):
        worst = 0.0
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                r = stats.spearmanr(col[names[i]], col[names[j]]).correlation
                want = spearman_gauss(corr(i, j))
                worst = max(worst, abs(r - want))
                c.check(abs(r - want) <= SPEARMAN_TOL, "Spearman %s,%s = %.4f, Gaussian "
                        "copula %.4f" % (names[i], names[j], r, want))
        return worst

    e1 = pairs(["a[0]", "a[1]", "g", "p"], lambda i, j: 0.5)
    e2 = pairs(["w[0]", "w[1]", "w[2]", "b"], lambda i, j: (-0.7) ** abs(i - j))
    print("Spearman vs (6/pi) asin(rho/2): largest error %.4f (equal 0.5), %.4f (ar1 -0.7)"
          % (e1, e2))
    # entries tie only their own members
    r = max(abs(stats.spearmanr(col["free"], col[x]).correlation) for x in ("a[0]", "g", "w[0]"))
    c.check(r < 5.0 / math.sqrt(N), "an input outside the copulas stays independent (%.4f)" % r)
    r = abs(stats.spearmanr(col["g"], col["w[1]"]).correlation)
    c.check(r < 5.0 / math.sqrt(N), "two copula entries are independent of each other (%.4f)" % r)


# ---------------------------------------------------------------------------
# 3. joint probabilities with closed forms, through `feasgate check`
CHECK_N = 400000


def joint(name, model, decision, exact, seed):
    rc, res = run_check(model, {"decision": decision, "samples": CHECK_N, "seed": seed,
                                "target": 0.5})
    j = res["joint"]
    se = math.sqrt(exact * (1 - exact) / j["samples"])
    z = (j["probability"] - exact) / se
    print("%-26s feasgate %.5f  reference %.5f  z = %+.2f" % (name, j["probability"], exact, z))
    c.check(j["samples"] == CHECK_N, name + ": sample count")
    c.check(abs(z) <= JOINT_SE, "%s: |estimate - reference| = %.2f standard errors" % (name, abs(z)))


def test_joint():
    # (a) sum of k independent exponentials with mean m is Erlang(k, m)
    k, m, cap = 4, 2.0, 10.0
    model = {"format": 1, "name": "ref-erlang", "decisions": [{"name": "cap"}],
             "uncertain": [{"name": "e", "size": k, "distribution":
                            {"family": "exponential", "mean": m}}],
             "constraints": [{"name": "total", "require": "sum(e) <= cap"}]}
    joint("sum of 4 exponentials", model, {"cap": cap},
          float(stats.gamma.cdf(cap, k, scale=m)), 101)  # scipy.stats.gamma.cdf

    # (b) max(x1, x2, x3) + y <= c, independent: P = int F1 F2 F3 (c - y) f_y(y) dy
    d1, d2, d3 = stats.uniform(0, 4), stats.weibull_min(1.5, scale=2), stats.expon(scale=1.5)
    dy = stats.norm(1.0, 0.5)
    cap = 4.5
    model = {"format": 1, "name": "ref-max", "decisions": [{"name": "cap"}],
             "uncertain": [
                 {"name": "x1", "distribution": {"family": "uniform", "low": 0, "high": 4}},
                 {"name": "x2", "distribution": {"family": "weibull", "shape": 1.5, "scale": 2}},
                 {"name": "x3", "distribution": {"family": "exponential", "mean": 1.5}},
                 {"name": "y", "distribution": {"family": "normal", "mean": 1, "sd": 0.5}}],
             "constraints": [{"name": "late", "require": "max(x1, x2, x3) + y <= cap"}]}
    f = lambda y: d1.cdf(cap - y) * d2.cdf(cap - y) * d3.cdf(cap - y) * dy.pdf(y)
    exact, err = integrate.quad(f, 1.0 - 12 * 0.5, 1.0 + 12 * 0.5, epsabs=1e-12,
                                epsrel=1e-10, limit=200)  # scipy.integrate.quad
    c.check(err < 1e-8, "quadrature error %.2g" % err)
    joint("max of three + normal", model, {"cap": cap}, exact, 202)

    # (c) lognormal tail P(X <= c) = Phi((ln c - mu) / sigma), both forms
    model = {"format": 1, "name": "ref-lognormal-tail", "decisions": [{"name": "cap"}],
             "uncertain": [{"name": "x", "distribution": {"family": "lognormal",
                                                          "meanlog": 2, "sdlog": 0.6}}],
             "constraints": [{"name": "tail", "require": "x <= cap"}]}
    cap = 12.0
    joint("lognormal tail (log form)", model, {"cap": cap},
          float(Phi((math.log(cap) - 2) / 0.6)), 303)
    mu, sig = lognormal_from_mean_sd(50.0, 30.0)
    model["uncertain"][0]["distribution"] = {"family": "lognormal", "mean": 50, "sd": 30}
    cap = 110.0
    joint("lognormal tail (mean form)", model, {"cap": cap},
          float(Phi((math.log(cap) - mu) / sig)), 304)


# ---------------------------------------------------------------------------
# 4. determinism
def test_determinism():
    for model, seed in ((FAMILIES, 5), (COPULA, 6)):
        bulk = json.loads(run_scenarios(model, 600, seed))
        rows = bulk["rows"]
        errs = list(SCHEMA.iter_errors(bulk))
        c.check(not errs, "%s: the JSON answer follows schemas/scenarios.schema.json: %s"
                % (model["name"], errs[:1]))
        same = True
        for i in (0, 1, 255, 256, 257, 511, 599):
            one = json.loads(run_scenarios(model, 1, seed, start=i))
            same &= one["rows"] == [rows[i]] and one["start"] == i
        c.check(same, "%s: scenario i alone equals row i in bulk" % model["name"])
        window = json.loads(run_scenarios(model, 100, seed, start=250))
        c.check(window["rows"] == rows[250:350], "%s: a window equals its slice"
                % model["name"])
        val = json.loads(run_scenarios(model, 600, seed, stream="validation"))
        shared = set(map(tuple, rows)) & set(map(tuple, val["rows"]))
        # scenario tables and discrete inputs repeat values, so compare the
        # continuous part of each row (the first column is continuous)
        firsts = set(r[0] for r in rows) & set(r[0] for r in val["rows"])
        c.check(val["stream"] == "validation" and not shared and not firsts,
                "%s: design and validation share no scenario" % model["name"])

    model = dict(COPULA, constraints=[
        {"name": "low", "require": "a[0] + g <= x"},
        {"name": "mid", "require": "p + w[2] <= 160"},
        {"name": "rank", "require": "b + free <= 1.5"}])
    req = {"decision": {"x": 7}, "samples": 200000, "seed": 77}

    def counts(workers, chunk):
        rc, res = run_check(model, req, workers=workers, extra=("--chunk", str(chunk)))
        return (res["joint"]["satisfied"],
                sorted((r["name"], r["violated"], r["sole_cause"]) for r in res["constraints"]))

    base = counts(1, 16384)
    c.check(counts(2, 16384) == base, "same counts with 1 and 2 workers")
    c.check(counts(2, 256) == base, "same counts with chunks of 256 and 16384")
    print("determinism: %d of 200000 satisfied with 1 or 2 workers, chunks 256 or 16384"
          % base[0])


test_families()
test_copula()
test_joint()
test_determinism()
c.finish()
