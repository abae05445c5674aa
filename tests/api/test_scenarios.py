#!/usr/bin/python3
"""tests/api/test_scenarios.py -- GET /v1/models/{name}/scenarios over HTTP.

Starts `feasgate serve` (apicommon.Daemon, binary from $FEASGATE_BIN) on an
ephemeral loopback port with a temporary SQLite store and --max-scenarios
600, registers a small model with continuous, integer-valued and
copula-tied inputs, and checks:
  - the JSON shape (columns, rows, seed, stream, start) and the CSV shape
    (RFC 4180: header row, CRLF, integer columns without decimals), and
    that both carry the same numbers;
  - scenario i fetched alone (start=i, count=1) equals row i of a bulk
    request, also across a block boundary, and a window equals its slice;
  - design and validation differ for the same seed; a drawn seed is echoed
    and replays; the daemon prints the same bytes as `feasgate scenarios`;
  - the count cap (400 naming max_scenarios), bad parameters (400 naming
    the parameter), unknown model (404), retired model (410), wrong method
    (405);
  - streaming: 8 concurrent 100,000-row answers of a 40-column model
    (77 MB each) leave the daemon's VmRSS within 50 MB of where it was,
    and are the same bytes.

Standard library (plus apicommon's jsonschema checks of every answer).
Prints one line per failed check and
"N passed, N failed" as the last line; exits non-zero on any failure.
"""
import csv
import io
import json
import os
import subprocess
import sys
import tempfile
import urllib.parse

from apicommon import BIN, Daemon, Results

MAX_SCENARIOS = 600

results = Results()
check = results.check


MODEL = {
    "format": 1,
    "name": "scen-api",
    "title": "scenarios endpoint test model",
    "decisions": [{"name": "x"}],
    "uncertain": [
        {"name": "load", "size": 3, "distribution":
         {"family": "lognormal", "meanlog": [1.0, 1.5, 2.0], "sdlog": 0.4}},
        {"name": "arrivals", "distribution": {"family": "poisson", "mean": 4}},
        {"name": "gap", "distribution": {"family": "uniform", "low": -2, "high": 5}},
    ],
    "dependence": [{"kind": "gaussian_copula", "members": ["load"],
                    "correlation": {"ar1": 0.6}}],
    "constraints": [{"name": "cap", "require": "sum(load) + arrivals + gap <= x"}],
}
COLUMNS = ["load[0]", "load[1]", "load[2]", "arrivals", "gap"]


def path(name="scen-api", **params):
    q = urllib.parse.urlencode(params)
    return "/v1/models/%s/scenarios%s" % (name, "?" + q if q else "")


def get_json(d, **params):
    st, h, raw = d.fetch("GET", path(**params))
    body = None
    if st == 200 and h.get("content-type", "").startswith("application/json"):
        body = json.loads(raw)
    return st, h, body


def problem(d, p, code, word, what, method="GET", headers=None):
    st, h, raw = d.fetch(method, p, headers=headers)
    try:
        b = json.loads(raw)
    except ValueError:
        b = {}
    ok = (st == code and h.get("content-type", "").startswith(
        "application/problem+json") and b.get("status") == code
        and word in b.get("detail", ""))
    check(ok, "%s: %d problem naming %r, got %d %s" % (what, code, word, st, raw[:200]))
    return b


def test_shapes(d):
    st, h, b = get_json(d, count=300, seed=7)
    if not check(st == 200 and b is not None, "JSON scenarios: 200, got %d" % st):
        return None
    check(sorted(b) == ["columns", "rows", "seed", "start", "stream"],
          "JSON members are columns, rows, seed, stream, start: %r" % sorted(b))
    check(b["columns"] == COLUMNS, "columns in declaration order: %r" % b["columns"])
    check(b["seed"] == 7 and b["stream"] == "design" and b["start"] == 0,
          "seed, stream, start echoed: %r" % [b["seed"], b["stream"], b["start"]])
    rows = b["rows"]
    check(len(rows) == 300 and all(len(r) == len(COLUMNS) for r in rows),
          "300 rows of 5 values")
    check(all(isinstance(r[3], int) and r[3] >= 0 for r in rows),
          "the poisson column holds non-negative integers")
    check(all(v > 0 for r in rows for v in r[:3]), "lognormal columns positive")
    check(all(-2 <= r[4] <= 5 for r in rows), "uniform column inside [low, high]")
    check(len(set(tuple(r) for r in rows)) == 300, "no two scenarios repeat")

    # CSV of the same request
    st, h, raw = d.fetch("GET", path(count=300, seed=7),
                           headers={"Accept": "text/csv"})
    check(st == 200 and h.get("content-type", "").startswith("text/csv"),
          "CSV with Accept: text/csv, got %d %r" % (st, h.get("content-type")))
    text = raw.decode()
    check(text.endswith("\r\n") and "\n" not in text.replace("\r\n", ""),
          "CSV lines end with CRLF (RFC 4180)")
    table = list(csv.reader(io.StringIO(text, newline="")))
    check(table and table[0] == COLUMNS, "CSV header row is the columns")
    body = table[1:]
    check(len(body) == 300 and all(len(r) == 5 for r in body), "CSV: 300 rows of 5")
    check(all("." not in r[3] and "e" not in r[3] for r in body),
          "CSV integer column printed without decimals")
    same = all(float(c) == v for r, jr in zip(body, rows) for c, v in zip(r, jr))
    check(same, "CSV and JSON carry exactly the same numbers")

    # content negotiation: JSON wins unless CSV is preferred
    st, h, _ = d.fetch("GET", path(count=2, seed=7),
                         headers={"Accept": "text/csv;q=0.4, application/json"})
    check(st == 200 and h.get("content-type", "").startswith("application/json"),
          "Accept preferring JSON gives JSON")
    st, h, _ = d.fetch("GET", path(count=2, seed=7),
                         headers={"Accept": "application/json;q=0.2, text/csv"})
    check(st == 200 and h.get("content-type", "").startswith("text/csv"),
          "Accept preferring CSV gives CSV")
    return rows


