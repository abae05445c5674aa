"""Sample sizes of `feasgate sample-size` against independent computations.

Sources:
  - scenario approach (Campi & Garatti 2008, SIAM J. Optim. 19:1211): the
    bound sum_{i<d} C(N,i) eps^i (1-eps)^(N-i) is the binomial CDF at d-1,
    computed with scipy.stats.binom.cdf (Debian python3-scipy); the answer
    N must be minimal: bound(N) <= beta < bound(N-1);
  - with k discarded scenarios (Campi & Garatti 2011, J. Optim. Theory
    Appl. 148:257): C(k+d-1, k) sum_{i<=k+d-1} C(N,i) eps^i (1-eps)^(N-i),
    computed here exactly in rational arithmetic (fractions, math.comb) and
    with scipy.stats.binom.cdf;
  - the inverse direction (scenarios given, epsilon found) against
    scipy.stats.binom.cdf on both sides of the answer;
  - normal half-width and power formulas (normal approximation, common
    practice) with quantiles from scipy.stats.norm.ppf.
"""
import json
import math
import subprocess
from fractions import Fraction

from refcommon import BIN, Counter
from scipy.stats import binom, norm
from scipy.special import gammaln, logsumexp
import numpy as np

c = Counter()


def ok(cond, what):
    """c.check that also returns the condition."""
    c.check(cond, what)
    return cond


def ask(**params):
    args = [BIN, "sample-size"]
    for k, v in params.items():
        args += ["--" + k.replace("_", "-"), repr(v) if isinstance(v, float) else str(v)]
    p = subprocess.run(args, capture_output=True, text=True, timeout=60)
    if p.returncode != 0:
        return p.returncode, p.stderr
    return 0, json.loads(p.stdout)


def bound(n, eps, d, k=0):
    """Campi-Garatti bound with SciPy's binomial CDF."""
    return math.comb(k + d - 1, k) * binom.cdf(k + d - 1, n, eps)


def bound_exact(n, eps, d, k=0):
    """The same bound in exact rational arithmetic."""
    e = Fraction(eps)
    q = 1 - e
    m = k + d - 1
    tail = sum(math.comb(n, i) * e ** i * q ** (n - i) for i in range(m + 1))
    return math.comb(k + d - 1, k) * tail


def within(a, b, rel):
    return abs(a - b) <= rel * max(abs(a), abs(b))


# ---- scenarios for (epsilon, beta, decisions[, discarded]) ----
worst = 0.0
cases = 0
for eps in (0.1, 0.05, 0.01, 0.001):
    for beta in (1e-3, 1e-6, 1e-9):
        for d in (1, 2, 5, 12, 50):
            for k in (None, 0, 5, 40):
                params = dict(epsilon=eps, beta=beta, decisions=d)
                if k is not None:
                    params["discarded"] = k
                rc, a = ask(**params)
                kk = k or 0
                what = "eps=%g beta=%g d=%d k=%s" % (eps, beta, d, k)
                if not ok(rc == 0, "%s: exit %d %s" % (what, rc, a)):
                    continue
                n = a["scenarios"]
                method = "campi_garatti_2008" if k is None else "campi_garatti_2011"
                c.check(a["method"] == method, "%s: method %s" % (what, a["method"]))
                b_n, b_prev = bound(n, eps, d, kk), bound(n - 1, eps, d, kk)
                # Minimal N (Campi & Garatti 2008 / 2011 bound, SciPy binom.cdf).
                c.check(b_n <= beta * (1 + 1e-9) and b_prev > beta * (1 - 1e-9),
                        "%s: N=%d not minimal: bound(N)=%.6g bound(N-1)=%.6g"
                        % (what, n, b_n, b_prev))
                e = abs(a["bound"] - b_n) / b_n
                worst = max(worst, e)
                c.check(e < 1e-8, "%s: reported bound %.17g, scipy %.17g"
                        % (what, a["bound"], b_n))
                cases += 1
print("scenario sizes: %d cases, worst relative difference of the bound from "
      "scipy %.2e" % (cases, worst))

# The discarded-scenario bound exactly (rational arithmetic), moderate N.
worst = 0.0
for eps, beta, d, k in ((0.05, 1e-6, 12, 20), (0.1, 1e-3, 3, 7), (0.2, 1e-9, 5, 0),
                        (0.05, 1e-4, 1, 1), (0.02, 1e-6, 4, 30)):
    rc, a = ask(epsilon=eps, beta=beta, decisions=d, discarded=k)
    if not ok(rc == 0, "exact case %r: %s" % ((eps, beta, d, k), a)):
        continue
    n = a["scenarios"]
    ex_n = float(bound_exact(n, eps, d, k))
    ex_prev = float(bound_exact(n - 1, eps, d, k))
    c.check(ex_n <= beta < ex_prev,
            "exact bound (Campi & Garatti 2011) eps=%g d=%d k=%d: N=%d gives "
            "%.6g, N-1 gives %.6g, beta %g" % (eps, d, k, n, ex_n, ex_prev, beta))
    e = abs(a["bound"] - ex_n) / ex_n
    worst = max(worst, e)
    c.check(e < 1e-10, "exact bound eps=%g d=%d k=%d: ours %.17g exact %.17g"
            % (eps, d, k, a["bound"], ex_n))
print("discarded-scenario bound against exact rational sums: worst relative "
      "difference %.2e" % worst)

