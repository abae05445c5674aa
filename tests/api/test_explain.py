#!/usr/bin/python3
"""tests/api/test_explain.py -- one scenario of a check, explained:
GET /v1/checks/{id}/scenarios/{index} and `feasgate explain`.

Starts `feasgate serve` (apicommon.Daemon) on a loopback port with a
temporary SQLite store, registers a small model (three normal durations,
one normal extra, two definitions, a scalar row, a vector row and a range
row), runs a Monte Carlo check that asks for 40 failing scenarios, and
checks:
  - `holds` is false exactly for the indices listed in failing_scenarios
    (every index up to the last listed one), true for the others, and the
    rows each lists as violated are the rows with holds false;
  - `inputs` equal the scenarios endpoint's row for the same index of the
    validation stream and seed (the stream the check draws from);
  - `rows` and `definitions` recomputed here in Python from the returned
    inputs with the model's own expressions (closed form: the rows are
    sums and differences, the range row max(lo - e, e - hi));
  - the offline `feasgate explain` prints the same scenario;
  - an antithetic check's pair (2k, 2k+1) mirrors each normal input about
    its mean (the antithetic variate of a symmetric law, common practice);
  - a Latin hypercube check is answered 422; an index at or beyond samples
    and a non-numeric index 400 naming /index; an unknown check 404;
  - failing_scenarios_count above the limit is a 400 naming the limit,
    which GET /v1/limits lists;
  - a comparison with "explain": true gives each candidate the drivers
    of the plain check of its decision and seed;
  - after a second version of the model (other means) is registered, an
    earlier check's scenarios are unchanged (the stored version is used).

Standard library (plus apicommon's jsonschema checks of every answer).
Prints one line per failed check and "N passed, N failed" last; exits
non-zero on any failure.
"""
import json
import os
import subprocess
import sys
import tempfile

from apicommon import BIN, Daemon, Results

results = Results()
check = results.check

MEANS = [2.0, 3.0, 4.0]
MODEL = {
    "format": 1,
    "name": "explain-api",
    "decisions": [{"name": "cap"}],
    "uncertain": [
        {"name": "dur", "size": 3,
         "distribution": {"family": "normal", "mean": MEANS, "sd": 1}},
        {"name": "extra", "distribution": {"family": "normal", "mean": 0, "sd": 1}},
    ],
    "definitions": [
        {"name": "total", "value": "sum(dur) + extra"},
        {"name": "twice", "value": "2 * dur"},
    ],
    "constraints": [
        {"name": "fits", "require": "total <= cap"},
        {"name": "each", "require": "dur <= 5"},
        {"name": "band", "require": "-2.5 <= extra <= 2.5"},
    ],
}
SEED = 20261202
REQUEST = {"decision": {"cap": 11}, "samples": 3000, "seed": SEED,
           "failing_scenarios_count": 40}


def close(a, b, tol=1e-12):
    return abs(a - b) <= tol * max(1.0, abs(a), abs(b))


def expected_rows(inp):
    """The model's rows from the inputs (same expressions, in Python)."""
    dur, extra = inp["dur"], inp["extra"]
    total = dur[0] + dur[1] + dur[2] + extra
    rows = [("fits", total - 11)]
    rows += [("each[%d]" % i, dur[i] - 5) for i in range(3)]
    rows.append(("band", max(-2.5 - extra, extra - 2.5)))
    return rows, {"total": total, "twice": [2 * x for x in dur]}


def explain(d, cid, i):
    return d.request("GET", "/v1/checks/%s/scenarios/%s" % (cid, i))


