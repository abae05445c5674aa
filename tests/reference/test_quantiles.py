"""Quantiles of the beta, gamma and Student t families (core/quantile.c)
over each family's stated parameter range, the range's refusal, and the
cases where GSL's inverse CDFs used to loop or return NaN.

Sources:
  - scipy.stats.beta / gamma / t .ppf and .isf (SciPy 1.10: Boost's inverse
    incomplete beta and gamma, Cephes' stdtrit); where one of them differs
    from ours by more than 1e-9 relative, mpmath (Debian python3-mpmath,
    tests/reference/mpref.py, 40 digits) evaluates the distribution
    function at our quantile and gives the relative error in x that the
    probability difference implies -- SciPy is not accurate enough at
    parameters in the billions or at tail probabilities of 1e-300;
  - scipy.stats.kstest (Kolmogorov-Smirnov) for draws of the Monte Carlo
    samplers (GSL's gsl_ran_*) and of copula members (the quantiles) at the
    range's edges, and the normal law's moments where SciPy's CDF is not
    trustworthy (parameters near 1e12: mean and variance of the family in
    closed form);
  - the ranges themselves are read from include/feasgate/limits.h and the
    work caps from server/core/quantile.h, so the test follows them.
"""
import json
import math
import os
import re
import subprocess
import tempfile

import numpy as np
from mpref import mp_beta_xerr, mp_gamma_xerr, mp_ibeta, mp_igamma, mp_t_xerr
from refcommon import BIN, REF_TOOL, ROOT, Counter, run_check, run_scenarios
from scipy import stats

c = Counter()


def define(path, name):
    with open(os.path.join(ROOT, path)) as f:
        m = re.search(r"#define %s ([0-9.e+-]+)" % name, f.read())
    return float(m.group(1))


SHAPE_MIN = define("include/feasgate/limits.h", "FG_SHAPE_PARAM_MIN")
SHAPE_MAX = define("include/feasgate/limits.h", "FG_SHAPE_PARAM_MAX")
DF_MIN = define("include/feasgate/limits.h", "FG_T_DF_MIN")
DF_MAX = define("include/feasgate/limits.h", "FG_T_DF_MAX")
P_MIN = define("include/feasgate/limits.h", "FG_ICDF_P_MIN")
STEPS_MAX = int(define("server/core/quantile.h", "FG_Q_STEPS_MAX"))
TERMS_MAX = int(define("server/core/quantile.h", "FG_Q_TERMS_MAX"))
TOL = 1e-9
DBL_MIN = 2.2250738585072014e-308


def tool(cmd, rows):
    text = "".join(" ".join("%.17g" % v for v in r) + "\n" for r in rows)
    out = subprocess.run([REF_TOOL, cmd], input=text, capture_output=True,
                         text=True, check=True, timeout=600).stdout
    return [line.split() for line in out.splitlines()]


def grid(lo, hi, n):
    g = list(np.logspace(math.log10(lo), math.log10(hi), n))
    g[0], g[-1] = lo, hi  # the edges exactly
    return g


PROBS = [P_MIN, 1e-100, 1e-20, 1e-9, 1e-3, 0.1, 0.3, 0.5]


def uvals():
    """(u, uc) pairs, each tail given exactly."""
    out = []
    for p in PROBS:
        out.append((p, 1 - p))
        if p < 0.5:
            out.append((1 - p, p))
    return out


def judge(label, rows, res, ref_of, mp_err, value_of):
    """Compare with SciPy; where they differ, judge ours with mpmath."""
    worst_sp, worst_mp, judged, steps, terms = 0.0, 0.0, 0, 0, 0
    for r, o in zip(rows, res):
        x = value_of(o)
        steps, terms = max(steps, int(o[-2])), max(terms, int(o[-1]))
        if not math.isfinite(x):
            c.check(False, "%s %r: quantile not finite (%r)" % (label, r, x))
            continue
        ref = ref_of(r)
        e = abs(x - ref) / max(abs(ref), 1e-300) if x != ref else 0.0
        if e <= TOL:
            worst_sp = max(worst_sp, e)
            continue
        judged += 1
        me = mp_err(r, o)
        worst_mp = max(worst_mp, me)
        c.check(me <= TOL, "%s %r: ours %r, SciPy %r, mpmath relative error %.3g"
                % (label, r, o, ref, me))
    c.check(steps <= STEPS_MAX and terms <= TERMS_MAX,
            "%s: work within the caps (max %d steps of %d, %d terms of %d)"
            % (label, steps, STEPS_MAX, terms, TERMS_MAX))
    print("%-8s %5d quantiles: %d within %.0e of SciPy (worst %.1e), %d judged "
          "by mpmath (worst %.1e); max %d steps, %d terms"
          % (label, len(rows), len(rows) - judged, TOL, worst_sp, judged,
             worst_mp, steps, terms))


