"""Coverage of feasgate's intervals over many seeds.

A model with one standard normal input u and one row "u <= x" has the
exact joint probability Phi(x) (scipy.stats.norm.cdf, Debian
python3-scipy). Over 400 seeds, each a check of 2000 samples by the
offline command `feasgate check`, a 95% Clopper-Pearson interval (Clopper
& Pearson 1934, Biometrika 26:404) must cover Phi(x) at least
400 * 0.95 - 3 * sqrt(400 * 0.95 * 0.05) times (binomial tolerance; the
interval is conservative, so it usually covers more often). Two values of
x are used, one near the middle and one in the upper tail where the
normal approximation behind other intervals is poorest. The Wilson
interval's coverage in the tail is printed for information.
"""
import json
import math
import os
import subprocess
import tempfile
import time

from refcommon import BIN, Counter
from scipy.stats import norm

c = Counter()

SEEDS = 400
SAMPLES = 2000
LEVEL = 0.95
FLOOR = SEEDS * LEVEL - 3 * math.sqrt(SEEDS * LEVEL * (1 - LEVEL))

MODEL = {
    "format": 1,
    "name": "coverage-ref",
    "title": "coverage reference model",
    "decisions": [{"name": "x", "lower": -10, "upper": 10}],
    "uncertain": [{"name": "u", "distribution": {"family": "normal", "mean": 0, "sd": 1}}],
    "constraints": [{"name": "c", "require": "u <= x"}],
}

t0 = time.time()
with tempfile.TemporaryDirectory(prefix="feasgate-coverage-") as tmp:
    mp = os.path.join(tmp, "m.json")
    with open(mp, "w") as f:
        json.dump(MODEL, f)
    for x in (0.3, 2.0):
        exact = norm.cdf(x)
        for method in ("clopper_pearson", "wilson") if x > 1 else ("clopper_pearson",):
            rp = os.path.join(tmp, "r.json")
            with open(rp, "w") as f:
                json.dump({"decision": {"x": x}, "samples": SAMPLES,
                           "confidence": LEVEL, "interval": method}, f)
            covered = 0
            ran = 0
            for seed in range(1, SEEDS + 1):
                p = subprocess.run([BIN, "check", mp, rp, "--seed", str(seed),
                                    "--workers", "1"],
                                   capture_output=True, text=True, timeout=60)
                if p.returncode == 3:
                    c.check(False, "x=%g seed %d: %s" % (x, seed, p.stderr))
                    break
                joint = json.loads(p.stdout)["joint"]
                iv = joint["interval"]
                if joint["samples"] != SAMPLES or iv.get("method") != method:
                    c.check(False, "x=%g seed %d: %r" % (x, seed, joint))
                    break
                ran += 1
                covered += iv["lower"] <= exact <= iv["upper"]
            rate = covered / max(ran, 1)
            print("x=%g P=%.6f %-16s covers %d of %d seeds (%.4f)"
                  % (x, exact, method, covered, ran, rate))
            if method == "clopper_pearson":
                c.check(ran == SEEDS and covered >= FLOOR,
                        "Clopper-Pearson at x=%g covers %d of %d, below %.1f"
                        % (x, covered, ran, FLOOR))
print("coverage: %.1f s" % (time.time() - t0))
c.finish()