def test_monte_carlo(d, tmp):
    st, _, res = d.request("POST", "/v1/models/explain-api/checks", REQUEST)
    if not check(st == 201 and isinstance(res, dict), "check: 201, got %d" % st):
        return
    cid = res["id"]
    failing = {f["index"]: set(f["violated"]) for f in res["failing_scenarios"]}
    check(len(failing) == 40, "40 failing scenarios listed: %d" % len(failing))
    last = max(failing)
    seen_true = 0
    answers = {}
    for i in range(last + 1):
        st, _, b = explain(d, cid, i)
        if not check(st == 200, "explain %d: 200, got %d %r" % (i, st, b)):
            return
        if i in (0, last):
            answers[i] = b
        check(b["check"] == cid and b["index"] == i and b["seed"] == SEED
              and b["stream"] == "validation" and b["sampling"] == "monte_carlo",
              "explain %d: identity members %r" % (i, {k: b[k] for k in
                                                      ("index", "seed", "stream")}))
        check(b["holds"] == (i not in failing),
              "index %d: holds %s, listed as failing: %s" % (i, b["holds"], i in failing))
        broken = {r["name"] for r in b["rows"] if not r["holds"]}
        if i in failing:
            check(broken == failing[i], "index %d: rows not holding %r equal "
                  "violated %r" % (i, broken, failing[i]))
        else:
            seen_true += 1
            check(not broken, "index %d holds: no row fails" % i)
        rows, defs = expected_rows(b["inputs"])
        got = [(r["name"], r["excess"]) for r in b["rows"]]
        check([n for n, _ in got] == [n for n, _ in rows] and
              all(close(x, y) for (_, x), (_, y) in zip(got, rows)),
              "index %d: excess recomputed from the inputs %r vs %r" % (i, got, rows))
        check(all(r["holds"] == (r["excess"] <= 0) for r in b["rows"]),
              "index %d: holds is excess <= 0" % i)
        check(close(b["definitions"]["total"], defs["total"]) and
              all(close(x, y) for x, y in zip(b["definitions"]["twice"], defs["twice"])),
              "index %d: definitions %r vs %r" % (i, b["definitions"], defs))
        if i in (0, 3, 63, 64, last):
            st, _, s = d.request(
                "GET", "/v1/models/explain-api/scenarios?seed=%d&stream=validation"
                "&start=%d&count=1" % (SEED, i))
            flat = b["inputs"]["dur"] + [b["inputs"]["extra"]]
            check(st == 200 and s["rows"] == [flat],
                  "index %d: inputs equal the scenarios endpoint's validation "
                  "row %r vs %r" % (i, flat, s["rows"] if st == 200 else st))
    check(seen_true > 10, "some scenarios hold (%d)" % seen_true)

    # offline: the same scenario from the model and request files
    mp, rp = os.path.join(tmp, "m.json"), os.path.join(tmp, "r.json")
    with open(mp, "w") as f:
        json.dump(MODEL, f)
    with open(rp, "w") as f:
        json.dump(REQUEST, f)
    i = last
    out = subprocess.run([BIN, "explain", mp, rp, "--index", str(i)],
                         capture_output=True, text=True)
    st, _, b = explain(d, cid, i)
    if check(out.returncode == 0, "feasgate explain: exit 0, got %d %s" %
             (out.returncode, out.stderr)):
        off = json.loads(out.stdout)
        b.pop("check", None)
        check(off == b, "feasgate explain prints the daemon's scenario")
    out = subprocess.run([BIN, "explain", mp, rp, "--index", "3000"],
                         capture_output=True, text=True)
    check(out.returncode == 3 and "/index" in out.stderr,
          "feasgate explain beyond samples: exit 3 naming /index (%d %s)" %
          (out.returncode, out.stderr.strip()))

    # errors
    for idx in ("3000", "99999999999", "x1", "-1"):
        st, h, b = explain(d, cid, idx)
        check(st == 400 and "/index" in json.dumps(b),
              "index %s: 400 naming /index, got %d %r" % (idx, st, b))
    st, _, b = explain(d, "chk_00000000000000000000000000", 0)
    check(st == 404, "unknown check: 404, got %d" % st)
    return cid, answers


