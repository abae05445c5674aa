"""The confidence sequence behind early stopping, at targets near 1.

Part 1 -- the sequence's endpoints (estimate/cs.c, through `ref_tool cs`)
against a 50-digit evaluation of the same definition with mpmath (Debian
python3-mpmath): the beta-binomial mixture martingale (Robbins 1970;
Howard, Ramdas, McAuliffe & Sekhon 2021, Ann. Statist. 49:1055)
  log M_n(p) = log B(a0 + k, b0 + n - k) - log B(a0, b0)
               - k log p - (n - k) log(1 - p),
a0 = 10 t, b0 = 10 (1 - t), each end the root of log M_n(p) = log(2/alpha)
found by bisection in mpmath. Targets t = 1 - 10^-j for j = 1 .. 15, n up
to 1e11 (the hard sample cap, include/feasgate/limits.h), counts with no
failure, one failure, a few, and a proportion well inside (0, 1). The
distance of each end from the nearer of 0 and 1 must agree to 1e-6
relative (double-precision log-beta terms of size n carry about 1e-16 n
absolute error in log M, i.e. 1e-5 at n = 1e11 against a threshold
log(40) = 3.7: a few 1e-6 relative in the distance -- an error estimate
from the arithmetic, not a published figure).

Part 2 -- early stopping through the offline `feasgate check`, a model
whose row holds in every sample: for targets t = 1 - 10^-k, k = 1 .. 12,
no `pass` before n* = log(alpha/2) / log(t) samples (with n samples all
satisfied, the Clopper-Pearson lower end (alpha/2)^(1/n) reaches t only
at n = n*; Clopper & Pearson 1934, Biometrika 26:404), and the reported
lower end never above the Clopper-Pearson lower end of the same counts
(scipy.stats.beta.ppf(alpha/2, k, n - k + 1)). Requests ask for
2^24 samples, so targets beyond k = 6 must end at the cap without a pass
(the reproduction of the old false pass at 16,777,216 samples).
"""
import math
import os
import subprocess

import mpmath as mp
from refcommon import REF_TOOL, Counter, run_check
from scipy.stats import beta

c = Counter()
mp.mp.dps = 50
LEVEL = 0.95


def ref_cs(k, n, level, t):
    """Endpoints of the sequence by 50-digit bisection (400 halvings)."""
    a0, b0 = 10 * mp.mpf(t), 10 * (1 - mp.mpf(t))
    # t is the double the tool reads: use its exact binary value
    a0 = 10 * mp.mpf(float(t))
    b0 = 10 * (1 - mp.mpf(float(t)))
    thr = mp.log(2 / (1 - mp.mpf(level)))
    lb0 = mp.log(mp.beta(a0, b0))
    lbk = mp.loggamma(a0 + k) + mp.loggamma(b0 + n - k) - mp.loggamma(a0 + b0 + n)

    def logm(p):
        v = lbk - lb0
        if k > 0:
            v -= k * mp.log(p)
        if n - k > 0:
            v -= (n - k) * mp.log1p(-p)
        return v

    phat = mp.mpf(k) / n
    lower, upper = mp.mpf(0), mp.mpf(1)
    if k > 0:
        lo, hi = mp.mpf(0), phat
        for _ in range(400):
            mid = (lo + hi) / 2
            if logm(mid) >= thr:
                lo = mid
            else:
                hi = mid
        lower = lo
    if k < n:
        lo, hi = phat, mp.mpf(1)
        for _ in range(400):
            mid = (lo + hi) / 2
            if logm(mid) >= thr:
                hi = mid
            else:
                lo = mid
        upper = hi
    return lower, upper


cases = []
for j in range(1, 16):
    t = 1 - 10.0 ** -j
    for n in (4096, 1 << 24, 10**9, 10**11):
        for fails in (0, 1, 7):
            cases.append((n - fails, n, LEVEL, t))
    cases.append((10**6 // 2, 10**6, LEVEL, t))
cases.append((3, 10**11, 0.99, 0.5))
cases.append((9 * 10**8, 10**9, 0.9, 0.9))

text = "".join("%d %d %.17g %.17g\n" % cs for cs in cases)
out = subprocess.run([REF_TOOL, "cs"], input=text, capture_output=True,
                     text=True, check=True).stdout.split("\n")
worst = 0.0
for (k, n, level, t), line in zip(cases, out):
    lo, up = (float(x) for x in line.split())
    rlo, rup = ref_cs(k, n, level, t)
    phat = k / n
    # distances from the nearer edge, where all the digits are
    for got, ref, what in ((lo, rlo, "lower"), (up, rup, "upper")):
        if phat > 0.5:
            g, r = 1 - mp.mpf(got), 1 - ref
        else:
            g, r = mp.mpf(got), ref
        if r == 0:
            ok = g == 0
            rel = 0.0 if ok else 1.0
        else:
            rel = float(abs(g - r) / r)
            # a double cannot hold 1 - d for d below its spacing near 1
            ok = rel <= 1e-6 or abs(g - r) <= 2.3e-16
            if abs(g - r) > 2.3e-16:
                worst = max(worst, rel)
        c.check(ok, "cs %s k=%d n=%d level=%g t=%.17g: %.17g, mpmath %s (rel %.3g)"
                % (what, k, n, level, t, got, mp.nstr(1 - r if phat > 0.5 else r, 20), rel))
print("cs vs mpmath: %d cases, worst relative distance error %.3g (beyond a double's spacing near 1)" % (len(cases), worst))

# ---- part 2: early stopping through the offline check ----
MODEL = {
    "format": 1,
    "name": "always-holds",
    "title": "a row that holds in every sample",
    "decisions": [{"name": "x", "lower": 0, "upper": 10}],
    "uncertain": [{"name": "u", "distribution": {"family": "uniform", "low": 0, "high": 1}}],
    "constraints": [{"name": "c", "require": "u <= x + 1"}],
}
CAP = 1 << 24
alpha = 1 - LEVEL
for kk in range(1, 13):
    t = 1 - 10.0 ** -kk
    nstar = math.log(alpha / 2) / math.log(t)
    rc, res = run_check(MODEL, {"decision": {"x": 1}, "samples": CAP, "seed": 5,
                                "target": t, "confidence": LEVEL, "stop_early": True},
                        workers=2)
    j = res["joint"]
    n, k = j["samples"], j["satisfied"]
    lo = j["interval"]["lower"]
    cp_lo = beta.ppf(alpha / 2, k, n - k + 1) if k > 0 else 0.0
    c.check(k == n, "t=1-1e-%d: every sample holds (%d of %d)" % (kk, k, n))
    if res["verdict"] == "pass":
        c.check(n >= nstar, "t=1-1e-%d: pass after %d samples, n* = %.4g" % (kk, n, nstar))
    else:
        c.check(nstar > CAP, "t=1-1e-%d: %s at %d samples though n* = %.4g <= cap"
                % (kk, res["verdict"], n, nstar))
        c.check(n == CAP and res["verdict"] == "inconclusive",
                "t=1-1e-%d: ended %s at %d, want inconclusive at the cap %d"
                % (kk, res["verdict"], n, CAP))
    # scipy's beta.ppf near 1 is good to about 1e-15 relative; allow that
    c.check(lo <= cp_lo + 4e-16, "t=1-1e-%d: lower %.17g above Clopper-Pearson %.17g"
            % (kk, lo, cp_lo))
    print("t=1-1e-%-2d n*=%-12.4g verdict %-12s at n=%-9d lower %.15g (CP %.15g)"
          % (kk, nstar, res["verdict"], n, lo, cp_lo))
c.finish()
