#!/usr/bin/python3
"""tests/api/test_sample_models.py -- POST /v1/models/{name}/sample-models.

Starts `feasgate serve` (apicommon.Daemon) with a temporary SQLite store,
registers invented models and checks:
  - the JSON answer (schema-checked by apicommon), the text alone with
    Accept: text/plain (the same bytes), and the same bytes from the
    offline `feasgate sample-model`;
  - the program is built on the design scenarios GET .../scenarios hands
    out for the seed: in the water model's `farms` row (draw[1] + draw[2]
    >= demand[1], lower bounds 0) the big-M of scenario l is exactly
    demand[1] of scenario l (the row's largest value over the box is at
    draw = 0), read from both answers as doubles;
  - a drawn seed is echoed and replays; the all form's guarantee and null
    big_m; the keep row's right-hand side;
  - 400 for malformed bodies (each member named by JSON Pointer) and the
    scenario limit (named sample_model_scenarios), 422 for a row not
    affine in the decisions (its pointer, column and term) and for a
    missing bound, 404, 405, 410; the limits listed by GET /v1/limits.

Standard library plus apicommon and the reference tests' milp.py. The last line is "N passed, N failed".
"""
import json
import os
import subprocess
import sys
import tempfile

from apicommon import BIN, Daemon, Results

# The loop test's water model (tests/reference/milp.py), one copy.
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)),
                                "..", "reference"))
from milp import WATER  # noqa: E402

results = Results()
check = results.check

PUMPS = {
    "format": 1, "name": "pump-pair",
    "decisions": [{"name": "rate", "size": 2, "lower": 0, "upper": 9}],
    "uncertain": [{"name": "need", "distribution": {"family": "uniform", "low": 1, "high": 4}}],
    "constraints": [{"name": "flow", "require": "rate[0] * rate[1] >= need"}],
}

TANK = {
    "format": 1, "name": "tank-fill",
    "decisions": [{"name": "fill", "lower": 0}],
    "uncertain": [{"name": "use", "distribution": {"family": "uniform", "low": 1, "high": 4}}],
    "constraints": [{"name": "spill", "require": "fill - use <= 10"}],
}


def mps_coefs(text):
    """{(column, row): value} and {row: rhs} of free MPS text."""
    coef, rhs, sec = {}, {}, None
    for line in text.splitlines():
        if not line or line[0] == "*":
            continue
        if line[0] != " ":
            sec = line.split()[0]
            continue
        f = line.split()
        if sec == "COLUMNS" and f[1] != "'MARKER'":
            coef[(f[0], f[1])] = float(f[2])
        elif sec == "RHS":
            rhs[f[1]] = float(f[2])
    return coef, rhs


def post(d, name, body, headers=None):
    return d.request("POST", "/v1/models/%s/sample-models" % name, body, headers)


