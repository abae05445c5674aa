"""The whole design-solve-validate loop through outside solvers.

For three invented models (4 to 8 decision components, continuous and
integer), the scenario program over s = 200 design scenarios is exported
(`feasgate sample-model`, the text POST .../sample-models answers), solved
by two independent solvers from Debian -- COIN-OR CBC (coinor-cbc) and
GLPK (glpk-utils) -- and each solver's plan is read back through the
answer's column map and checked by feasgate on 1,000,000 validation
samples with `in_sample` on the same 200 design scenarios.

What must hold, and the source of each expectation:
- both solvers report an optimum and agree on its value to 1e-6 relative
  (their default optimality tolerances are far tighter; common practice);
- indicator form: the plan's in-sample fraction reaches keep_at_least / s
  = ceil(target s) / s -- the program's keep row (sum k >= ceil(target s))
  with each kept scenario's rows enforced, the definition of the
  scenario program; all form: the in-sample fraction is 1;
- a deterministic objective's value at the plan, as feasgate's check
  reports it, equals the solver's optimum plus the answer's constant
  (the objective row is the model's objective, closed form).
The out-of-sample estimate and its gap to the in-sample fraction are
printed (what a team reads before trusting a plan), not asserted.

Solved with a margin of 1e-4 on every row (tests/reference/milp.py says
why: solver tolerances and CBC's 8 printed digits).
"""
import math
import sys

import milp
from refcommon import Counter, run_check

c = Counter()
S = 200
MARGIN = 1e-4
SAMPLES = 1000000

WATER, WAREHOUSE, DEPOT = milp.WATER, milp.WAREHOUSE, milp.DEPOT


def loop(model, form, seed):
    name = "%s/%s" % (model["name"], form)
    ans = milp.export(model, S, seed, form=form)
    text = milp.with_margin(ans["text"], MARGIN)
    c.check(ans["text"].rstrip().endswith("ENDATA"), name + ": the text ends with ENDATA")
    sols = {}
    for solver, fn in (("cbc", milp.solve_cbc), ("glpk", milp.solve_glpk)):
        st, obj, vals, took = fn(text)
        print("%s: %s %s objective %r in %.1f s" % (name, solver, st, obj, took), flush=True)
        c.check(st == "optimal", "%s: %s finds the optimum (%s)" % (name, solver, st))
        sols[solver] = (obj, vals)
    (oc, vc), (og, vg) = sols["cbc"], sols["glpk"]
    if oc is None or og is None:
        return
    c.check(abs(oc - og) <= 1e-6 * (1 + abs(og)),
            "%s: CBC %r and GLPK %r agree on the optimum" % (name, oc, og))
    keep = ans["keep_at_least"]
    for solver, (obj, vals) in sols.items():
        decision = milp.plan(ans, vals, model)
        kept = sum(1 for l in range(S) if vals.get("k%d" % l, 0.0) > 0.5)
        rc, res = run_check(model, {"decision": decision, "samples": SAMPLES, "seed": 11 + seed,
                                    "in_sample": {"seed": seed, "count": S}})
        ins = res["in_sample"]
        frac, oos = ins["fraction"], res["joint"]["probability"]
        print("%s: %s plan %s\n    in-sample %d/%d = %.4f (kept %s), out-of-sample %.5f "
              "[%.5f, %.5f], gap %+.5f, verdict %s" %
              (name, solver, decision, ins["satisfied"], S, frac,
               kept if form == "indicator" else "all", oos,
               res["joint"]["interval"]["lower"], res["joint"]["interval"]["upper"],
               frac - oos, res["verdict"]), flush=True)
        if form == "indicator":
            c.check(ins["satisfied"] >= keep and frac >= math.ceil(0.95 * S) / S - 1e-12,
                    "%s/%s: in-sample %d reaches keep_at_least %d" % (name, solver, ins["satisfied"], keep))
            c.check(kept >= keep, "%s/%s: %d indicators on, at least %d" % (name, solver, kept, keep))
            c.check(ins["satisfied"] >= kept, "%s/%s: every kept scenario holds" % (name, solver))
        else:
            c.check(frac == 1.0, "%s/%s: all form holds every design scenario (%r)" % (name, solver, frac))
        c.check(res["deterministic"]["ok"], "%s/%s: no deterministic problem" % (name, solver))
        ob = ans["objective"]
        if ob["written"] and not ob["averaged"]:
            sign = -1 if ob["negated"] else 1
            want = sign * obj + ob["constant"]
            c.check(abs(res["objective"] - want) <= 1e-6 * (1 + abs(want)),
                    "%s/%s: feasgate's objective %r equals the solver's %r + constant" %
                    (name, solver, res["objective"], want))


if not milp.solvers_present():
    print("FAIL: cbc and glpsol are needed (deploy/lib/setup.sh installs coinor-cbc and glpk-utils)")
    sys.exit(1)

for model, seed in ((WATER, 7), (WAREHOUSE, 21), (DEPOT, 5)):
    for form in ("indicator", "all"):
        loop(model, form, seed)
c.finish()