# ---- 1. quantile sweeps over the stated ranges ------------------------------
# beta: a, b over [SHAPE_MIN, SHAPE_MAX], log-spaced with both edges
pars = grid(SHAPE_MIN, SHAPE_MAX, 10)
rows = [(u, uc, a, b) for a in pars for b in pars for (u, uc) in uvals()]
res = tool("betainv", rows)


def beta_ref(r):
    u, uc, a, b = r
    return stats.beta.ppf(u, a, b) if u <= uc else stats.beta.isf(uc, a, b)


def beta_mp(r, o):
    u, uc, a, b = r
    x, y = float(o[0]), float(o[1])
    if x == 0:  # the quantile is below the smallest normal double
        return 0.0 if mp_ibeta(DBL_MIN, a, b)[0] >= u else 1.0
    if y == 0:
        return 0.0 if mp_ibeta(DBL_MIN, b, a)[0] >= uc else 1.0
    return mp_beta_xerr(u, uc, a, b, x, y)


with np.errstate(all="ignore"):
    judge("beta", rows, res, beta_ref, beta_mp, lambda o: float(o[0]))

# gamma: shape over [SHAPE_MIN, SHAPE_MAX]
rows = [(u, uc, a) for a in grid(SHAPE_MIN, SHAPE_MAX, 36) for (u, uc) in uvals()]
res = tool("gammainv", rows)


def gamma_ref(r):
    u, uc, a = r
    return stats.gamma.ppf(u, a) if u <= uc else stats.gamma.isf(uc, a)


def gamma_mp(r, o):
    u, uc, a = r
    x = float(o[0])
    if x == 0:
        return 0.0 if mp_igamma(a, DBL_MIN)[0] >= u else 1.0
    return mp_gamma_xerr(u, uc, a, x)


with np.errstate(all="ignore"):
    judge("gamma", rows, res, gamma_ref, gamma_mp, lambda o: float(o[0]))

# Student t: df over [DF_MIN, DF_MAX]
rows = [(u, uc, d) for d in grid(DF_MIN, DF_MAX, 36) + [2.0, 99999.0, 1e5]
        for (u, uc) in uvals()]
res = tool("tinv", rows)


def t_ref(r):
    u, uc, d = r
    return stats.t.ppf(u, d) if u <= uc else stats.t.isf(uc, d)


with np.errstate(all="ignore"):
    judge("t", rows, res, t_ref,
          lambda r, o: mp_t_xerr(r[0], r[1], r[2], float(o[0])),
          lambda o: float(o[0]))

# closed forms (Abramowitz & Stegun 26.7: df = 1 is Cauchy, tan(pi (u - 1/2));
# df = 2: t = (2u - 1) / sqrt(2 u (1 - u)))
res = tool("tinv", [(0.2, 0.8, 1), (0.2, 0.8, 2), (1e-9, 1 - 1e-9, 2)])
for (u, d), o in zip([(0.2, 1), (0.2, 2), (1e-9, 2)], res):
    want = math.tan(math.pi * (u - 0.5)) if d == 1 else (2 * u - 1) / math.sqrt(2 * u * (1 - u))
    c.check(abs(float(o[0]) - want) <= 1e-13 * abs(want),
            "t df=%d u=%g closed form %.17g, ours %s" % (d, u, want, o[0]))


# ---- 2. the range refused at registration, with the parameter's pointer ----
def check_status(model, request):
    with tempfile.TemporaryDirectory() as d:
        mp_, rp = os.path.join(d, "m.json"), os.path.join(d, "r.json")
        with open(mp_, "w") as f:
            json.dump(model, f)
        with open(rp, "w") as f:
            json.dump(request, f)
        p = subprocess.run([BIN, "check", mp_, rp, "--workers", "1"],
                           capture_output=True, text=True, timeout=600)
        return p.returncode, p.stdout, p.stderr


def one_input(dist, require="v <= cap"):
    return {"format": 1, "name": "ref-range",
            "decisions": [{"name": "cap"}],
            "uncertain": [{"name": "v", "distribution": dist}],
            "constraints": [{"name": "c", "require": require}]}


