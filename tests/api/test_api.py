#!/usr/bin/python3
"""tests/api/test_api.py -- the feasgate daemon driven over real HTTP.

Starts `feasgate serve` (apicommon.Daemon) on an ephemeral loopback port
with a temporary SQLite store (the binary comes from $FEASGATE_BIN), reads
the bound address from the first line of its standard error, and exercises
the API contract: model registration and versions, synchronous and
asynchronous checks, the check log with filters and paging, problem
documents for bad input, routing errors, body limits, retiring, start-up
settings, a clean stop on SIGTERM, the store surviving a restart, and a
SIGKILL while a check runs (answered checks kept, the running one marked
interrupted, the file intact). Every answer body is checked against its
schema in schemas/ (apicommon.py; needs python3-jsonschema).

Prints one line per failed check and
"N passed, N failed" as the last line; exits non-zero on any failure.
"""
import http.client
import json
import os
import re
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time

import apicommon
from apicommon import BIN, Results, is_problem

# Large enough that a check asked to wait 0 s is still running when
# answered (202), small enough to end within seconds on 2 cores.
ASYNC_SAMPLES = 20000000

results = Results()
check = results.check


class Daemon(apicommon.Daemon):
    """apicommon's daemon, every answer checked against its schema and
    counted in this script's results."""

    def __init__(self, store_url, *extra, env=None):
        super().__init__(store_url, *extra, env=env, results=results)


def model_doc(name, bound=3, title="API test model"):
    return {
        "format": 1,
        "name": name,
        "title": title,
        "decisions": [{"name": "x", "lower": 0, "upper": 10},
                      {"name": "y", "size": 2, "lower": 0, "upper": 10}],
        "uncertain": [{"name": "u", "distribution":
                       {"family": "normal", "mean": 0, "sd": 1}}],
        "constraints": [
            {"name": "first", "require": "u + x <= %g" % bound},
            {"name": "second", "require": "y[0] + y[1] - u <= 6"}],
    }


DIGEST = re.compile(r"^sha256:[0-9a-f]{64}$")
CHECK_ID = re.compile(r"^chk_[0-9A-HJKMNP-TV-Z]{26}$")
CANDIDATE = {"x": 1, "y": [1, 2]}


def test_models(d):
    name = "api-model"
    doc = model_doc(name)
    st, h, b = d.request("POST", "/v1/models", doc)
    check(st == 201, "register: 201, got %s %s" % (st, b))
    check(h.get("location") == "/v1/models/%s/versions/1" % name,
          "register: Location, got %r" % h.get("location"))
    check(h.get("content-type", "").startswith("application/json"),
          "register: content type json")
    ok = isinstance(b, dict)
    check(ok and b.get("name") == name and b.get("version") == 1,
          "register: name and version 1")
    d1 = b.get("digest", "") if ok else ""
    check(DIGEST.match(d1) is not None, "register: digest form, got %r" % d1)
    check(ok and isinstance(b.get("created_at"), str), "register: created_at")
    check(ok and isinstance(b.get("summary"), dict)
          and b["summary"].get("decisions") == 2,
          "register: summary counts decisions, got %r" % (b.get("summary"),))

    # same document, other spacing and key order: same digest, 200
    text = json.dumps(dict(reversed(list(doc.items()))), indent=3)
    st, h, b = d.request("POST", "/v1/models", text)
    check(st == 200, "register again: 200, got %s" % st)
    check(isinstance(b, dict) and b.get("digest") == d1
          and b.get("version") == 1, "register again: same digest, version 1")

    # changed document: version 2
    st, h, b = d.request("POST", "/v1/models", model_doc(name, bound=2.5))
    check(st == 201, "changed document: 201, got %s" % st)
    d2 = b.get("digest") if isinstance(b, dict) else None
    check(isinstance(b, dict) and b.get("version") == 2 and d2 != d1,
          "changed document: version 2 with a new digest")
    check(h.get("location") == "/v1/models/%s/versions/2" % name,
          "changed document: Location")

    st, h, b = d.request("GET", "/v1/models/" + name)
    check(st == 200 and b.get("version") == 2 and b.get("digest") == d2,
          "get model: latest version")
    check(isinstance(b.get("document"), dict)
          and b["document"].get("name") == name
          and b["document"]["constraints"][0]["require"] == "u + x <= 2.5",
          "get model: document")
    check(isinstance(b.get("summary"), dict), "get model: summary")
    for field in ("name", "version", "digest", "created_at", "document",
                  "summary"):
        check(field in b, "get model: field %s" % field)
    st, h, b = d.request("GET", "/v1/models/%s/versions/1" % name)
    check(st == 200 and b.get("version") == 1 and b.get("digest") == d1,
          "get version 1")
    st, h, b = d.request("GET", "/v1/models/%s/versions/7" % name)
    check(is_problem(st, h, b, 404), "absent version: 404 problem")
    st, h, b = d.request("GET", "/v1/models/no-such-model")
    check(is_problem(st, h, b, 404), "absent model: 404 problem")

    st, h, b = d.request("GET", "/v1/models")
    entries = [m for m in b.get("models", []) if m.get("name") == name] \
        if isinstance(b, dict) else []
    check(st == 200 and len(entries) == 1, "list models: one entry")
    if entries:
        e = entries[0]
        check(e.get("version") == 2 and e.get("digest") == d2
              and e.get("title") == "API test model"
              and "created_at" in e, "list models: latest version fields")
    return name, d1, d2


