"""Sampling designs: variance reduction against plain Monte Carlo, and the
coverage of the intervals they report.

Sources:
  - the exact probability P(U1 + U2 + U3 <= 1.8) for independent uniforms
    on (0, 1) is the Irwin-Hall CDF, (x^3 - 3 (x-1)^3) / 6 on [1, 2]
    (closed form of the sum of uniforms), here 0.716;
  - P(Z1 + Z2 + Z3 <= 1) for independent standard normals is
    Phi(1 / sqrt(3)) (scipy.stats.norm.cdf);
  - Latin hypercube sampling (McKay, Beckman & Conover 1979) and randomised
    Sobol points reduce the variance of estimates of smooth monotone
    functions; antithetic pairs reduce it for monotone functions (common
    practice).
Each design is run over many seeds; the variance of its estimates is
compared with plain Monte Carlo's, p(1-p)/N for N independent samples (the
binomial variance; the measured Monte Carlo variance is printed beside it),
and its reported interval must cover the exact value at about the nominal
95% rate.
"""
import math
import statistics

from refcommon import Counter, run_check
from scipy.stats import norm

c = Counter()

x = 1.8
exact_uniform = (x ** 3 - 3 * (x - 1) ** 3) / 6
exact_normal = float(norm.cdf(1 / math.sqrt(3)))

models = {
    "uniform sum": ({
        "format": 1, "name": "ref-design-uniform",
        "decisions": [{"name": "cap"}],
        "uncertain": [{"name": "u", "size": 3,
                       "distribution": {"family": "uniform", "low": 0, "high": 1}}],
        "constraints": [{"name": "total", "require": "sum(u) <= cap"}],
    }, {"cap": 1.8}, exact_uniform),
    "normal sum": ({
        "format": 1, "name": "ref-design-normal",
        "decisions": [{"name": "cap"}],
        "uncertain": [{"name": "z", "size": 3,
                       "distribution": {"family": "normal", "mean": 0, "sd": 1}}],
        "constraints": [{"name": "total", "require": "z[0] + z[1] + z[2] <= cap"}],
    }, {"cap": 1.0}, exact_normal),
}

SEEDS = 80
N = 4096
designs = ["monte_carlo", "antithetic", "latin_hypercube", "sobol"]
# Coverage tolerance: at least 95% of SEEDS minus three binomial standard
# deviations.
min_cover = SEEDS * 0.95 - 3 * math.sqrt(SEEDS * 0.95 * 0.05)

for label, (model, decision, exact) in models.items():
    variances = {}
    for d in designs:
        est, cover = [], 0
        for seed in range(1, SEEDS + 1):
            rc, res = run_check(model, {"decision": decision, "samples": N,
                                        "seed": seed, "sampling": d}, workers=1)
            j = res["joint"]
            est.append(j["probability"])
            if j["interval"]["lower"] <= exact <= j["interval"]["upper"]:
                cover += 1
        variances[d] = statistics.pvariance(est, mu=exact)
        mean = statistics.fmean(est)
        print("%-12s %-16s mean %.5f (exact %.5f)  covered %d/%d  variance %.3e"
              % (label, d, mean, exact, cover, SEEDS, variances[d]))
        c.check(cover >= min_cover, "%s %s: interval covers the exact value %d/%d times"
                % (label, d, cover, SEEDS))
        c.check(abs(mean - exact) < 4 * math.sqrt(variances[d] / SEEDS) + 1e-4,
                "%s %s: mean of estimates unbiased" % (label, d))
    binomial = exact * (1 - exact) / N
    print("%-12s Monte Carlo variance: binomial %.3e, measured %.3e"
          % (label, binomial, variances["monte_carlo"]))
    for d in designs[1:]:
        ratio = binomial / variances[d]
        print("%-12s variance ratio monte_carlo / %s = %.2f" % (label, d, ratio))
        c.check(ratio > 1.2, "%s: %s reduces the variance (ratio %.2f)" % (label, d, ratio))

c.finish()
