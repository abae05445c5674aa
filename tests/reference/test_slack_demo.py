"""slack_to_target on the demo models against exact quantiles of the
sampled excess.

For each model of deploy/demo/ and both its candidates (*.pass.json,
*.fail.json), at the model's own target and at 0.99, the test runs the
check offline (`feasgate check`, N samples, the candidate's seed), reads
the same N samples of the validation stream (`feasgate scenarios --stream
validation --start 0`, the stream and indices the check draws: a draw is a
function of seed, stream, column and index only), recomputes every row's
excess from those inputs here in NumPy with the model's own expressions,
and takes the exact quantile of each row's excess.

Quantile definition: with n samples and k = ceil(target * n), the k-th
smallest excess X_(k) (NaN counted as +infinity), i.e. the inverse of the
empirical distribution function, numpy.quantile(..., method=
"inverted_cdf"), which the test also asks for each row as a check on its
own indexing -- definition 1 of Hyndman & Fan, "Sample quantiles in
statistical packages", The American Statistician 50 (1996) (citation
from memory; NumPy's documentation names the same). Why it is the
slack: loosening a row's limit by s makes it hold exactly in the samples
with excess <= s, so it holds in at least a target fraction of the n
samples iff #(excess <= s) >= k, and the smallest such s is X_(k); the
smallest loosening s >= 0 is therefore max(0, X_(k)). A row with
X_(k) <= 0 already holds with the target and must report exactly 0.

Tolerance: feasgate reads X_(k) off the row's excess histogram, whose
counts are exact and whose value within a bucket is within
FG_HIST_REL_ERROR = 1/128 relative of the sample value of that rank
(estimate.h; the check-result schema's `excess` and `slack_to_target`
descriptions), and values below 2^-40 share bucket 0. Every positive slack
must lie within 1/128 of X_(k) plus one order-statistic step (the larger
of X_(k) - X_(k-1) and X_(k+1) - X_(k)); and, since the counts (hence the
rank) are exact, the tighter bound of 1/128 of X_(k) itself is asserted
too. Only the bucket's width is allowed, no sampling error: the reference
is the very sample the check counted.

That the recomputed samples are the ones the check counted is checked
first: every row's violation count from the recomputed excess equals the
check's `violated`, and the joint count its `satisfied`; and a few
indices (the first failing scenario, 0, n - 1) are compared with
`feasgate explain`'s row excess.
"""
import json
import math
import os
import subprocess
import tempfile
from fractions import Fraction

import numpy as np
from demo_rows import DEMO, MODELS, load, scenarios
from refcommon import BIN, Counter, run_check

c = Counter()
N = 40000
HIST_REL = 1.0 / 128          # FG_HIST_REL_ERROR (server/estimate/estimate.h)
HIST_FLOOR = 2.0 ** -40       # values below it share bucket 0
EXTRA_TARGET = 0.99


def explain_rows(model_path, request, index):
    with tempfile.TemporaryDirectory() as d:
        rp = os.path.join(d, "r.json")
        with open(rp, "w") as f:
            json.dump(request, f)
        p = subprocess.run([BIN, "explain", model_path, rp, "--index", str(index)],
                           capture_output=True, text=True, timeout=300)
    if p.returncode != 0:
        raise RuntimeError("feasgate explain failed: " + p.stderr)
    return {r["name"]: r["excess"] for r in json.loads(p.stdout)["rows"]}


def order_stats(x, k):
    """X_(k-1), X_(k), X_(k+1) of x (1-based ranks, clamped to 1..n), NaN as
    +infinity; X_(k) equals numpy's inverted_cdf quantile at k/n."""
    s = np.sort(np.where(np.isnan(x), np.inf, x))
    n = len(s)
    return s[max(k - 2, 0)], s[k - 1], s[min(k, n - 1)]