def check_body_ok(b, samples, what):
    ok = isinstance(b, dict)
    check(ok and CHECK_ID.match(b.get("id", "")) is not None,
          what + ": id form, got %r" % (b.get("id") if ok else b))
    check(ok and b.get("status") == "done",
          what + ": status done, got %r" % (b.get("status") if ok else None))
    check(ok and b.get("verdict") in ("pass", "fail", "inconclusive"),
          what + ": verdict")
    joint = b.get("joint") if ok else None
    check(isinstance(joint, dict) and joint.get("samples") == samples,
          what + ": joint.samples == %d, got %r" % (samples, joint))
    if isinstance(joint, dict):
        iv = joint.get("interval") or {}
        p = joint.get("probability")
        check(isinstance(p, (int, float)) and isinstance(iv.get("lower"),
                                                         (int, float))
              and iv["lower"] <= p <= iv["upper"],
              what + ": lower <= probability <= upper, got %r" % joint)
        check(isinstance(joint.get("satisfied"), int)
              and 0 <= joint["satisfied"] <= samples,
              what + ": satisfied count")
    rows = b.get("constraints") if ok else None
    check(isinstance(rows, list) and len(rows) == 2
          and all("name" in r and "probability" in r for r in rows),
          what + ": constraint rows")
    check(ok and isinstance(b.get("seed"), int), what + ": seed reported")
    check(ok and isinstance(b.get("model"), dict)
          and DIGEST.match(b["model"].get("digest", "")) is not None,
          what + ": model digest")