def test_determinism(d, bulk, tmp):
    for i in (0, 1, 17, 255, 256, 299):
        st, h, b = get_json(d, count=1, seed=7, start=i)
        check(st == 200 and b["rows"] == [bulk[i]] and b["start"] == i,
              "scenario %d alone equals row %d in bulk" % (i, i))
    st, h, b = get_json(d, count=50, seed=7, start=230)
    check(st == 200 and b["rows"] == bulk[230:280],
          "scenarios 230..279 equal the bulk slice")
    st, h, v = get_json(d, count=300, seed=7, stream="validation")
    check(st == 200 and v["stream"] == "validation", "validation stream: 200")
    if v:
        shared = set(map(tuple, v["rows"])) & set(map(tuple, bulk))
        check(v["rows"][0] != bulk[0] and not shared,
              "design and validation share no scenario for the same seed")
    st, h, o = get_json(d, count=300, seed=8)
    check(st == 200 and o["rows"][0] != bulk[0], "another seed, other scenarios")
    st, h, b = get_json(d, count=300, seed=7, stream="design")
    check(st == 200 and b["rows"] == bulk, "repeating the request repeats the rows")

    st, h, a = get_json(d, count=3)
    if check(st == 200 and isinstance(a.get("seed"), int), "seed drawn and echoed"):
        st, h, b = get_json(d, count=3, seed=a["seed"])
        check(st == 200 and b["rows"] == a["rows"], "the echoed seed replays")

    # the offline command prints the same bytes
    mp = os.path.join(tmp, "m.json")
    with open(mp, "w") as f:
        json.dump(MODEL, f)
    for fmt, hdrs, extra in (("JSON", {}, []), ("CSV", {"Accept": "text/csv"}, ["--csv"])):
        p = subprocess.run([BIN, "scenarios", mp, "--count", "40", "--seed", "7",
                            "--start", "250", "--stream", "validation"] + extra,
                           capture_output=True, timeout=60)
        st, h, raw = d.fetch("GET", path(count=40, seed=7, start=250,
                                           stream="validation"), headers=hdrs)
        check(p.returncode == 0 and st == 200 and p.stdout == raw,
              "%s: daemon and `feasgate scenarios` print the same bytes" % fmt)


def test_errors(d):
    st, h, b = get_json(d, count=MAX_SCENARIOS, seed=1)
    check(st == 200 and len(b["rows"]) == MAX_SCENARIOS,
          "count = max_scenarios is allowed")
    b = problem(d, path(count=MAX_SCENARIOS + 1, seed=1), 400, "max_scenarios",
                "count above the cap")
    lim = b.get("limit", {})
    check(lim.get("name") == "max_scenarios" and lim.get("value") == MAX_SCENARIOS,
          "the cap problem carries limit max_scenarios = %d: %r" % (MAX_SCENARIOS, lim))
    st, h, b = get_json(d, seed=1)
    check(st == 200 and len(b["rows"]) == 100, "count absent: 100 scenarios")
    for bad in ("0", "-3", "abc", "1.5", "", "1e3", "99999999999999999999"):
        problem(d, path(count=bad, seed=1), 400, "'count'", "count=%r" % bad)
    for bad in ("-1", "x", "9007199254740992", "7.0"):
        problem(d, path(count=1, seed=bad), 400, "'seed'", "seed=%r" % bad)
    for bad in ("-1", "two", "9007199254740992"):
        problem(d, path(count=1, seed=1, start=bad), 400, "'start'", "start=%r" % bad)
    problem(d, path(count=2, seed=1, start="9007199254740991"), 400, "'start'",
            "start + count beyond 2^53")
    st, h, b = get_json(d, count=1, seed=1, start=9007199254740991)
    check(st == 200 and b["start"] == 9007199254740991, "the last index is drawable")
    problem(d, path(count=1, seed=1, stream="holdout"), 400, "'stream'", "stream=holdout")
    problem(d, path(count=1, seed=1, samples=5), 400, "'samples'", "unknown parameter")
    problem(d, path(name="no-such-model", count=1, seed=1), 404, "no-such-model",
            "unknown model")
    problem(d, path(count=1, seed=1), 405, "GET", "POST on scenarios", method="POST")