worked = {"positive": 0, "zero": 0}
for name, rows_of in MODELS:
    model_path = os.path.join(DEMO, name + ".model.json")
    model = load(model_path)
    targets = [model["target"]["probability"], EXTRA_TARGET]
    inputs = {}
    for cand in ("pass", "fail"):
        req = load(os.path.join(DEMO, "%s.%s.json" % (name, cand)))
        req["samples"] = N
        seed = req["seed"]
        if seed not in inputs:
            inputs[seed] = scenarios(model_path, seed, N)
        ex = rows_of(inputs[seed], req["decision"])
        viol = {r: ~(x <= 0) for r, x in ex.items()}
        joint_ok = N - int(np.any(np.stack(list(viol.values())), axis=0).sum())
        for target in targets:
            rq = dict(req, target=target)
            rc, res = run_check(model, rq)
            tag = "%s %s at %g" % (name, cand, target)
            c.check(res["joint"]["samples"] == N and not res["stopped_early"],
                    "%s: the check counted %r samples, asked %d"
                    % (tag, res["joint"]["samples"], N))
            # same samples: the counts agree exactly with the recomputation
            c.check(res["joint"]["satisfied"] == joint_ok,
                    "%s: joint satisfied %d, recomputed %d"
                    % (tag, res["joint"]["satisfied"], joint_ok))
            got_rows = {r["name"]: r for r in res["constraints"]}
            c.check(sorted(got_rows) == sorted(ex),
                    "%s: rows %s, recomputed %s" % (tag, sorted(got_rows), sorted(ex)))
            # k = ceil(target n), target read as the decimal it is written as
            k = math.ceil(Fraction(str(target)) * N)
            for row, x in ex.items():
                r = got_rows.get(row)
                if r is None:
                    continue
                nv = int(viol[row].sum())
                c.check(r["violated"] == nv, "%s %s: violated %d, recomputed %d"
                        % (tag, row, r["violated"], nv))
                lo, xk, hi = order_stats(x, k)
                npq = np.quantile(np.where(np.isnan(x), np.inf, x), target,
                                  method="inverted_cdf")
                c.check(npq == xk, "%s %s: X_(%d) %r equals numpy's inverted_cdf "
                        "quantile %r" % (tag, row, k, float(xk), float(npq)))
                exact = max(0.0, float(xk))
                got = r["slack_to_target"]
                if xk <= 0:
                    worked["zero"] += 1
                    c.check(got == 0, "%s %s: X_(%d) = %r <= 0, slack must be 0, "
                            "got %r" % (tag, row, k, float(xk), got))
                    continue
                worked["positive"] += 1
                step = max(xk - max(lo, 0.0), hi - xk)
                tight = HIST_REL * xk + HIST_FLOOR
                tol = tight + step
                err = abs(got - xk) if got is not None else math.inf
                print("%-28s %-12s slack %-12.6g X_(k) %-12.6g |diff| %.3g "
                      "(1/128: %.3g, step %.3g)" % (tag, row, got, exact, err,
                                                     tight, step))
                c.check(err <= tol, "%s %s: slack %r vs X_(%d) = %r, tolerance %g "
                        "(1/128 plus one order-statistic step)"
                        % (tag, row, got, k, exact, tol))
                c.check(err <= tight, "%s %s: slack %r vs X_(%d) = %r beyond 1/128 "
                        "(%g) of the exact rank" % (tag, row, got, k, exact, tight))
        # the recomputation is the engine's own: a few indices through
        # `feasgate explain`
        rc, res = run_check(model, req)
        idx = [0, N - 1] + [f["index"] for f in res["failing_scenarios"][:1]]
        for i in idx:
            mine = explain_rows(model_path, req, i)
            for row, x in ex.items():
                v = mine.get(row)
                c.check(v is not None and abs(v - x[i]) <= 1e-12 * max(1.0, abs(v)),
                        "%s %s index %d %s: explain %r, recomputed %r"
                        % (name, cand, i, row, v, float(x[i])))

# the demo candidates must exercise both branches
print("rows with positive slack: %d, rows already holding: %d"
      % (worked["positive"], worked["zero"]))
c.check(worked["positive"] >= 10 and worked["zero"] >= 10,
        "both kinds of row covered: %r" % worked)
c.finish()
