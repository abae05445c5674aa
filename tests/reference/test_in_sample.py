"""The in-sample figure and failing scenarios, recomputed outside feasgate.

A check's `in_sample` must re-evaluate the candidate on exactly the design
scenarios that `feasgate scenarios --stream design` hands out for that seed,
and each failing scenario it reports must be a validation-stream scenario
that really breaks the rows it names. Both are recomputed here in Python
from the scenario rows (the constraint is plain arithmetic; no outside
library is needed, so the reference is the model's own definition).
"""
import json

from refcommon import Counter, run_check, run_scenarios

c = Counter()

model = {
    "format": 1, "name": "ref-in-sample",
    "decisions": [{"name": "cap", "size": 2}],
    "uncertain": [
        {"name": "load", "size": 2, "distribution": {"family": "gamma", "shape": [3, 5], "scale": 2}},
        {"name": "spill", "distribution": {"family": "poisson", "mean": 1.2}},
    ],
    "constraints": [
        {"name": "first", "require": "load[0] + spill <= cap[0]"},
        {"name": "second", "require": "load[1] <= cap[1]"},
    ],
}
cap = [9.0, 14.0]


def broken(row):
    l0, l1, s = row
    out = []
    if not (l0 + s <= cap[0]):
        out.append("first")
    if not (l1 <= cap[1]):
        out.append("second")
    return out


rows = json.loads(run_scenarios(model, 500, 7, stream="design"))["rows"]
expect = sum(1 for r in rows if not broken(r))
rc, res = run_check(model, {"decision": {"cap": cap}, "samples": 20000, "seed": 3,
                            "in_sample": {"seed": 7, "count": 500}})
ins = res["in_sample"]
print("in-sample: feasgate %d of %d, recomputed %d" % (ins["satisfied"], ins["count"], expect))
c.check(ins["count"] == 500, "in_sample count")
c.check(ins["satisfied"] == expect, "in_sample satisfied equals the recomputed count")
c.check(abs(ins["fraction"] - expect / 500) < 1e-12, "in_sample fraction")

for f in res["failing_scenarios"]:
    row = json.loads(run_scenarios(model, 1, 3, start=f["index"], stream="validation"))["rows"][0]
    c.check(sorted(broken(row)) == sorted(f["violated"]),
            "failing scenario %d breaks %s (recomputed %s)" % (f["index"], f["violated"], broken(row)))
c.check(len(res["failing_scenarios"]) == 5, "five failing scenarios reported")

# The validation estimate, recomputed from the same stream's rows.
vrows = json.loads(run_scenarios(model, 20000, 3, stream="validation"))["rows"]
vexpect = sum(1 for r in vrows if not broken(r))
c.check(res["joint"]["satisfied"] == vexpect,
        "joint count %d equals the recomputed %d" % (res["joint"]["satisfied"], vexpect))
# The offline summary table names the same figures (and the seed as text).
import os, subprocess, tempfile  # noqa: E402
from refcommon import BIN  # noqa: E402
with tempfile.TemporaryDirectory() as d:
    mp, rp = os.path.join(d, "m.json"), os.path.join(d, "r.json")
    json.dump(model, open(mp, "w"))
    json.dump({"decision": {"cap": cap}, "samples": 20000, "seed": 3}, open(rp, "w"))
    out = subprocess.run([BIN, "check", mp, rp, "--summary"], capture_output=True, text=True).stdout
c.check("%d satisfied of 20000, seed 3" % vexpect in out, "--summary states the counts and the seed")
worst, other = res["constraints"][0]["name"], res["constraints"][1]["name"]
rows_part = out[out.index("row (worst first)"):]
c.check(rows_part.index("\n" + worst) < rows_part.index("\n" + other),
        "--summary lists rows worst first, as the result body does")
c.finish()