REQ = {"decision": {"cap": 1e300}, "samples": 256, "seed": 1}
RANGE = "[%.15g, %.15g]" % (SHAPE_MIN, SHAPE_MAX)
DF_RANGE = "[%.15g, %.15g]" % (DF_MIN, DF_MAX)
refusals = [
    ({"family": "beta", "a": SHAPE_MIN * 0.98, "b": 2}, "a", RANGE),
    ({"family": "beta", "a": 2, "b": SHAPE_MAX * 1.01}, "b", RANGE),
    ({"family": "gamma", "shape": SHAPE_MIN * 0.98, "scale": 1}, "shape", RANGE),
    ({"family": "gamma", "shape": SHAPE_MAX * 1.01, "scale": 1}, "shape", RANGE),
    ({"family": "gamma", "shape": 2, "scale": 1e306}, "scale", "stays finite"),
    ({"family": "student_t", "df": DF_MIN * 0.99}, "df", DF_RANGE),
    ({"family": "student_t", "df": DF_MAX * 1.01}, "df", DF_RANGE),
    ({"family": "student_t", "df": 1, "scale": 1e9}, "scale", "stays finite"),
    ({"family": "pert", "low": 0, "mode": 1, "high": 2, "shape": SHAPE_MAX * 1.01},
     "shape", "%.15g" % SHAPE_MAX),
]
for dist, param, text in refusals:
    rc, out, err = check_status(one_input(dist), REQ)
    ptr = "/uncertain/0/distribution/" + param
    c.check(rc == 3 and ptr in err and text in err,
            "%r refused naming %s and the range %s: exit %d, %s"
            % (dist, ptr, text, rc, err.strip()[:300]))
accepted = [
    {"family": "beta", "a": SHAPE_MIN, "b": SHAPE_MAX},
    {"family": "gamma", "shape": SHAPE_MIN, "scale": 1},
    {"family": "gamma", "shape": SHAPE_MAX, "scale": 1},
    {"family": "student_t", "df": DF_MIN, "scale": 1e8},
    {"family": "student_t", "df": DF_MAX},
]
for dist in accepted:
    for sampling in ("monte_carlo", "latin_hypercube"):
        rc, out, err = check_status(one_input(dist, "v <= cap"),
                                    dict(REQ, sampling=sampling))
        ok = rc in (0, 1, 2)
        if ok:
            res = json.loads(out)
            ok = res["joint"]["samples"] > 0
        c.check(ok, "%r at the range's edge runs under %s: exit %d %s"
                % (dist, sampling, rc, err.strip()[:200]))


# ---- 3. draws at the edges: Monte Carlo (GSL samplers) and copula (quantiles)
def edge_model(dists, copula):
    unc = [{"name": "v%d" % i, "distribution": d} for i, d in enumerate(dists)]
    unc.append({"name": "z", "distribution": {"family": "normal", "mean": 0, "sd": 1}})
    m = {"format": 1, "name": "ref-edges", "decisions": [{"name": "cap"}],
         "uncertain": unc,
         "constraints": [{"name": "c", "require": "z <= cap"}]}
    if copula:
        m["dependence"] = [{"kind": "gaussian_copula",
                            "members": ["v%d" % i for i in range(len(dists))] + ["z"],
                            "correlation": {"equal": 0.3}}]
    return m


# beta(SHAPE_MIN, SHAPE_MIN) puts 8% of its mass within 1e-16 of 1, where
# draws round to 1.0 and a Kolmogorov-Smirnov test would see a tie; it is
# judged by the fractions below fixed points instead (binomial standard
# errors against scipy.stats.beta.cdf).
FRACTIONS = [1e-100, 1e-10, 0.5]
EDGE = [
    ({"family": "beta", "a": SHAPE_MIN, "b": SHAPE_MIN}, ("fractions", stats.beta(SHAPE_MIN, SHAPE_MIN))),
    ({"family": "beta", "a": SHAPE_MIN, "b": 1}, stats.beta(SHAPE_MIN, 1)),
    ({"family": "beta", "a": 2, "b": 5000}, stats.beta(2, 5000)),
    ({"family": "beta", "a": SHAPE_MIN, "b": 1e6}, stats.beta(SHAPE_MIN, 1e6)),
    ({"family": "gamma", "shape": SHAPE_MIN, "scale": 1}, stats.gamma(SHAPE_MIN)),
    ({"family": "gamma", "shape": 2e5, "scale": 1e-5}, stats.gamma(2e5, scale=1e-5)),
    ({"family": "student_t", "df": DF_MIN}, stats.t(DF_MIN)),
    ({"family": "student_t", "df": 3e4}, stats.t(3e4)),
    # moments only (closed forms): the largest parameters
    ({"family": "beta", "a": SHAPE_MAX, "b": SHAPE_MAX}, (0.5, 1 / (8 * SHAPE_MAX + 4))),
    ({"family": "gamma", "shape": SHAPE_MAX, "scale": 1}, (SHAPE_MAX, SHAPE_MAX)),
    ({"family": "student_t", "df": DF_MAX}, (0.0, DF_MAX / (DF_MAX - 2))),
    # count laws at their largest parameters (the bounded search of
    # count_icdf in copulas): Poisson mean = variance = 1e9; binomial
    # mean n p, variance n p (1 - p)
    ({"family": "poisson", "mean": 1e9}, (1e9, 1e9)),
    ({"family": "binomial", "trials": 1e9, "p": 0.3}, (3e8, 1e9 * 0.3 * 0.7)),
]
NDRAW = 2000
for copula in (False, True):
    text = run_scenarios(edge_model([d for d, _ in EDGE], copula), NDRAW, 7, csv=True)
    lines = text.strip().splitlines()
    head = lines[0].split(",")
    data = np.array([[float(v) for v in l.split(",")] for l in lines[1:]])
    kind = "copula member (quantiles)" if copula else "Monte Carlo (GSL sampler)"
    for i, (dist, ref) in enumerate(EDGE):
        col = data[:, head.index("v%d" % i)]
        finite = bool(np.all(np.isfinite(col)))
        c.check(finite, "%s %r: every draw finite" % (kind, dist))
        if not finite:
            continue
        if isinstance(ref, tuple) and ref[0] == "fractions":
            for x0 in FRACTIONS:
                want = float(ref[1].cdf(x0))
                got = float(np.mean(col <= x0))
                se = math.sqrt(want * (1 - want) / NDRAW)
                c.check(abs(got - want) <= 5 * se + 1e-12,
                        "%s %r: fraction <= %g is %.4f, law %.4f (se %.4f)"
                        % (kind, dist, x0, got, want, se))
        elif isinstance(ref, tuple):
            mean, var = ref
            se = math.sqrt(var / NDRAW)
            ok = abs(col.mean() - mean) <= 5 * se and 0.8 < col.var() / var < 1.2
            c.check(ok, "%s %r: mean %.17g (law %.17g, se %.3g), variance ratio %.3f"
                    % (kind, dist, col.mean(), mean, se, col.var() / var))
        else:
            p = stats.kstest(col, ref.cdf).pvalue
            c.check(p > 1e-4, "%s %r: Kolmogorov-Smirnov p = %.3g" % (kind, dist, p))

