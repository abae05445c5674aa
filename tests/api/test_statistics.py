#!/usr/bin/python3
"""tests/api/test_statistics.py -- sample sizes and comparisons over HTTP.

Starts `feasgate serve` on an ephemeral loopback port with a temporary
SQLite store (apicommon.Daemon) and exercises:
  - GET /v1/sample-size in its four forms, with the normal-approximation
    answers recomputed here from the standard library's NormalDist (the
    formulas of the sample-size section of the design notes), and 400
    problems for unknown, repeated, unreadable, ambiguous, missing,
    out-of-range and over-limit parameters;
  - POST /v1/models/{name}/comparisons: pairs counted on common scenarios
    (a_only + b_only + both + neither = n, difference = (a_only - b_only)/n
    = the difference of the two joint estimates), every candidate logged
    as a check, the same counts as a check made alone with the same seed,
    pairs in list order, a 504 naming the cancelled (and recorded) checks
    when the comparison outlives wait_s, and 400 / 404 problems for bad
    bodies and unknown models.

Standard library (plus apicommon's jsonschema checks of every answer).
Prints one line per failed check and
"N passed, N failed" as the last line; exits non-zero on any failure.
"""
import math
import os
import re
import time
import sys
import tempfile
import urllib.parse
from statistics import NormalDist

from apicommon import BIN, Daemon, Results, is_problem
from test_api import model_doc

results = Results()
check = results.check


def size(d, **params):
    return d.request("GET", "/v1/sample-size?" + urllib.parse.urlencode(params))


def z(q):
    return NormalDist().inv_cdf(q)


def near_ceil(n, value):
    """n is ceil(value), allowing one unit where value is within rounding
    of a whole number (two quantile routines may differ in the last bit)."""
    return value <= n + 1e-9 * n and n < value + 1 + 1e-9 * n


def test_sizes(d):
    st, h, b = size(d, half_width=0.002, confidence=0.95)
    ref = z(0.975) ** 2 * 0.25 / 0.002 ** 2
    check(st == 200 and b.get("method") == "normal_half_width"
          and near_ceil(b.get("samples", -1), ref),
          "half-width worst case: %s %r (ref %.3f)" % (st, b, ref))
    check(b.get("half_width") == 0.002 and b.get("confidence") == 0.95,
          "half-width: inputs echoed")
    st, h, b = size(d, half_width=0.002, confidence=0.95, probability=0.9)
    ref = z(0.975) ** 2 * 0.09 / 0.002 ** 2
    check(st == 200 and near_ceil(b.get("samples", -1), ref)
          and b.get("probability") == 0.9,
          "half-width p = 0.9: %r (ref %.3f)" % (b, ref))

    st, h, b = size(d, target=0.9, probability=0.93, confidence=0.95, power=0.9)
    ref = ((z(0.975) * math.sqrt(0.9 * 0.1) + z(0.9) * math.sqrt(0.93 * 0.07))
           / 0.03) ** 2
    check(st == 200 and b.get("method") == "normal_power"
          and near_ceil(b.get("samples", -1), ref),
          "power: %s %r (ref %.3f)" % (st, b, ref))

    st, h, b = size(d, epsilon=0.05, beta=1e-6, decisions=12)
    check(st == 200 and b.get("method") == "campi_garatti_2008"
          and isinstance(b.get("scenarios"), int) and b.get("bound", 1) <= 1e-6
          and b.get("decisions") == 12,
          "scenario size: %s %r" % (st, b))
    n2008 = b.get("scenarios", 0)
    st, h, b = size(d, epsilon=0.05, beta=1e-6, decisions=12, discarded=20)
    check(st == 200 and b.get("method") == "campi_garatti_2011"
          and b.get("scenarios", 0) > n2008 and b.get("discarded") == 20,
          "discarding scenarios needs more of them: %r" % b)
    st, h, b = size(d, scenarios=n2008, beta=1e-6, decisions=12)
    check(st == 200 and b.get("method") == "campi_garatti_2008"
          and 0 < b.get("epsilon", 1) <= 0.05 and b.get("scenarios") == n2008,
          "epsilon for the scenario size found: %r" % b)

    bad = [
        ("nothing", {}, ["half_width", "epsilon"]),
        ("ambiguous", {"half_width": 0.01, "epsilon": 0.05, "confidence": 0.95},
         ["half_width", "epsilon"]),
        ("scenarios and epsilon", {"scenarios": 100, "epsilon": 0.05,
                                   "beta": 1e-6, "decisions": 3},
         ["epsilon", "scenarios"]),
        ("missing", {"epsilon": 0.05}, ["beta"]),
        ("missing power", {"target": 0.9, "probability": 0.93,
                           "confidence": 0.95}, ["power"]),
        ("stray", {"half_width": 0.01, "confidence": 0.95, "power": 0.9},
         ["power"]),
        ("unknown", {"half_width": 0.01, "confidence": 0.95, "colour": 1},
         ["colour"]),
        ("unreadable", {"half_width": "wide", "confidence": 0.95},
         ["half_width"]),
        ("out of range", {"epsilon": 0.05, "beta": 2, "decisions": 3},
         ["beta"]),
        ("below target", {"target": 0.9, "probability": 0.8,
                          "confidence": 0.95, "power": 0.9}, ["probability"]),
        ("fractional decisions", {"epsilon": 0.05, "beta": 1e-6,
                                  "decisions": 2.5}, ["decisions"]),
        ("too many decisions", {"epsilon": 0.05, "beta": 1e-6,
                                "decisions": 2000000},
         ["sample_size_decisions"]),
        ("too few scenarios", {"scenarios": 5, "beta": 1e-6, "decisions": 12},
         ["scenarios"]),
    ]
    for what, params, words in bad:
        st, h, b = size(d, **params)
        text = str(b.get("detail", "")) + " ".join(
            e.get("message", "") for e in b.get("errors", [])) \
            if isinstance(b, dict) else ""
        check(is_problem(st, h, b, 400) and all(w in text for w in words),
              "sample-size %s: 400 naming %s, got %s %r" % (what, words, st, b))
    st, h, b = d.request("GET", "/v1/sample-size?half_width=0.01&half_width=0.02"
                         "&confidence=0.95")
    check(is_problem(st, h, b, 400) and "more than once" in b.get("detail", ""),
          "repeated parameter: 400, got %s %r" % (st, b))
    st, h, b = d.request("POST", "/v1/sample-size", {})
    check(is_problem(st, h, b, 405), "POST sample-size: 405, got %s" % st)


