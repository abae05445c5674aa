"""Drivers ("explain": true) on the demo models against the definition
applied to the very samples the check counted.

For each model of deploy/demo/ and both its candidates, the check runs
offline with "explain": true (N samples, the candidate's seed, 2 workers),
and the same N samples of the validation stream are read with `feasgate
scenarios` (demo_rows.py), every row's excess recomputed from them, and for
each row and for the joint (samples where any row fails) the shift of
every input component computed here with NumPy from its definition:
    shift_j = (mean of x_j over the violating samples - mean of x_j over
               all samples) / population standard deviation of x_j
(numpy.mean, numpy.std with ddof=0). This complements test_drivers.py
(closed form on affine normal rows) with the joint over several rows, a
copula, integer and truncated inputs and non-linear rows, where no closed
form exists but the figures are a deterministic function of the samples.

Checks: the listed drivers are at most 5, ranked by |shift|; each listed
shift equals the recomputed one to 1e-9 (the engine sums x - x_0 per
chunk, so only the last bits may differ); the listed inputs are the 5
largest |shift| (ties within 1e-9 either way); a row never violated has
drivers null; the joint's violation count matches the recomputed one.
"""
import os

import numpy as np
from demo_rows import DEMO, MODELS, load, scenario_matrix, by_input
from refcommon import Counter, run_check

c = Counter()


def ok(cond, what):
    """c.check, returning the condition (Counter.check returns nothing)."""
    c.check(cond, what)
    return cond


N = 40000
TOL = 1e-9
LISTED = 5


def reference_shifts(vals, mask):
    """shift per column for the samples in `mask` (population sd)."""
    mean = vals.mean(axis=0)
    sd = vals.std(axis=0)
    sub = vals[mask].mean(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(sd > 0, (sub - mean) / sd, np.nan)


def compare(tag, listed, head, vals, mask):
    nv = int(mask.sum())
    if nv == 0:
        c.check(listed is None, "%s: never violated, drivers null (got %r)"
                % (tag, listed))
        return
    if not ok(isinstance(listed, list) and 0 < len(listed) <= LISTED,
                   "%s: %d violations, drivers listed (got %r)" % (tag, nv, listed)):
        return
    ref = reference_shifts(vals, mask)
    mags = np.sort(np.abs(ref[~np.isnan(ref)]))[::-1]
    fifth = mags[min(LISTED, len(mags)) - 1]
    c.check(len(listed) == min(LISTED, len(mags)),
            "%s: %d drivers listed of %d components with spread"
            % (tag, len(listed), len(mags)))
    c.check(all(abs(listed[i]["shift"]) >= abs(listed[i + 1]["shift"])
                for i in range(len(listed) - 1)), "%s: ranked by |shift|" % tag)
    worst = 0.0
    for e in listed:
        j = head.index(e["input"]) if e["input"] in head else None
        if not ok(j is not None, "%s: driver %r is an input component"
                       % (tag, e["input"])):
            continue
        diff = abs(e["shift"] - ref[j])
        worst = max(worst, diff)
        c.check(diff <= TOL * max(1.0, abs(ref[j])),
                "%s %s: shift %r, recomputed %r" % (tag, e["input"], e["shift"], ref[j]))
        c.check(abs(ref[j]) >= fifth - TOL,
                "%s %s: |shift| %g is not among the %d largest (5th %g)"
                % (tag, e["input"], abs(ref[j]), LISTED, fifth))
    print("%-32s %6d violations  top %-14s %+.6f  max |diff| %.2g"
          % (tag, nv, listed[0]["input"], listed[0]["shift"], worst))


seen = {"null": 0, "listed": 0}
for name, rows_of in MODELS:
    model_path = os.path.join(DEMO, name + ".model.json")
    model = load(model_path)
    cache = {}
    for cand in ("pass", "fail"):
        req = load(os.path.join(DEMO, "%s.%s.json" % (name, cand)))
        req.update(samples=N, explain=True)
        if req["seed"] not in cache:
            cache[req["seed"]] = scenario_matrix(model_path, req["seed"], N)
        head, vals = cache[req["seed"]]
        ex = rows_of(by_input(head, vals), req["decision"])
        _, res = run_check(model, req)
        tag = "%s %s" % (name, cand)
        c.check(res["joint"]["samples"] == N, "%s: %r samples counted"
                % (tag, res["joint"]["samples"]))
        anyfail = np.zeros(N, bool)
        got = {r["name"]: r for r in res["constraints"]}
        for row, x in ex.items():
            mask = ~(x <= 0)
            anyfail |= mask
            r = got.get(row)
            if not ok(r is not None and r["violated"] == int(mask.sum()),
                           "%s %s: violated %r, recomputed %d"
                           % (tag, row, r and r["violated"], int(mask.sum()))):
                continue
            seen["null" if r["drivers"] is None else "listed"] += 1
            compare("%s %s" % (tag, row), r["drivers"], head, vals, mask)
        c.check(N - int(anyfail.sum()) == res["joint"]["satisfied"],
                "%s: joint satisfied %d, recomputed %d"
                % (tag, res["joint"]["satisfied"], N - int(anyfail.sum())))
        compare("%s joint" % tag, res["joint"]["drivers"], head, vals, anyfail)

print("rows with drivers: %(listed)d, never violated (null): %(null)d" % seen)
c.check(seen["listed"] >= 10 and seen["null"] >= 3, "both kinds of row seen: %r" % seen)
c.finish()