# ---- 4. regressions: designs and copulas that met a looping or NaN quantile -
GAMMA = one_input({"family": "gamma", "shape": 2e5, "scale": 1e-5}, "v <= cap")
for sampling in ("latin_hypercube", "sobol"):
    rc, res = run_check(GAMMA, {"decision": {"cap": 3}, "samples": 4096, "seed": 3,
                                "sampling": sampling}, workers=1)
    # P(G <= 3) = 1 - 1e-... for G ~ gamma(2e5, 1e-5) (mean 2): probability 1
    c.check(res["verdict"] == "pass" and res["joint"]["probability"] == 1.0,
            "gamma(2e5, 1e-5) g <= 3 under %s passes with probability 1: %s %r"
            % (sampling, res["verdict"], res["joint"]["probability"]))
COP = {"format": 1, "name": "ref-gamma-copula", "decisions": [{"name": "cap"}],
       "uncertain": [{"name": "g", "distribution": {"family": "gamma", "shape": 2e5,
                                                    "scale": 1e-5}},
                     {"name": "z", "distribution": {"family": "normal", "mean": 0,
                                                    "sd": 1}}],
       "dependence": [{"kind": "gaussian_copula", "members": ["g", "z"],
                       "correlation": {"equal": 0.5}}],
       "constraints": [{"name": "c", "require": "g <= cap"}]}
rc, res = run_check(COP, {"decision": {"cap": 3}, "samples": 4096, "seed": 3,
                          "sampling": "monte_carlo"}, workers=1)
c.check(res["verdict"] == "pass" and res["joint"]["probability"] == 1.0,
        "gamma(2e5, 1e-5) as a copula member under monte_carlo passes: %s %r"
        % (res["verdict"], res["joint"]["probability"]))
BETA = one_input({"family": "beta", "a": 1e6, "b": 1e6}, "v <= cap")
rc, res = run_check(BETA, {"decision": {"cap": 0.5}, "samples": 4096, "seed": 3,
                           "sampling": "latin_hypercube"}, workers=1)
p = res["joint"]["probability"]
c.check(res["status"] == "done" and abs(p - 0.5) < 0.01,
        "beta(1e6, 1e6) under latin_hypercube ends, P(b <= 0.5) = %r (law: 1/2 by "
        "symmetry)" % p)
UNIF = one_input({"family": "uniform", "low": 0, "high": 1}, "v <= cap")
rc, res = run_check(UNIF, {"decision": {"cap": 0.5}, "samples": 2000000, "seed": 3,
                           "sampling": "latin_hypercube"}, workers=2)
iv = res["joint"]["interval"]
c.check(res["status"] == "done" and iv["lower"] < 0.5 < iv["upper"],
        "u <= 0.5 under latin_hypercube with 2M samples ends: %r" % iv)

c.finish()