A = {"x": 1, "y": [1, 2]}   # holds iff -3 <= u <= 2
B = {"x": 2, "y": [1, 2]}   # holds iff -3 <= u <= 1: never where A fails
C = {"x": 0, "y": [3, 3]}   # holds iff 0 <= u <= 3


def test_comparisons(d):
    name = "stat-model"
    st, h, b = d.request("POST", "/v1/models", model_doc(name))
    check(st in (200, 201), "register: %s" % st)
    body = {"candidates": [{"label": "a", "decision": A},
                           {"label": "b", "decision": B}],
            "samples": 20000, "seed": 77, "confidence": 0.95}
    st, h, b = d.request("POST", "/v1/models/%s/comparisons" % name, body)
    if not check(st == 200 and isinstance(b, dict),
                 "comparison: 200, got %s %r" % (st, b)):
        return
    cands, pairs = b.get("candidates", []), b.get("pairs", [])
    check(len(cands) == 2 and [c.get("label") for c in cands] == ["a", "b"],
          "two candidates with their labels")
    check(len(pairs) == 1 and pairs[0].get("a") == "a"
          and pairs[0].get("b") == "b", "one pair, a before b: %r" % pairs)
    pr = pairs[0] if pairs else {}
    n = 20000
    total = sum(pr.get(k, 0) for k in ("a_only", "b_only", "both", "neither"))
    check(total == n, "cells add up to n: %d" % total)
    check(pr.get("b_only") == 0 and pr.get("a_only", 0) > 0,
          "B holds only where A holds (b_only 0): %r" % pr)
    ka = cands[0]["joint"]["satisfied"]
    kb = cands[1]["joint"]["satisfied"]
    check(pr.get("both") == kb and pr.get("both", 0) + pr.get("a_only", 0) == ka,
          "cells agree with each candidate's count: %r, %d, %d" % (pr, ka, kb))
    diff = (pr.get("a_only", 0) - pr.get("b_only", 0)) / n
    check(abs(pr.get("difference", 9) - diff) < 1e-15
          and abs(diff - (ka - kb) / n) < 1e-15,
          "difference = (a_only - b_only)/n: %r" % pr)
    iv = pr.get("interval", {})
    check(iv.get("method") == "newcombe_paired"
          and iv.get("lower", 9) <= diff <= iv.get("upper", -9),
          "Newcombe interval holds the difference: %r" % iv)
    check(all(c.get("seed") == 77 and c.get("joint", {}).get("samples") == n
              for c in cands), "every candidate on seed 77, n samples")
    for c in cands:
        st, h, got = d.request("GET", "/v1/checks/%s" % c.get("id"))
        check(st == 200 and got.get("joint", {}).get("satisfied")
              == c["joint"]["satisfied"] and got.get("label") == c["label"],
              "candidate %s logged as check %s" % (c.get("label"), c.get("id")))
    st, h, alone = d.request("POST", "/v1/models/%s/checks" % name,
                             {"decision": A, "samples": n, "seed": 77})
    check(st == 201 and alone.get("joint", {}).get("satisfied") == ka,
          "the same check alone gives the same count: %s" % st)

    body3 = {"candidates": [{"label": "a", "decision": A},
                            {"label": "b", "decision": B},
                            {"label": "c", "decision": C}],
             "samples": 5000, "seed": 5}
    st, h, b = d.request("POST", "/v1/models/%s/comparisons" % name, body3)
    order = [(p.get("a"), p.get("b")) for p in b.get("pairs", [])] \
        if isinstance(b, dict) else []
    check(st == 200 and order == [("a", "b"), ("a", "c"), ("b", "c")],
          "three candidates: pairs in list order, got %s %r" % (st, order))
    st, h, b = d.request("POST", "/v1/models/%s/comparisons" % name,
                         {"candidates": body3["candidates"][:2],
                          "samples": 2000})
    check(st == 200 and isinstance(b.get("seed"), int),
          "seed drawn and reported when none is given: %s" % st)

    url = "/v1/models/%s/comparisons" % name
    many = [{"label": "c%d" % i, "decision": A} for i in range(17)]
    bad = [
        ("empty body", None, ""),
        ("malformed JSON", "{\"candidates\": [", ""),
        ("not an object", [1, 2], ""),
        ("no candidates", {"samples": 100}, "/candidates"),
        ("one candidate", {"candidates": [{"label": "a", "decision": A}]},
         "/candidates"),
        ("too many", {"candidates": many}, "/candidates"),
        ("same labels", {"candidates": [{"label": "a", "decision": A},
                                        {"label": "a", "decision": B}]},
         "/candidates/1/label"),
        ("no label", {"candidates": [{"label": "a", "decision": A},
                                     {"decision": B}]}, "/candidates/1/label"),
        ("bad decision", {"candidates": [{"label": "a", "decision": A},
                                         {"label": "b",
                                          "decision": {"x": 1, "y": [1]}}]},
         "/candidates/1/decision/y"),
        ("unknown candidate member", {"candidates": [
            {"label": "a", "decision": A, "colour": 1},
            {"label": "b", "decision": B}]}, "/candidates/0/colour"),
        ("unknown member", {"candidates": body3["candidates"], "decision": A},
         "/decision"),
        ("bad shared member", {"candidates": body3["candidates"],
                               "confidence": 2}, "/confidence"),
        ("stop_early", {"candidates": body3["candidates"], "stop_early": True},
         "/stop_early"),
        ("over the sample cap", {"candidates": body3["candidates"],
                                 "samples": 300000000}, "/samples"),
        # coupled designs void the paired interval's independence
        # (Newcombe 1998, Statistics in Medicine 17:2635)
        ("sampling antithetic", {"candidates": body3["candidates"],
                                 "samples": 4096, "sampling": "antithetic"},
         "/sampling"),
        ("sampling latin_hypercube", {"candidates": body3["candidates"],
                                      "samples": 4096,
                                      "sampling": "latin_hypercube"},
         "/sampling"),
        ("sampling sobol", {"candidates": body3["candidates"],
                            "samples": 4096, "sampling": "sobol"}, "/sampling"),
    ]
    for what, payload, pointer in bad:
        st, h, b = d.request("POST", url, payload)
        pointers = [e.get("pointer") for e in b.get("errors", [])] \
            if isinstance(b, dict) else []
        check(is_problem(st, h, b, 400) and (not pointer or pointer in pointers),
              "comparison %s: 400 at %r, got %s %r" % (what, pointer, st, b))
    st, h, b = d.request("POST", url, {"candidates": many})
    lim = b.get("limit") if isinstance(b, dict) else None
    check(isinstance(lim, dict) and lim.get("name") == "comparison_candidates"
          and lim.get("value") == 16,
          "17 candidates name the limit comparison_candidates = 16: %r" % b)
    st, h, b = d.request("POST", url, {"candidates": body3["candidates"],
                                       "samples": 300000000})
    lim = b.get("limit") if isinstance(b, dict) else None
    check(isinstance(lim, dict) and lim.get("name") == "comparison_samples",
          "over the sample cap names comparison_samples: %r" % b)
    # Not finished within wait_s: 202 with a comparison id and progress;
    # GET shows it running; DELETE cancels every candidate, each recorded
    # cancelled in the check log with the samples it had done.
    st, h, b = d.request("POST", url, {"candidates": body3["candidates"][:2],
                                       "samples": 200000000, "seed": 9,
                                       "wait_s": 0.3})
    cmp_id = b.get("id", "") if isinstance(b, dict) else ""
    check(st == 202 and cmp_id.startswith("cmp_")
          and b.get("status") == "running"
          and h.get("location") == "/v1/comparisons/" + cmp_id
          and isinstance(b.get("progress"), dict),
          "a comparison past wait_s: 202 with id, Location and progress, "
          "got %s %r" % (st, b if st != 202 else cmp_id))
    ids = [c.get("id") for c in b.get("candidates", [])] \
        if isinstance(b, dict) else []
    check(len(ids) == 2 and all(i and i.startswith("chk_") for i in ids),
          "its two candidates are checks: %r" % ids)
    st, h, got = d.request("GET", "/v1/comparisons/" + cmp_id)
    check(st == 200 and got.get("status") == "running"
          and got.get("progress", {}).get("samples_total") == 400000000,
          "GET while running: progress over both candidates, got %s %r"
          % (st, got.get("progress") if isinstance(got, dict) else got))
    st, h, got = d.request("DELETE", "/v1/comparisons/" + cmp_id)
    check(st == 200 and got.get("status") == "cancelled"
          and got.get("pairs") == [],
          "DELETE: 200, cancelled, no pairs, got %s %r"
          % (st, got.get("status") if isinstance(got, dict) else got))
    for cid in ids:
        st, h, got = d.request("GET", "/v1/checks/%s" % cid)
        done = got.get("joint", {}).get("samples", -1) \
            if isinstance(got, dict) else -1
        check(st == 200 and got.get("status") == "cancelled"
              and 0 <= done < 200000000,
              "its check %s is recorded cancelled with partial counts: %s %r"
              % (cid, got.get("status") if isinstance(got, dict) else st, done))
    st, h, got = d.request("DELETE", "/v1/comparisons/" + cmp_id)
    check(is_problem(st, h, got, 409), "DELETE again: 409, got %s" % st)
    st, h, got = d.request("GET", "/v1/comparisons/" + cmp_id)
    check(st == 200 and got.get("status") == "cancelled",
          "GET after the end: cancelled, got %s" % st)
    st, h, got = d.request("GET", "/v1/comparisons/cmp_0000000000000000000000000Z")
    check(is_problem(st, h, got, 404), "unknown comparison: 404, got %s" % st)

    # Detached, then done: the result equals the one given at once.
    st, h, b = d.request("POST", url, dict(body, wait_s=0))
    cmp_id = b.get("id", "") if isinstance(b, dict) else ""
    check(st in (200, 202) and cmp_id.startswith("cmp_"),
          "comparison with wait_s 0: 200 or 202 with an id, got %s" % st)
    got = b
    for _ in range(400):
        if not isinstance(got, dict) or got.get("status") != "running":
            break
        time.sleep(0.05)
        st, h, got = d.request("GET", "/v1/comparisons/" + cmp_id)
    pairs = got.get("pairs", []) if isinstance(got, dict) else []
    check(isinstance(got, dict) and got.get("status") == "done"
          and len(pairs) == 1 and pairs[0].get("a_only") == pr.get("a_only")
          and pairs[0].get("both") == pr.get("both"),
          "the detached comparison ends done with the same pair counts "
          "(same seed): %r" % pairs)
    st, h, b = d.request("POST", "/v1/models/no-such-model/comparisons", body)
    check(is_problem(st, h, b, 404), "unknown model: 404, got %s" % st)
    st, h, b = d.request("GET", url)
    check(is_problem(st, h, b, 405), "GET comparisons: 405, got %s" % st)
    st, h, b = d.request("POST", url, {"candidates": body3["candidates"],
                                       "expect_digest": "sha256:" + "0" * 64})
    check(is_problem(st, h, b, 409), "wrong expect_digest: 409, got %s" % st)


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-stat-") as tmp:
        # Every answer is also checked against its schema in schemas/.
        d = Daemon("sqlite:%s/stat.db" % tmp, results=results)
        if check(d.address is not None, "daemon started"):
            test_sizes(d)
            test_comparisons(d)
            st, h, b = d.request("GET", "/v1/health")
            check(st == 200, "daemon still healthy")
        check(d.stop() == 0, "daemon stops cleanly")
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
