#!/usr/bin/python3
"""tests/api/test_exact_only.py -- "exact": "only" through the daemon.

Starts `feasgate serve` (apicommon.Daemon, 2 workers, a temporary SQLite
store) and checks the life of an exact-only check:
  - POST .../checks with "exact": "only" answers 201 with status done,
    joint.samples 0, joint.exact set and a verdict; GET /v1/checks/{id}
    answers the same body from the store (row status and verdict in the
    SQLite file); the log has its "check" line with samples 0; /metrics
    counts it (feasgate_checks_total, verdicts, no samples simulated);
    GET /v1/checks?model= lists it;
  - detached: wait_s 0 answers 202 (or 201 when already done), and GET
    reaches done with the same figures;
  - a model that does not qualify: 400 whose error points into the model
    (the definition's expression and column of the non-affine product;
    the distribution of a gamma input), nothing recorded;
  - a large model (50 correlated normals, 250 rows: about a second of
    Genz lattice work) -- DELETE during the computation ends it
    `cancelled` within 0.5 s, and GET while it runs answers within 0.2 s;
    a daemon with --max-check-time 0.3 ends it `timed_out` well before
    the computation would have finished;
  - POST /v1/checks/{id}/replay of an exact-only check reproduces it;
  - comparisons do not take "exact" (400 at /exact).
The figures themselves are checked against SciPy in
tests/reference/test_exact_only.py.

Prints one line per failed check and "N passed, N failed" as the last line.
"""
import json
import sqlite3
import sys
import tempfile
import time

import numpy as np
from apicommon import Daemon, Results, is_problem

R = Results()
check = R.check

# u ~ N(10, 2^2), v ~ N(20, 3^2) independent; rows u <= cap[0], v <= cap[1]
MODEL = {
    "format": 1, "name": "tanks",
    "title": "Two holding tanks (invented figures)",
    "decisions": [{"name": "cap", "size": 2, "lower": 0, "upper": 100}],
    "uncertain": [{"name": "inflow", "size": 2, "distribution": {
        "family": "normal", "mean": [10, 20], "sd": [2, 3]}}],
    "constraints": [{"name": "holds", "require": "inflow <= cap"}],
}
CHECKS = "/v1/models/tanks/checks"

NOT_AFFINE = {
    "format": 1, "name": "tanks-product",
    "decisions": [{"name": "cap", "lower": 0, "upper": 100}],
    "uncertain": [{"name": "inflow", "size": 2, "distribution": {
        "family": "normal", "mean": [10, 20], "sd": [2, 3]}}],
    "definitions": [{"name": "load", "value": "inflow[0] * inflow[1] / 20"}],
    "constraints": [{"name": "fits", "require": "load <= cap"}],
}
NOT_NORMAL = {
    "format": 1, "name": "tanks-gamma",
    "decisions": [{"name": "cap", "lower": 0, "upper": 100}],
    "uncertain": [
        {"name": "inflow", "distribution": {"family": "normal", "mean": 10, "sd": 2}},
        {"name": "rain", "distribution": {"family": "gamma", "shape": 2, "scale": 1}}],
    "constraints": [{"name": "dry", "require": "inflow <= cap"},
                    {"name": "wet", "require": "inflow + rain <= cap + 5"}],
}


def big_model():
    """50 correlated normals, 250 one-sided rows of 5 terms each."""
    rng = np.random.default_rng(21)
    n, m = 50, 250
    B = rng.normal(size=(n, n)) * 0.3
    S = B @ B.T + np.eye(n)
    rows = []
    for i in range(m):
        cols = rng.choice(n, 5, replace=False)
        terms = " + ".join("%.4f*z[%d]" % (rng.normal(), j) for j in cols)
        rows.append({"name": "r%d" % i,
                     "require": "%s <= x + %.3f" % (terms, 6 + rng.random())})
    return {"format": 1, "name": "many-rows",
            "decisions": [{"name": "x", "lower": -10, "upper": 10}],
            "uncertain": [{"name": "z", "size": n, "distribution": {
                "family": "multivariate_normal", "mean": [0.0] * n,
                "covariance": S.tolist()}}],
            "constraints": rows}


def log_events(d, cid):
    out = []
    for line in list(d.lines):
        try:
            ev = json.loads(line)
        except ValueError:
            continue
        if ev.get("event") == "check" and ev.get("id") == cid:
            out.append(ev)
    return out