def test_new_version(d, cid, answers):
    """A later version of the model (other means) does not change an
    earlier check's scenarios: they come from the version it ran on."""
    moved = json.loads(json.dumps(MODEL))
    moved["uncertain"][0]["distribution"]["mean"] = [m + 10 for m in MEANS]
    st, _, b = d.request("POST", "/v1/models", moved)
    if not check(st in (200, 201) and b.get("version") == 2,
                 "a second version registers: %d %r" % (st, b.get("version"))):
        return
    for i, before in answers.items():
        st, _, now = explain(d, cid, i)
        check(st == 200 and now == before,
              "index %d after version 2: the same scenario as before" % i)


def test_other_designs(d):
    req = dict(REQUEST, sampling="antithetic", samples=1000)
    st, _, res = d.request("POST", "/v1/models/explain-api/checks", req)
    if check(st == 201, "antithetic check: 201, got %d" % st):
        for k in (0, 5, 200):
            _, _, a = explain(d, res["id"], 2 * k)
            st, _, b = explain(d, res["id"], 2 * k + 1)
            if check(st == 200 and b["sampling"] == "antithetic",
                     "antithetic explain: 200"):
                mirror = all(close(x - m, -(y - m), 1e-9) for x, y, m in
                             zip(a["inputs"]["dur"], b["inputs"]["dur"], MEANS))
                mirror = mirror and close(a["inputs"]["extra"],
                                          -b["inputs"]["extra"], 1e-9)
                check(mirror, "pair %d: inputs mirror about the means %r %r" %
                      (k, a["inputs"], b["inputs"]))
                rows, _ = expected_rows(b["inputs"])
                check(all(close(r["excess"], e) for r, (_, e) in zip(b["rows"], rows)),
                      "antithetic: excess recomputed from the inputs")
    # every sample of a small antithetic check: the scenarios that do not
    # hold are exactly the check's failures (samples - satisfied)
    req = dict(REQUEST, sampling="antithetic", samples=300, seed=9)
    st, _, res = d.request("POST", "/v1/models/explain-api/checks", req)
    if check(st == 201, "small antithetic check: 201, got %d" % st):
        fails = 0
        for i in range(res["joint"]["samples"]):
            st, _, b = explain(d, res["id"], i)
            fails += st == 200 and not b["holds"]
        j = res["joint"]
        check(fails == j["samples"] - j["satisfied"],
              "antithetic: %d explained failures = samples - satisfied = %d"
              % (fails, j["samples"] - j["satisfied"]))
    req = dict(REQUEST, sampling="latin_hypercube", samples=1024)
    st, _, res = d.request("POST", "/v1/models/explain-api/checks", req)
    if check(st == 201, "latin hypercube check: 201, got %d" % st):
        st, _, b = explain(d, res["id"], 0)
        check(st == 422 and "latin_hypercube" in b.get("detail", ""),
              "latin hypercube: 422 saying why, got %d %r" % (st, b))


def test_limit(d):
    st, _, b = d.request("POST", "/v1/models/explain-api/checks",
                         dict(REQUEST, failing_scenarios_count=101))
    check(st == 400 and b.get("limit", {}).get("name") == "failing_scenarios_count"
          and "/failing_scenarios_count" in json.dumps(b),
          "failing_scenarios_count 101: 400 naming the limit, got %d %r" % (st, b))
    st, _, b = d.request("GET", "/v1/limits")
    lim = {x["name"]: x["value"] for x in b["limits"]} if st == 200 else {}
    check(lim.get("failing_scenarios_count") == 100 and lim.get("failing_scenarios") == 5,
          "limits list failing_scenarios_count = 100 and failing_scenarios = 5")


def test_explain_cells(d):
    big = {"format": 1, "name": "explain-big", "decisions": [{"name": "cap"}],
           "uncertain": [{"name": "x", "size": 300, "distribution":
                          {"family": "normal", "mean": 0, "sd": 1}}],
           "constraints": [{"name": "each", "require": "x <= cap"}]}
    st, _, _ = d.request("POST", "/v1/models", big)
    if check(st in (200, 201), "register the 300 x 300 model: %d" % st):
        st, _, b = d.request("POST", "/v1/models/explain-big/checks",
                             {"decision": {"cap": 3}, "samples": 1000,
                              "explain": True})
        check(st == 400 and b.get("limit", {}).get("name") == "explain_cells"
              and "/explain" in json.dumps(b),
              "301 x 300 accumulators: 400 naming explain_cells, got %d %r" % (st, b))
        st, _, b = d.request("POST", "/v1/models/explain-big/checks",
                             {"decision": {"cap": 3}, "samples": 1000})
        check(st == 201, "the same check without explain runs: %d" % st)