def test_checks(d, name, d1, d2):
    req = {"decision": CANDIDATE, "samples": 20000, "seed": 7,
           "label": "api first"}
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name, req)
    check(st == 201, "check: 201, got %s %s" % (st, b if st != 201 else ""))
    check_body_ok(b, 20000, "check")
    cid = b.get("id") if isinstance(b, dict) else None
    check(h.get("location") == "/v1/checks/%s" % cid, "check: Location")
    check(isinstance(b, dict) and b.get("seed") == 7
          and b.get("model", {}).get("version") == 2
          and b.get("model", {}).get("digest") == d2
          and b.get("label") == "api first",
          "check: seed, model version, label echoed")

    st, h, g = d.request("GET", "/v1/checks/%s" % cid)
    check(st == 200 and g == b, "get check equals the answer")

    # same request again: same counts (reproducible)
    st, h, b2 = d.request("POST", "/v1/models/%s/checks" % name, req)
    check(st == 201 and isinstance(b2, dict)
          and b2.get("joint", {}).get("satisfied")
          == b.get("joint", {}).get("satisfied")
          and b2.get("id") != cid, "same seed: same counts, new id")

    # a specific version; a drawn seed; a pinned digest
    st, h, b3 = d.request("POST", "/v1/models/%s/versions/1/checks" % name,
                          {"decision": CANDIDATE, "samples": 5000,
                           "expect_digest": d1, "label": "api v1"})
    check(st == 201 and b3.get("model", {}).get("version") == 1,
          "check version 1: 201, got %s" % st)
    seed = b3.get("seed")
    check(isinstance(seed, (int, float)) and seed == int(seed)
          and 0 <= seed <= 2 ** 53 - 1, "drawn seed reported, got %r" % seed)
    st, h, b4 = d.request("POST", "/v1/models/%s/checks" % name,
                          {"decision": CANDIDATE, "samples": 5000,
                           "expect_digest": d1})
    check(is_problem(st, h, b4, 409), "expect_digest mismatch: 409, got %s"
          % st)
    st, h, b4 = d.request("POST", "/v1/models/%s/versions/9/checks" % name,
                          {"decision": CANDIDATE})
    check(is_problem(st, h, b4, 404), "check of an absent version: 404")

    # a few checks at once
    results = []

    def one(i):
        results.append(d.request("POST", "/v1/models/%s/checks" % name,
                                 {"decision": CANDIDATE, "samples": 4096,
                                  "seed": 100 + i, "label": "api burst"}))
    threads = [threading.Thread(target=one, args=(i,)) for i in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    check(len(results) == 4 and all(r[0] == 201 for r in results),
          "four concurrent checks: all 201, got %s" % [r[0] for r in results])
    return cid


def test_list(d, name):
    # newest first, paged by 3 through the cursor
    st, h, b = d.request("GET", "/v1/checks?model=%s&limit=100" % name)
    check(st == 200 and isinstance(b.get("checks"), list), "list: 200")
    everything = b.get("checks", []) if isinstance(b, dict) else []
    check(len(everything) >= 7, "list: at least 7 checks, got %d"
          % len(everything))
    check(b.get("next") is None, "list: next null when all fit")
    ids = [c.get("id") for c in everything]
    check(ids == sorted(ids, reverse=True), "list: newest first (by id)")
    times = [c.get("created_at") for c in everything]
    check(times == sorted(times, reverse=True), "list: newest first (time)")
    if everything:
        s = everything[0]
        for field in ("id", "status", "model", "verdict", "joint",
                      "created_at", "label", "key"):
            check(field in s, "list summary: field %s" % field)
        j = s.get("joint") or {}
        check("probability" in j and "interval" in j,
              "list summary: joint probability and interval")
    paged, after, pages = [], None, 0
    while pages < 50:
        q = "/v1/checks?model=%s&limit=3" % name
        if after:
            q += "&after=" + after
        st, h, b = d.request("GET", q)
        if not check(st == 200, "page %d: 200, got %s %s" % (pages, st, b)):
            break
        pages += 1
        page = b.get("checks", [])
        check(len(page) <= 3, "page size <= limit")
        paged += [c["id"] for c in page]
        after = b.get("next")
        if after is None:
            break
        check(after == page[-1]["id"], "next is the last id of the page")
    check(paged == ids, "paging: pages join to the full list")
    check(pages == (len(ids) + 2) // 3, "paging: page count")

    st, h, b = d.request("GET", "/v1/checks?label=api%20burst")
    check(st == 200 and len(b.get("checks", [])) == 4, "filter by label")
    st, h, b = d.request("GET", "/v1/checks?verdict=pass&model=" + name)
    check(st == 200 and all(c.get("verdict") == "pass"
                            for c in b.get("checks", [])), "filter by verdict")
    st, h, b = d.request("GET", "/v1/checks?since=2999-01-01T00:00:00Z")
    check(st == 200 and b.get("checks") == [], "since in the future: none")
    st, h, b = d.request("GET", "/v1/checks?since=2000-01-01")
    check(st == 200 and len(b.get("checks", [])) >= 7, "since a date")
    for query, param in (("verdict=maybe", "verdict"), ("limit=0", "limit"),
                         ("limit=abc", "limit"), ("since=yesterday", "since"),
                         ("after=nonsense", "after"),
                         ("after=chk_00000000000000000000000000", "after"),
                         ("colour=red", "colour")):
        st, h, b = d.request("GET", "/v1/checks?" + query)
        check(is_problem(st, h, b, 400) and param in b.get("detail", ""),
              "bad query %s: 400 naming %s, got %s %s" % (query, param, st, b))


def test_bad_input(d, name):
    doc = model_doc("api-bad")
    doc["constraints"][0]["require"] = "u + nosuch <= 3"
    st, h, b = d.request("POST", "/v1/models", doc)
    check(is_problem(st, h, b, 400), "bad expression: 400 problem, got %s" % st)
    errs = b.get("errors") if isinstance(b, dict) else None
    check(isinstance(errs, list) and errs
          and errs[0].get("pointer") == "/constraints/0/require",
          "bad expression: pointer, got %r" % errs)
    check(isinstance(errs, list) and errs
          and isinstance(errs[0].get("column"), int) and errs[0]["column"] > 0,
          "bad expression: column > 0")

    st, h, b = d.request("POST", "/v1/models", '{"format": 1, "name": ')
    check(is_problem(st, h, b, 400), "malformed JSON: 400 problem")
    check(isinstance(b, dict) and isinstance(b.get("offset"), int)
          and b["offset"] >= 0,
          "malformed JSON: byte offset (offset), got %r" % b)
    st, h, b = d.request("POST", "/v1/models", "")
    check(is_problem(st, h, b, 400), "empty body: 400")

    st, h, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": {"x": 1, "y": [1, 2, 3]}})
    check(is_problem(st, h, b, 400), "wrong decision size: 400")
    text = json.dumps(b)
    check("/decision/y" in text or "'y'" in text,
          "wrong decision size: names y, got %s" % text)
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": {"x": 1}})
    check(is_problem(st, h, b, 400) and "y" in json.dumps(b),
          "missing decision: 400 naming it")
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name,
                         '{"decision": {"x": 1, "y": [1, 2]}')
    check(is_problem(st, h, b, 400) and isinstance(b.get("offset"), int),
          "malformed check body: byte offset")
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": CANDIDATE, "samples": 10 ** 12})
    check(is_problem(st, h, b, 400) and "limit" in b,
          "samples over the cap: 400 naming the limit, got %s" % b)

    st, h, b = d.request("GET", "/v1/nothing-here")
    check(is_problem(st, h, b, 404), "unknown route: 404 problem")
    st, h, b = d.request("PUT", "/v1/models")
    check(is_problem(st, h, b, 405), "wrong method: 405 problem")
    allow = h.get("allow", "")
    check("GET" in allow and "POST" in allow, "405: Allow header, got %r"
          % allow)
    st, h, b = d.request("DELETE", "/v1/health")
    check(st == 405 and "GET" in h.get("allow", ""), "DELETE health: 405")


def test_async(d, name):
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": CANDIDATE, "samples": ASYNC_SAMPLES,
                          "seed": 3, "wait_s": 0})
    check(st in (201, 202), "async check: 201 or 202, got %s" % st)
    cid = b.get("id") if isinstance(b, dict) else None
    check(h.get("location") == "/v1/checks/%s" % cid, "async: Location")
    if st == 202:
        check(b.get("status") == "running", "202 body: status running")
        deadline = time.time() + 120
        last = b
        while time.time() < deadline:
            st2, h2, last = d.request("GET", "/v1/checks/%s" % cid)
            if st2 != 200 or last.get("status") != "running":
                break
            check("progress" in last, "running check: progress")
            time.sleep(0.2)
        check(last.get("status") == "done", "async check ends done, got %r"
              % last.get("status"))
        check(last.get("joint", {}).get("samples") == ASYNC_SAMPLES,
              "async check: all samples")