def metric(d, name, **labels):
    st, _, raw = d.raw("GET", "/metrics")
    want = name + ("{" + ",".join('%s="%s"' % kv for kv in sorted(labels.items()))
                   + "}" if labels else "")
    for line in raw.decode().split("\n"):
        if line.startswith(want + " "):
            return float(line.split(" ")[1])
    return 0.0


def strip(body):
    """The figures that must agree between two answers of one check."""
    j = dict(body["joint"])
    ex = dict(j.get("exact") or {})
    ex.pop("elapsed_ms", None)
    j["exact"] = ex
    return (body["status"], body["verdict"], json.dumps(j, sort_keys=True),
            [(r["name"], r["probability"]) for r in body["constraints"]])


def wait_done(d, cid, seconds):
    end = time.monotonic() + seconds
    while True:
        st, _, b = d.request("GET", "/v1/checks/%s" % cid)
        if not (isinstance(b, dict) and b.get("status") == "running") \
                or time.monotonic() > end:
            return st, b
        time.sleep(0.05)


def test_lifecycle(d, store):
    before_done = metric(d, "feasgate_checks_total", status="done")
    before_fail = metric(d, "feasgate_check_verdicts_total", verdict="fail")
    before_samples = metric(d, "feasgate_samples_simulated_total")
    # P = Phi(1.5) Phi(4/3) = 0.848 < 0.9: fail
    st, _, b = d.request("POST", CHECKS, {"decision": {"cap": [13, 24]},
                                          "seed": 5, "exact": "only",
                                          "label": "exact-only"})
    ok = check(st == 201 and isinstance(b, dict) and b.get("status") == "done",
               "exact-only check answered 201 done: %s %r" % (st, b))
    if not ok:
        return
    cid = b["id"]
    check(b["exact"] == "only" and b["joint"]["samples"] == 0
          and b["joint"]["satisfied"] == 0 and b["joint"]["std_error"] is None
          and b["samples_requested"] == 0,
          "joint.samples 0, std_error null: %r" % b["joint"])
    ex = b["joint"]["exact"]
    check(b["verdict"] == "fail" and ex["probability"] + ex["error"] < 0.9,
          "verdict fail from the exact probability: %r" % ex)
    check(b["joint"]["interval"]["method"] == "exact_error_bound"
          and abs(b["joint"]["interval"]["upper"]
                  - min(1, ex["probability"] + ex["error"])) < 1e-15,
          "interval is the exact probability +- its error: %r"
          % b["joint"]["interval"])
    st, _, g = d.request("GET", "/v1/checks/%s" % cid)
    check(st == 200 and strip(g) == strip(b),
          "GET answers the same figures: %s" % st)
    db = sqlite3.connect(store[len("sqlite:"):])
    row = db.execute("SELECT status, verdict, probability, lower, upper "
                     "FROM checks WHERE id = ?", (cid,)).fetchone()
    db.close()
    check(row is not None and row[0] == "done" and row[1] == "fail"
          and abs(row[2] - ex["probability"]) < 1e-12
          and abs(row[4] - (ex["probability"] + ex["error"])) < 1e-12,
          "recorded in the store with the exact figures: %r" % (row,))
    evs = log_events(d, cid)
    check(len(evs) == 1 and evs[0]["samples"] == 0
          and evs[0]["verdict"] == "fail" and evs[0]["status"] == "done",
          "one check log line, samples 0: %r" % evs)
    check(metric(d, "feasgate_checks_total", status="done") - before_done == 1
          and metric(d, "feasgate_check_verdicts_total", verdict="fail")
          - before_fail == 1
          and metric(d, "feasgate_samples_simulated_total") == before_samples,
          "metrics: one more done check and fail verdict, no samples")
    st, _, lst = d.request("GET", "/v1/checks?model=tanks")
    check(st == 200 and cid in json.dumps(lst), "listed under its model")

    # detached: wait_s 0
    st, _, b2 = d.request("POST", CHECKS, {"decision": {"cap": [17, 30]},
                                           "seed": 6, "exact": "only",
                                           "wait_s": 0})
    check(st in (201, 202), "wait_s 0: 201 or 202, got %s" % st)
    if isinstance(b2, dict) and "id" in b2:
        st, g2 = wait_done(d, b2["id"], 30)
        # P = Phi(3.5) Phi(10/3) = 0.99934 >= 0.9: pass
        check(st == 200 and g2.get("status") == "done"
              and g2.get("verdict") == "pass"
              and g2["joint"]["samples"] == 0,
              "the detached exact-only check ends done, pass: %r %r"
              % (g2.get("status"), g2.get("verdict")))

    # replay
    st, _, rp = d.request("POST", "/v1/checks/%s/replay" % cid, {})
    check(st in (200, 201) and isinstance(rp, dict)
          and rp.get("reproduced") is True,
          "replay of an exact-only check reproduces: %s %r" % (st, rp))