def test_retired(d):
    st, _, _ = d.fetch("DELETE", "/v1/models/scen-api")
    check(st == 204, "retire the model: 204, got %d" % st)
    problem(d, path(count=1, seed=1), 410, "retired", "scenarios of a retired model")


WIDE = {
    "format": 1,
    "name": "scen-wide",
    "title": "forty inflows of a reservoir cascade",
    "decisions": [{"name": "release", "lower": 0, "upper": 100}],
    "uncertain": [
        {"name": "inflow", "size": 20, "distribution":
         {"family": "normal", "mean": 10, "sd": 2}},
        {"name": "rain", "size": 10, "distribution":
         {"family": "uniform", "low": 0, "high": 3}},
        {"name": "spill", "size": 10, "distribution":
         {"family": "poisson", "mean": 2}},
    ],
    "constraints": [{"name": "level",
                     "require": "inflow[0] + rain[0] - release <= 30"}],
}
WIDE_ROWS = 100000
STREAMS = 8
RSS_GROWTH_MAX_KB = 50 * 1024


def rss_kb(pid):
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    return -1


def test_memory(tmp):
    """8 concurrent 100,000-row answers of a 40-column model (77 MB each):
    the daemon's resident memory (VmRSS, /proc/PID/status) grows by less
    than 50 MB while they stream, and all 8 bodies are the same bytes."""
    import hashlib
    import http.client
    import threading
    import time
    d = Daemon("sqlite:%s/wide.db" % tmp)
    if not check(d.address is not None, "wide daemon started: %r" % d.first):
        d.stop()
        return
    try:
        pid = json.loads(d.first)["pid"]
        st, _, _ = d.fetch("POST", "/v1/models", WIDE)
        check(st == 201, "wide model registered: %s" % st)
        url = path("scen-wide", count=WIDE_ROWS, seed=5)
        st, _, b = d.request("GET", path("scen-wide", count=2, seed=5))
        check(st == 200 and len(b.get("columns", [])) == 40,
              "40 columns: %r" % (b.get("columns") if isinstance(b, dict)
                                   else b))
        base = rss_kb(pid)
        digests, sizes, errors = [], [], []

        def fetch():
            try:
                conn = http.client.HTTPConnection(d.host, d.port, timeout=300)
                conn.request("GET", url)
                resp = conn.getresponse()
                h = hashlib.sha256()
                n = 0
                while True:
                    block = resp.read(1 << 16)
                    if not block:
                        break
                    h.update(block)
                    n += len(block)
                conn.close()
                digests.append((resp.status, h.hexdigest()))
                sizes.append(n)
            except Exception as e:  # reported below
                errors.append(repr(e))

        threads = [threading.Thread(target=fetch) for _ in range(STREAMS)]
        for t in threads:
            t.start()
        peak = base
        while any(t.is_alive() for t in threads):
            peak = max(peak, rss_kb(pid))
            time.sleep(0.05)
        for t in threads:
            t.join()
        check(not errors, "streams failed: %r" % errors[:2])
        check(len(digests) == STREAMS
              and all(x == digests[0] for x in digests)
              and digests[0][0] == 200,
              "%d equal 200 answers: %r" % (STREAMS, digests[:2]))
        check(sizes and min(sizes) > WIDE_ROWS * 40 * 10,
              "each body holds 100,000 rows of 40 numbers: %r" % sizes[:2])
        print("VmRSS %d kB before, %d kB at most during %d streams"
              % (base, peak, STREAMS))
        check(base > 0 and peak - base < RSS_GROWTH_MAX_KB,
              "resident memory grew by %d kB (< %d kB) over %d concurrent "
              "%d-row answers" % (peak - base, RSS_GROWTH_MAX_KB, STREAMS,
                                  WIDE_ROWS))
    except Exception as e:  # a crash of the test is a failure
        check(False, "memory test exception %r" % e)
    check(d.stop() == 0, "wide daemon: SIGTERM exit 0")


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-scen-") as tmp:
        d = Daemon("sqlite:%s/s.db" % tmp, "--max-scenarios", str(MAX_SCENARIOS),
                   results=results)
        if check(d.address is not None, "daemon started; first line %r" % d.first):
            try:
                st, h, raw = d.fetch("POST", "/v1/models", MODEL)
                if check(st in (200, 201), "register: %d %s" % (st, raw[:300])):
                    bulk = test_shapes(d)
                    if bulk:
                        test_determinism(d, bulk, tmp)
                    test_errors(d)
                    test_retired(d)
            except Exception as e:  # a crash of the test is a failure
                check(False, "exception %r" % e)
        check(d.stop() == 0, "SIGTERM: exit status 0")
        test_memory(tmp)
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