def test_ops(d):
    st, h, b = d.request("GET", "/v1/health")
    check(st == 200 and b == {"status": "ok"}, "health")
    st, h, b = d.request("GET", "/v1/limits")
    names = {e.get("name"): e.get("value") for e in b.get("limits", [])} \
        if isinstance(b, dict) else {}
    check(st == 200 and "max_body" in names and "max_samples" in names
          and "expression_depth" in names, "limits: named values")


def test_retire(d, name, old_check):
    st, h, b = d.request("DELETE", "/v1/models/" + name)
    check(st == 204, "retire: 204, got %s" % st)
    st, h, b = d.request("POST", "/v1/models/%s/checks" % name,
                         {"decision": CANDIDATE})
    check(is_problem(st, h, b, 410), "check of a retired model: 410")
    st, h, b = d.request("GET", "/v1/models/" + name)
    check(st == 200 and b.get("retired") is True, "retired model readable")
    st, h, b = d.request("GET", "/v1/checks/" + old_check)
    check(st == 200, "checks of a retired model readable")
    st, h, b = d.request("GET", "/v1/models")
    check(st == 200 and all(m.get("name") != name
                            for m in b.get("models", [])),
          "retired model not listed")
    st, h, b = d.request("DELETE", "/v1/models/no-such-model")
    check(is_problem(st, h, b, 404), "retire an absent model: 404")
    st, h, b = d.request("GET", "/v1/health")
    check(st == 200, "still healthy")