def test_refusals(d, store):
    for model in (NOT_AFFINE, NOT_NORMAL):
        st, _, _ = d.request("POST", "/v1/models", model)
        check(st == 201, "model %s registered: %s" % (model["name"], st))
    db = sqlite3.connect(store[len("sqlite:"):])
    n0 = db.execute("SELECT count(*) FROM checks").fetchone()[0]
    st, h, b = d.request("POST", "/v1/models/tanks-product/checks",
                         {"decision": {"cap": 20}, "exact": "only"})
    errs = b.get("errors", []) if isinstance(b, dict) else []
    check(is_problem(st, h, b, 400) and errs
          and errs[0]["pointer"] == "/definitions/0/value"
          and errs[0].get("column") == 11 and "fits" in errs[0]["message"]
          and "mul" in errs[0]["message"],
          "non-affine row: 400 at the product's column in the model: %r" % errs)
    st, h, b = d.request("POST", "/v1/models/tanks-gamma/checks",
                         {"decision": {"cap": 20}, "exact": "only"})
    errs = b.get("errors", []) if isinstance(b, dict) else []
    check(is_problem(st, h, b, 400) and errs
          and errs[0]["pointer"] == "/uncertain/1/distribution"
          and "wet" in errs[0]["message"] and "rain" in errs[0]["message"],
          "non-normal input: 400 at its distribution: %r" % errs)
    st, h, b = d.request("POST", CHECKS, {"decision": {"cap": [13, 24]},
                                          "exact": "only", "stop_early": True,
                                          "in_sample": {"seed": 1, "count": 10}})
    ptrs = sorted(e["pointer"] for e in b.get("errors", [])) \
        if isinstance(b, dict) else []
    check(is_problem(st, h, b, 400) and ptrs == ["/in_sample", "/stop_early"],
          "simulation-only members refused with exact only: %r" % ptrs)
    n1 = db.execute("SELECT count(*) FROM checks").fetchone()[0]
    db.close()
    check(n1 == n0, "refused checks are not recorded (%d -> %d)" % (n0, n1))
    # auto on a model that does not qualify: simulated, with the reason
    st, _, b = d.request("POST", "/v1/models/tanks-gamma/checks",
                         {"decision": {"cap": 20}, "samples": 4096, "seed": 2})
    ex = b.get("joint", {}).get("exact", {}) if isinstance(b, dict) else {}
    check(st == 201 and ex.get("probability") is None
          and "rain" in ex.get("not_applicable", ""),
          "auto: simulated, exact not applicable: %r" % ex)
    st, h, b = d.request("POST", "/v1/models/tanks/comparisons", {
        "candidates": [{"label": "a", "decision": {"cap": [13, 24]}},
                       {"label": "b", "decision": {"cap": [14, 24]}}],
        "samples": 4096, "exact": "only"})
    check(is_problem(st, h, b, 400)
          and any(e["pointer"] == "/exact" for e in b.get("errors", [])),
          "comparisons refuse exact: %s" % st)