# A large case: a million decisions and a million discarded scenarios. The
# tail is far below the smallest double (C(k+d-1, k) far above the largest),
# so the bound is compared in log space:
# the log of the tail as the log-sum-exp of SciPy's binom.logpmf over its
# top terms (they fall by a factor of about 0.37 per step below i = k+d-1
# here, so 20000 terms are far more than enough), C(k+d-1, k) by gammaln.
def log_tail(m, n, eps, terms=20000):
    i = np.arange(max(0, m - terms), m + 1)
    return logsumexp(binom.logpmf(i, n, eps))


eps, beta, d, k = 0.01, 1e-9, 1000000, 1000000
rc, a = ask(epsilon=eps, beta=beta, decisions=d, discarded=k)
if ok(rc == 0, "large case: %s" % (a,)):
    n = a["scenarios"]
    m = k + d - 1
    logc = gammaln(k + d) - gammaln(k + 1) - gammaln(d)
    lb_n = logc + log_tail(m, n, eps)
    lb_prev = logc + log_tail(m, n - 1, eps)
    c.check(lb_n <= math.log(beta) + 1e-7 and lb_prev > math.log(beta) - 1e-7,
            "large case N=%d: log bound %.12g, at N-1 %.12g, log beta %.12g"
            % (n, lb_n, lb_prev, math.log(beta)))
    c.check(within(math.log(a["bound"]), lb_n, 1e-6),
            "large case: log bound ours %.12g scipy %.12g"
            % (math.log(a["bound"]), lb_n))
    print("large case d=k=1e6 eps=0.01 beta=1e-9: N=%d" % n)

# ---- epsilon for (scenarios, beta, decisions[, discarded]) ----
worst = 0.0
for n in (100, 1000, 20000):
    for beta in (1e-3, 1e-9):
        for d in (1, 3, 12):
            for k in (None, 10):
                if n <= d + (k or 0):
                    continue
                params = dict(scenarios=n, beta=beta, decisions=d)
                if k is not None:
                    params["discarded"] = k
                rc, a = ask(**params)
                what = "N=%d beta=%g d=%d k=%s" % (n, beta, d, k)
                if not ok(rc == 0, "%s: %s" % (what, a)):
                    continue
                e = a["epsilon"]
                kk = k or 0
                at, below = bound(n, e, d, kk), bound(n, e * (1 - 1e-9), d, kk)
                c.check(at <= beta * (1 + 1e-9) and below > beta,
                        "%s: eps %.17g not the smallest: bound %.6g, just below "
                        "%.6g" % (what, e, at, below))
                worst = max(worst, abs(at - beta) / beta)
print("epsilon from scenarios: worst relative distance of the bound from beta "
      "%.2e" % worst)

# ---- normal half-width and power ----
worst = 0.0
for h in (0.05, 0.01, 0.002, 0.0005):
    for conf in (0.9, 0.95, 0.99):
        for p in (None, 0.5, 0.9, 0.99):
            params = dict(half_width=h, confidence=conf)
            if p is not None:
                params["probability"] = p
            rc, a = ask(**params)
            if not ok(rc == 0, "half-width %r: %s" % (params, a)):
                continue
            pp = 0.5 if p is None else p
            ref = norm.ppf(1 - (1 - conf) / 2) ** 2 * pp * (1 - pp) / h ** 2
            n = a["samples"]
            # ceil of the formula; one unit of slack only where the formula
            # lies within rounding of a whole number.
            good = n == max(1, math.ceil(ref)) or abs(ref - round(ref)) < 1e-9 * ref
            worst = max(worst, abs(n - math.ceil(ref)))
            c.check(good and a["method"] == "normal_half_width",
                    "half-width %r: ours %d, scipy.stats.norm %.6f" % (params, n, ref))
for t, p in ((0.9, 0.93), (0.95, 0.96), (0.5, 0.6), (0.99, 0.995)):
    for conf in (0.9, 0.95, 0.99):
        for power in (0.5, 0.8, 0.9, 0.99):
            rc, a = ask(target=t, probability=p, confidence=conf, power=power)
            if not ok(rc == 0, "power %r: %s" % ((t, p, conf, power), a)):
                continue
            za = norm.ppf(1 - (1 - conf) / 2)
            zp = norm.ppf(power)
            ref = ((za * math.sqrt(t * (1 - t)) + zp * math.sqrt(p * (1 - p)))
                   / (p - t)) ** 2
            n = a["samples"]
            good = n == max(1, math.ceil(ref)) or abs(ref - round(ref)) < 1e-9 * ref
            worst = max(worst, abs(n - math.ceil(ref)))
            c.check(good and a["method"] == "normal_power",
                    "power %r: ours %d, scipy.stats.norm %.6f"
                    % ((t, p, conf, power), n, ref))
print("normal forms: worst difference from ceil(formula) %d" % worst)

# Usage errors exit 3 and name the parameter.
for args, word in ((["--half-width", "0.01"], "confidence"),
                   (["--epsilon", "0.05", "--scenarios", "10", "--beta", "0.1",
                     "--decisions", "2"], "ambiguous"),
                   (["--decisions", "x"], "decisions"),
                   (["--colour", "1"], "colour")):
    p = subprocess.run([BIN, "sample-size"] + args, capture_output=True,
                       text=True, timeout=60)
    c.check(p.returncode == 3 and word in p.stderr,
            "sample-size %s: exit 3 naming %s, got %d %s"
            % (" ".join(args), word, p.returncode, p.stderr))

c.finish()