def test_body_limit(tmp):
    d = Daemon("sqlite:%s/limit.db" % tmp, "--max-body", "2048")
    if not check(d.address is not None, "small-body daemon started"):
        d.stop()
        return
    # declared too large: refused before the body is sent
    conn = http.client.HTTPConnection(d.host, d.port, timeout=30)
    conn.putrequest("POST", "/v1/models")
    conn.putheader("Content-Type", "application/json")
    conn.putheader("Content-Length", "1000000")
    conn.endheaders()
    resp = conn.getresponse()
    raw = resp.read()
    conn.close()
    try:
        b = json.loads(raw)
    except ValueError:
        b = None
    check(resp.status == 413, "Content-Length over max-body: 413, got %s"
          % resp.status)
    check(isinstance(b, dict) and b.get("limit", {}).get("name") == "max_body"
          and b["limit"].get("value") == 2048, "413 names the limit")
    # sent in full: refused too
    big = json.dumps(model_doc("api-big", title="x" * 5000))
    st, h, b = d.request("POST", "/v1/models", big)
    check(is_problem(st, h, b, 413), "oversize body: 413 problem, got %s" % st)

    # chunked, no length: refused once the bytes exceed the limit
    def chunks():
        for _ in range(8):
            yield b" " * 1024
    conn = http.client.HTTPConnection(d.host, d.port, timeout=30)
    status = None
    try:
        conn.request("POST", "/v1/models", body=chunks(),
                     headers={"Content-Type": "application/json"},
                     encode_chunked=True)
        resp = conn.getresponse()
        resp.read()
        status = resp.status
    except (ConnectionError, http.client.HTTPException) as e:
        status = "connection error %s" % e
    conn.close()
    check(status == 413, "chunked oversize body: 413, got %s" % status)
    st, h, b = d.request("POST", "/v1/models", model_doc("api-small"))
    check(st == 201, "body under the limit still served: 201, got %s" % st)
    st, h, b = d.request("GET", "/v1/health")
    check(st == 200, "healthy after oversize bodies")
    check(d.stop() == 0, "small-body daemon: exit 0 on SIGTERM")