def test_cancel(d):
    st, _, _ = d.request("POST", "/v1/models", big_model())
    check(st == 201, "large model registered: %s" % st)
    path = "/v1/models/many-rows/checks"
    # how long the whole computation takes here
    t0 = time.monotonic()
    st, _, full = d.request("POST", path, {"decision": {"x": 2}, "seed": 3,
                                           "exact": "only", "wait_s": 60})
    whole = time.monotonic() - t0
    check(st == 201 and full.get("status") == "done",
          "large exact-only check ends: %s %r" % (st, full.get("status")))
    print("large model: exact-only check %.2f s (exact %.0f ms)"
          % (whole, full.get("joint", {}).get("exact", {}).get("elapsed_ms", -1)),
          flush=True)
    if whole < 0.3:
        check(False, "the large model's exact path is too quick (%.2f s) to "
              "cancel in the middle" % whole)
        return
    st, _, b = d.request("POST", path, {"decision": {"x": 2}, "seed": 4,
                                        "exact": "only", "wait_s": 0})
    cid = b.get("id") if isinstance(b, dict) else None
    check(st == 202 and cid, "started detached: %s" % st)
    if not cid:
        return
    time.sleep(min(0.1, whole / 4))
    t1 = time.monotonic()
    st, _, g = d.request("GET", "/v1/checks/%s" % cid)
    tg = time.monotonic() - t1
    running = g.get("status") == "running"
    # the same GET of an ended check, as the yardstick of this machine now
    t3 = time.monotonic()
    d.request("GET", "/v1/checks/%s" % full.get("id"))
    base = time.monotonic() - t3
    check(st == 200 and running and tg < base + 0.2,
          "GET while the exact path computes: %s %s in %.3f s (an ended "
          "check's GET: %.3f s)" % (st, g.get("status"), tg, base))
    t2 = time.monotonic()
    st, _, c = d.request("DELETE", "/v1/checks/%s" % cid)
    tc = time.monotonic() - t2
    # promptly: well before the computation's own end (it ran `whole`
    # seconds uncancelled), and within half a second on an idle machine
    check(st == 200 and c.get("status") == "cancelled"
          and tc < max(0.5, whole / 2) and c.get("elapsed_ms", 1e9) < whole * 1000,
          "DELETE ends it cancelled promptly: %s %r in %.3f s (whole: %.2f s)"
          % (st, c.get("status"), tc, whole))
    check(c.get("verdict") is None
          and c["joint"]["exact"].get("stopped") is not None,
          "no verdict, joint.exact says it stopped: %r" % c["joint"].get("exact"))
    st, h, e = d.request("GET", "/v1/checks/%s/scenarios/0" % full.get("id"))
    check(is_problem(st, h, e, 400) and "0 samples" in json.dumps(e),
          "an exact-only check has no scenario to explain: %s" % st)
    return whole


def test_deadline(tmp, whole):
    # a deadline well inside the uncancelled run (0.3 s, or a fifth of the
    # run when that is shorter: the run took 0.3-0.4 s here, so a 0.3 s
    # deadline could fall after its end)
    limit = 0.3 if not whole else min(0.3, max(0.02, whole / 5))
    d = Daemon("sqlite:%s/deadline.db" % tmp, "--max-check-time",
               "%.3f" % limit, results=R)
    if not check(d.address is not None,
                 "daemon with --max-check-time %.3f" % limit):
        return
    try:
        d.request("POST", "/v1/models", big_model())
        t0 = time.monotonic()
        st, _, b = d.request("POST", "/v1/models/many-rows/checks",
                             {"decision": {"x": 2}, "seed": 3,
                              "exact": "only", "wait_s": 30})
        el = time.monotonic() - t0
        # timed_out (not done) shows the deadline stopped the computation:
        # an exact task that ran to its end would end the check done; and
        # promptly: within 1 s (the deadline plus the request and the
        # task's next poll, with room for a machine shared with other
        # jobs), or within 60% of the uncancelled run when the machine is
        # busier still
        check(isinstance(b, dict) and b.get("status") == "timed_out"
              and el < max(1.0, 0.6 * (whole or 0)),
              "deadline ends the exact computation: %s %r after %.2f s "
              "(whole: %s s)" % (st, b.get("status") if isinstance(b, dict)
                                 else b, el, whole))
    finally:
        d.stop()


def main():
    with tempfile.TemporaryDirectory() as tmp:
        store = "sqlite:%s/s.db" % tmp
        d = Daemon(store, results=R)
        if not check(d.address is not None, "daemon started"):
            return R.summary()
        whole = None
        try:
            st, _, _ = d.request("POST", "/v1/models", MODEL)
            check(st == 201, "model registered: %s" % st)
            test_lifecycle(d, store)
            test_refusals(d, store)
            whole = test_cancel(d)
        finally:
            d.stop()
        test_deadline(tmp, whole)
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