def test_answer(d, tmp):
    st, h, a = post(d, "water-summer", {"scenarios": 50, "seed": 7})
    if not check(st == 200, "indicator: 200, got %d %r" % (st, a)):
        return
    check(h.get("content-type", "").startswith("application/json"), "JSON content type")
    check(a["format"] == "mps" and a["form"] == "indicator" and a["scenarios"] == 50 and a["seed"] == 7,
          "format, form, scenarios, seed echoed")
    check(a["columns"] == {"draw[0]": "x0", "draw[1]": "x1", "draw[2]": "x2", "tanker_days": "x3"},
          "the column map: %r" % a["columns"])
    check(a["keep_at_least"] == 48, "keep_at_least = ceil(0.95 x 50) = 48: %r" % a["keep_at_least"])
    coef, rhs = mps_coefs(a["text"])
    check(rhs.get("keep") == 48.0, "the keep row's right-hand side is 48")
    check(a["big_m"]["max"] >= a["big_m"]["median"] > 0, "big_m max >= median > 0: %r" % a["big_m"])
    check(a["guarantee"] is None, "no guarantee in the indicator form")
    check(" M1 'MARKER' 'INTORG'" in a["text"] and a["text"].endswith("ENDATA\n"), "markers and ENDATA")

    st, h, raw = d.fetch("POST", "/v1/models/water-summer/sample-models", {"scenarios": 50, "seed": 7},
                         headers={"Accept": "text/plain"})
    check(st == 200 and h.get("content-type", "").startswith("text/plain"), "text/plain: %d %r" % (st, h))
    check(raw.decode() == a["text"], "Accept: text/plain answers the same text")

    # the same bytes offline
    mp = os.path.join(tmp, "water.json")
    with open(mp, "w") as f:
        json.dump(WATER, f)
    p = subprocess.run([BIN, "sample-model", mp, "--scenarios", "50", "--seed", "7"],
                       capture_output=True, text=True, timeout=120)
    check(p.returncode == 0 and p.stdout == a["text"], "feasgate sample-model prints the same text (rc %d %s)"
          % (p.returncode, p.stderr[-300:]))
    check("big-M max" in p.stderr, "the command's summary line: %r" % p.stderr)

    # the scenarios are GET .../scenarios' design scenarios of the seed
    st, _, sc = d.request("GET", "/v1/models/water-summer/scenarios?count=50&seed=7&stream=design")
    label = [k for k, v in a["rows"]["per_scenario"].items() if v == "farms"]
    if check(st == 200 and len(label) == 1, "scenarios answer and the farms label"):
        col = sc["columns"].index("demand[1]")
        same = all(coef.get(("k%d" % l, "s%d_%s" % (l, label[0]))) == sc["rows"][l][col]
                   for l in range(50))
        check(same, "big-M of farms in scenario l is demand[1] of design scenario l, exactly")

    # a drawn seed is echoed and replays
    st, _, b = post(d, "water-summer", {"scenarios": 5})
    if check(st == 200 and isinstance(b.get("seed"), int), "a drawn seed is echoed"):
        st, _, b2 = post(d, "water-summer", {"scenarios": 5, "seed": b["seed"]})
        check(st == 200 and b2["text"] == b["text"], "the echoed seed replays the text")

    st, _, b = post(d, "water-summer", {"scenarios": 2, "seed": 9007199254740991})
    check(st == 200 and b.get("seed") == 9007199254740991 and isinstance(b["seed"], int),
          "the largest seed is echoed as an exact integer: %r" % (b.get("seed") if isinstance(b, dict) else b))
    st, _, g = post(d, "water-summer", {"scenarios": 200, "seed": 3, "form": "all", "confidence": 0.99})
    if check(st == 200, "all form: 200, got %d %r" % (st, g)):
        check(g["big_m"] is None and g["keep_at_least"] is None, "all form: no big-M, no keep row")
        check(" k0 " not in g["text"], "all form: no indicator column")
        eps = g["guarantee"]["epsilon"]
        # the binomial tail at eps equals beta = 0.01 (d = 4): summed directly
        from math import comb
        tail = sum(comb(200, i) * eps ** i * (1 - eps) ** (200 - i) for i in range(4))
        check(abs(tail - 0.01) < 1e-9, "all form: sum_{i<4} C(200,i) eps^i (1-eps)^(200-i) = 0.01 (%r)" % tail)
        check(g["guarantee"]["decisions"] == 4 and "integer" in g["guarantee"]["note"],
              "all form: d = 4 and the note on integer decisions")