def test_usage(tmp):
    def run(args, env_extra=None):
        env = dict(os.environ)
        env.update(env_extra or {})
        p = subprocess.run([BIN, "serve"] + args, env=env,
                           stdin=subprocess.DEVNULL, capture_output=True,
                           timeout=30)
        return p.returncode, p.stderr.decode("utf-8", "replace")
    store = "sqlite:%s/usage.db" % tmp
    for args, word in ((["--workers", "0"], "--workers"),
                       (["--workers", "many"], "--workers"),
                       (["--listen", "127.0.0.1:99999"], "--listen"),
                       (["--max-body", "0"], "--max-body"),
                       (["--chunk", "1000"], "--chunk"),
                       (["--max-wait", "-1"], "--max-wait"),
                       (["--log-level", "loud"], "--log-level"),
                       (["--max-connections", "0"], "--max-connections"),
                       (["--max-connections", "65537"], "--max-connections"),
                       (["--max-connections-per-client", "0"],
                        "--max-connections-per-client"),
                       (["--max-connections", "10",
                         "--max-connections-per-client", "11"],
                        "--max-connections-per-client"),
                       (["--no-such-flag"], "--no-such-flag"),
                       (["--store"], "--store")):
        code, err = run(["--store", store] + args)
        check(code == 3 and word in err,
              "bad usage %s: exit 3 naming %s, got %s %r" % (args, word, code,
                                                            err[-200:]))
    code, err = run(["--store", store], {"FEASGATE_WORKERS": "abc"})
    check(code == 3 and "FEASGATE_WORKERS" in err,
          "bad environment twin: exit 3 naming it, got %s" % code)
    # the flag wins over its twin, even a bad one
    env = dict(os.environ, FEASGATE_WORKERS="abc", FEASGATE_LISTEN="bad")
    d = Daemon(store, env=env)
    check(d.address is not None, "flag wins over a bad twin")
    if d.address:
        check(d.request("GET", "/v1/health")[0] == 200, "twin test healthy")
    check(d.stop() == 0, "twin test: exit 0")


def test_overload(tmp):
    """One worker, room for one check: the next is a 503 with Retry-After
    and leaves no record."""
    d = Daemon("sqlite:%s/busy.db" % tmp, "--queue", "1", "--grace", "0")
    if not check(d.address is not None, "busy daemon started"):
        d.stop()
        return
    d.request("POST", "/v1/models", model_doc("api-busy"))
    st, h, b = d.request("POST", "/v1/models/api-busy/checks",
                         {"decision": CANDIDATE, "samples": 900000000,
                          "wait_s": 0})
    check(st == 202, "busy: first long check 202, got %s" % st)
    st, h, b = d.request("POST", "/v1/models/api-busy/checks",
                         {"decision": CANDIDATE, "samples": 1000})
    check(is_problem(st, h, b, 503), "queue full: 503 problem, got %s" % st)
    check(h.get("retry-after", "").isdigit(), "503: Retry-After header")
    st, h, b = d.request("GET", "/v1/ready")
    check(is_problem(st, h, b, 503), "ready: 503 while the queue is full")
    st, h, b = d.request("GET", "/v1/checks?model=api-busy")
    check(st == 200 and len(b.get("checks", [])) == 1,
          "refused check left no record")
    st, h, b = d.request("GET", "/v1/health")
    check(st == 200, "busy daemon healthy")
    check(d.stop() == 0, "busy daemon: exit 0 (running check cancelled)")
    d = Daemon("sqlite:%s/busy.db" % tmp)
    if d.address:
        st, h, b = d.request("GET", "/v1/checks?model=api-busy")
        rows = b.get("checks", []) if isinstance(b, dict) else []
        check(len(rows) == 1 and rows[0].get("status") == "cancelled",
              "check cancelled at shutdown is recorded cancelled, got %r"
              % [r.get("status") for r in rows])
    d.stop()