def test_stopped_early(d):
    req = {"decision": {"cap": 40}, "samples": 200000, "seed": 8,
           "stop_early": True}
    st, _, res = d.request("POST", "/v1/models/explain-api/checks", req)
    if check(st == 201 and res.get("stopped_early") is True,
             "a check that stops early: %d %r" % (st, res.get("stopped_early"))):
        n = res["joint"]["samples"]
        st, _, b = explain(d, res["id"], n - 1)
        # whether that sample holds is the stream's business (it held
        # before the normals' stream changed, and fails after): the point
        # is that it is explained, with a verdict of its own
        check(st == 200 and isinstance(b.get("holds"), bool),
              "its last counted sample is explained: %d %r"
              % (st, b.get("holds") if isinstance(b, dict) else b))
        st, _, b = explain(d, res["id"], n)
        check(st == 400 and "/index" in json.dumps(b),
              "the first sample it did not count: 400 naming /index, got %d" % st)


def test_comparison_drivers(d):
    body = {"candidates": [{"label": "tight", "decision": {"cap": 10}},
                           {"label": "loose", "decision": {"cap": 12}}],
            "samples": 4000, "seed": 5, "explain": True}
    st, _, b = d.request("POST", "/v1/models/explain-api/comparisons", body)
    ok = st in (200, 201) and all(
        isinstance(c.get("joint", {}).get("drivers"), list) and
        all("drivers" in r for r in c["constraints"]) for c in b["candidates"])
    check(ok, "comparison with explain: every candidate has drivers (%d)" % st)
    if ok:
        # a candidate is a check on the comparison's seed: the same samples,
        # so the same drivers as the plain check of that decision
        for cand in b["candidates"]:
            cap = next(x["decision"]["cap"] for x in body["candidates"]
                       if x["label"] == cand["label"])
            st, _, one = d.request("POST", "/v1/models/explain-api/checks",
                                   {"decision": {"cap": cap}, "samples": 4000,
                                    "seed": 5, "explain": True})
            pairs = [(cand["joint"]["drivers"], one["joint"]["drivers"])]
            rows = {r["name"]: r["drivers"] for r in one["constraints"]}
            pairs += [(r["drivers"], rows.get(r["name"])) for r in cand["constraints"]]
            same = st == 201 and all(
                (x is None and y is None) or
                (x is not None and y is not None and len(x) == len(y) and
                 all(p["input"] == q["input"] and close(p["shift"], q["shift"], 1e-9)
                     for p, q in zip(x, y)))
                for x, y in pairs)
            check(same, "comparison candidate %s: drivers equal the check of "
                  "the same decision and seed" % cand["label"])
    st, _, b = d.request("POST", "/v1/models/explain-api/checks",
                         dict(REQUEST, explain="yes"))
    check(st == 400 and "/explain" in json.dumps(b),
          "explain must be a boolean: 400 naming /explain, got %d" % st)


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-explain-") as tmp:
        d = Daemon("sqlite:%s/s.db" % tmp, results=results)
        if check(d.address is not None, "daemon started; first line %r" % d.first):
            try:
                st, h, raw = d.fetch("POST", "/v1/models", MODEL)
                if check(st in (200, 201), "register: %d %s" % (st, raw[:300])):
                    first = test_monte_carlo(d, tmp)
                    test_other_designs(d)
                    test_limit(d)
                    test_comparison_drivers(d)
                    test_explain_cells(d)
                    test_stopped_early(d)
                    if first:
                        test_new_version(d, *first)  # last: moves the model on
            except Exception as e:  # a crash of the test is a failure
                check(False, "exception %r" % e)
        check(d.stop() == 0, "SIGTERM: exit status 0")
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