def test_errors(d):
    def problem(body, status, pointer=None, name="water-summer", raw=None):
        if raw is not None:
            st, _, b = d.request("POST", "/v1/models/%s/sample-models" % name, raw,
                                 headers={"Content-Type": "application/json"})
        else:
            st, _, b = post(d, name, body)
        ok = st == status
        if ok and pointer is not None:
            ok = any(e.get("pointer") == pointer for e in b.get("errors", []))
        check(ok, "%r -> %d at %r, got %d %r" % (body if raw is None else raw, status, pointer, st, b))
        return b

    problem({"scenarios": 0}, 400, "/scenarios")
    problem({}, 400, "/scenarios")
    problem({"scenarios": 5, "form": "half"}, 400, "/form")
    problem({"scenarios": 5, "target": 1.5}, 400, "/target")
    problem({"scenarios": 5, "seed": -1}, 400, "/seed")
    problem({"scenarios": 5, "shuffle": True}, 400, "/shuffle")
    problem(None, 400, raw="{\"scenarios\": ")
    problem(None, 400, raw="")
    b = problem({"scenarios": 100001}, 400, "/scenarios")
    check(isinstance(b, dict) and b.get("limit", {}).get("name") == "sample_model_scenarios",
          "the limit is named: %r" % b)
    problem({"scenarios": 5}, 404, name="no-such-model")
    b = problem({"scenarios": 5}, 422, "/constraints/0/require", name="pump-pair")
    if isinstance(b, dict):
        e = b["errors"][0]
        check(e.get("column") == 9 and "rate[0] * rate[1]" in e["message"] and "'flow'" in e["message"],
              "422 names the row, the column and the term: %r" % e)
    b = problem({"scenarios": 5}, 422, name="tank-fill")
    check("'fill' has no upper bound" in json.dumps(b), "422 names the decision without a bound")
    st, _, _ = post(d, "tank-fill", {"scenarios": 5, "form": "all"})
    check(st == 200, "the all form needs no bound: %d" % st)
    st, _, _ = d.request("GET", "/v1/models/water-summer/sample-models")
    check(st == 405, "GET on sample-models: 405, got %d" % st)
    st, _, lim = d.request("GET", "/v1/limits")
    names = {x["name"]: x["value"] for x in lim["limits"]} if st == 200 else {}
    check(names.get("sample_model_scenarios") == 100000 and "sample_model_rows" in names
          and "sample_model_text_bytes" in names, "GET /v1/limits lists the sample_model limits")
    st, _, _ = d.request("DELETE", "/v1/models/tank-fill")
    st, _, b = post(d, "tank-fill", {"scenarios": 5, "form": "all"})
    check(st == 410, "retired model: 410, got %d" % st)


def test_cli(tmp):
    p = subprocess.run([BIN, "sample-model", "--help"], capture_output=True, text=True)
    check(p.returncode == 0 and p.stdout.startswith("usage: feasgate sample-model"), "--help")
    mp = os.path.join(tmp, "pumps.json")
    with open(mp, "w") as f:
        json.dump(PUMPS, f)
    for args, what in (([mp], "--scenarios"), ([mp, "--scenarios", "x"], "--scenarios"),
                       ([mp, "--scenarios", "5", "--form", "some"], "--form"),
                       ([mp, "--scenarios", "5", "--bogus"], "--bogus")):
        p = subprocess.run([BIN, "sample-model"] + args, capture_output=True, text=True)
        check(p.returncode == 3 and what in p.stderr, "%r: exit 3 naming %s (%r)" % (args, what, p.stderr))
    p = subprocess.run([BIN, "sample-model", mp, "--scenarios", "5", "--seed", "1"],
                       capture_output=True, text=True)
    check(p.returncode == 3 and "not affine" in p.stderr and "/constraints/0/require" in p.stderr,
          "offline 422: exit 3 naming the row (%r)" % p.stderr)


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-smod-") as tmp:
        d = Daemon("sqlite:%s/s.db" % tmp, results=results)
        if check(d.address is not None, "daemon started; first line %r" % d.first):
            try:
                for m in (WATER, PUMPS, TANK):
                    st, _, raw = d.fetch("POST", "/v1/models", m)
                    check(st in (200, 201), "register %s: %d %s" % (m["name"], st, raw[:200]))
                test_answer(d, tmp)
                test_errors(d)
                test_cli(tmp)
            except Exception as e:  # a crash of the test is a failure
                check(False, "exception %r" % e)
        check(d.stop() == 0, "SIGTERM: exit status 0")
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