def test_crash(tmp):
    """SIGKILL while a check runs: answered checks stay, the running one
    becomes interrupted at the next start, the file is intact."""
    path = "%s/crash.db" % tmp
    d = Daemon("sqlite:" + path)
    if not check(d.address is not None, "crash daemon started"):
        d.stop()
        return
    d.request("POST", "/v1/models", model_doc("api-crash"))
    st, h, done = d.request("POST", "/v1/models/api-crash/checks",
                            {"decision": CANDIDATE, "samples": 10000,
                             "seed": 1})
    check(st == 201, "crash: finished check 201")
    st, h, running = d.request("POST", "/v1/models/api-crash/checks",
                               {"decision": CANDIDATE, "samples": 900000000,
                                "seed": 2, "wait_s": 0})
    check(st == 202, "crash: long check 202, got %s" % st)
    d.proc.kill()
    d.proc.wait()
    d.thread.join(5)
    d = Daemon("sqlite:" + path)
    if check(d.address is not None, "restart after SIGKILL"):
        st, h, b = d.request("GET", "/v1/checks/" + done.get("id", "?"))
        check(st == 200 and b == done, "answered check kept across a crash")
        st, h, b = d.request("GET", "/v1/checks/" + running.get("id", "?"))
        check(st == 200 and b.get("status") == "interrupted",
              "running check marked interrupted, got %s %r"
              % (st, b.get("status") if isinstance(b, dict) else b))
        st, h, b = d.request("GET", "/v1/checks?model=api-crash")
        check(st == 200 and len(b.get("checks", [])) == 2,
              "crash: both checks listed")
    check(d.stop() == 0, "restarted after crash: exit 0")
    db = sqlite3.connect(path)
    try:
        row = db.execute("PRAGMA integrity_check").fetchone()
    finally:
        db.close()
    check(row == ("ok",), "store integrity after a crash, got %r" % (row,))


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-api-") as tmp:
        store = "sqlite:%s/t.db" % tmp
        d = Daemon(store)
        started = check(d.address is not None,
                        "daemon started; first stderr line %r" % d.first)
        first_check = None
        if started:
            try:
                first = json.loads(d.first)
                check(first.get("event") == "listening",
                      "first log line is the listening event")
                name, d1, d2 = test_models(d)
                first_check = test_checks(d, name, d1, d2)
                test_list(d, name)
                test_bad_input(d, name)
                test_async(d, name)
                test_ops(d)
                test_retire(d, name, first_check)
            except Exception as e:  # a crash of the test is a failure
                check(False, "exception %r" % e)
        code = d.stop()
        check(code == 0, "SIGTERM: exit status 0, got %r" % code)
        logs = [json.loads(x) for x in d.lines if x.startswith("{")]
        reqs = [x for x in logs if x.get("event") == "request"]
        check(reqs and all(k in reqs[0] for k in ("method", "route", "status",
                                                   "duration_ms")),
              "request log lines carry method, route, status, duration_ms")

        # the store survives a restart
        if started and first_check:
            d = Daemon(store)
            if check(d.address is not None, "restart on the same store"):
                st, h, b = d.request("GET", "/v1/checks/" + first_check)
                check(st == 200 and b.get("id") == first_check,
                      "check readable after restart")
                st, h, b = d.request("GET", "/v1/models/api-model/versions/2")
                check(st == 200 and b.get("retired") is True,
                      "model version readable after restart")
            check(d.stop() == 0, "restarted daemon: exit 0")

        test_body_limit(tmp)
        test_usage(tmp)
        test_overload(tmp)
        test_crash(tmp)
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
