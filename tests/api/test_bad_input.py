#!/usr/bin/python3
"""tests/api/test_bad_input.py -- a corpus of hostile and mistaken requests.

Starts `feasgate serve` on an ephemeral loopback port with a temporary
store (binary from $FEASGATE_BIN, as test_api.py does), registers one good
model, then sends each case of CORPUS below: malformed and truncated JSON,
wrong types, unknown members and names, bad family parameters, matrices
that are not positive definite, indices out of range, deep nesting, huge
sizes, non-finite numbers, wrong decision sizes, bad query parameters,
oversize bodies, unknown routes and methods, invalid UTF-8 and empty
bodies. Every case must be answered

  - with the 4xx status it names (or any 4xx when it names none),
  - as application/problem+json valid against schemas/problem.schema.json,
  - with a problem that names the fault: every expected word appears in
    an errors[].pointer, errors[].message or the detail,

and after every case the daemon must still answer GET /v1/health.
Then strict HTTP over raw sockets: duplicate or conflicting
Content-Length, Content-Length with Transfer-Encoding, "%00" in a path,
a query value or name (400 problems), invalid UTF-8 from a path echoed
as U+FFFD in valid UTF-8 JSON (problem and log line), and seed_max of
GET /v1/limits as the exact integer 2^53 - 1. The
daemon runs with a small --max-body so that the oversize cases stay
cheap. Needs python3-jsonschema (apicommon.py); run with /usr/bin/python3.
The last line is "N passed, N failed"; exit status 1 on any failure.
"""
import json
import os
import socket
import sys
import tempfile

import apicommon
from apicommon import Daemon, Results, is_problem

MAX_BODY = 65536  # --max-body of the daemon under test
# How deep the nesting cases go: far beyond any sane document, and beyond
# the parser's depth limit.
DEEP = 5000

MODEL = {
    "format": 1,
    "name": "bad-input",
    "title": "hostile input corpus model",
    "decisions": [{"name": "x", "lower": 0, "upper": 10},
                  {"name": "y", "size": 2, "lower": 0, "upper": 10}],
    "uncertain": [{"name": "u", "distribution":
                   {"family": "normal", "mean": 0, "sd": 1}}],
    "constraints": [{"name": "c1", "require": "u + x <= 3"},
                    {"name": "c2", "require": "y[0] + y[1] - u <= 6"}],
}
GOOD_DECISION = {"x": 1, "y": [1, 2]}
CHECKS = "/v1/models/bad-input/checks"


def model(**changes):
    """MODEL with members replaced (None removes one)."""
    doc = json.loads(json.dumps(MODEL))
    doc["name"] = "bad-input-reg"
    for k, v in changes.items():
        if v is None:
            doc.pop(k, None)
        else:
            doc[k] = v
    return doc


def model_with_input(dist, size=None, name="w"):
    inp = {"name": name, "distribution": dist}
    if size is not None:
        inp["size"] = size
    return model(uncertain=MODEL["uncertain"] + [inp])


def check_req(**members):
    body = {"decision": GOOD_DECISION, "samples": 1000}
    for k, v in members.items():
        if v is None:
            body.pop(k, None)
        else:
            body[k] = v
    return body


def enc(obj):
    return json.dumps(obj).encode()


JSON = {"Content-Type": "application/json"}

# (name, method, path, body bytes or None, headers, status or None, words)
# `words`: each must occur (case-insensitively) in the problem's pointers,
# messages or detail.
CORPUS = [
    # ---- malformed JSON ----
    ("truncated model", "POST", "/v1/models", enc(MODEL)[:40], JSON, 400,
     ["offset"]),
    ("truncated check", "POST", CHECKS, b'{"decision": {"x": 1', JSON, 400,
     ["offset"]),
    ("trailing garbage", "POST", "/v1/models", enc(MODEL) + b" }", JSON, 400,
     ["offset"]),
    ("single quotes", "POST", "/v1/models", b"{'format': 1}", JSON, 400,
     ["offset"]),
    ("trailing comma", "POST", CHECKS, b'{"decision": {"x": 1,}}', JSON, 400,
     ["offset"]),
    ("bare word", "POST", "/v1/models", b"model please", JSON, 400,
     ["offset"]),
    ("duplicate key", "POST", "/v1/models",
     b'{"format": 1, "format": 1, "name": "dup"}', JSON, 400, ["format"]),
    ("comment in JSON", "POST", CHECKS,
     b'{"decision": {"x": 1, "y": [1, 2]} /* no */}', JSON, 400, ["offset"]),
    ("empty model body", "POST", "/v1/models", b"", JSON, 400, []),
    ("empty check body", "POST", CHECKS, b"", JSON, 400, ["decision"]),
    ("invalid UTF-8 in a string", "POST", "/v1/models",
     b'{"format": 1, "name": "bad-\xff\xfe", "decisions": [], '
     b'"uncertain": [], "constraints": []}', JSON, 400, ["utf"]),
    ("invalid UTF-8 in a label", "POST", CHECKS,
     b'{"decision": {"x": 1, "y": [1, 2]}, "label": "\xc3\x28"}', JSON, 400,
     ["utf"]),
    ("NUL byte in body", "POST", CHECKS,
     b'{"decision": {"x": 1, "y": [1, 2]}}\x00', JSON, 400, []),
    ("deeply nested arrays", "POST", "/v1/models",
     b"[" * DEEP + b"]" * DEEP, JSON, 400, ["depth"]),
    ("deeply nested objects", "POST", CHECKS,
     b'{"a":' * DEEP + b"1" + b"}" * DEEP, JSON, 400, ["depth"]),
    ("number 1e999", "POST", CHECKS,
     b'{"decision": {"x": 1e999, "y": [1, 2]}}', JSON, 400, ["/decision/x"]),
    ("NaN literal", "POST", CHECKS,
     b'{"decision": {"x": NaN, "y": [1, 2]}}', JSON, 400, []),
    ("top-level array", "POST", "/v1/models", b"[1, 2, 3]", JSON, 400,
     ["object"]),

    # ---- the model document ----
    ("wrong format", "POST", "/v1/models", enc(model(format=2)), JSON, 400,
     ["/format"]),
    ("format as a string", "POST", "/v1/models", enc(model(format="1")), JSON,
     400, ["/format"]),
    ("missing constraints", "POST", "/v1/models",
     enc(model(constraints=None)), JSON, 400, ["constraints"]),
    ("unknown member", "POST", "/v1/models", enc(model(colour="blue")), JSON,
     400, ["/colour"]),
    ("bad model name", "POST", "/v1/models", enc(model(name="Bad Name!")),
     JSON, 400, ["/name"]),
    ("decisions not an array", "POST", "/v1/models",
     enc(model(decisions={"x": 1})), JSON, 400, ["/decisions"]),
    ("duplicate names", "POST", "/v1/models",
     enc(model(decisions=[{"name": "x"}, {"name": "x"}])), JSON, 400,
     ["/decisions/1/name"]),
    ("unknown name in require", "POST", "/v1/models",
     enc(model(constraints=[{"name": "c", "require": "x + finsh <= 3"}])),
     JSON, 400, ["/constraints/0/require", "finsh"]),
    ("syntax error in require", "POST", "/v1/models",
     enc(model(constraints=[{"name": "c", "require": "x + * 3 <= 1"}])),
     JSON, 400, ["/constraints/0/require"]),
    ("index out of range", "POST", "/v1/models",
     enc(model(constraints=[{"name": "c", "require": "y[7] <= 1"}])), JSON,
     400, ["/constraints/0/require"]),
    ("vector length mismatch", "POST", "/v1/models",
     enc(model(constraints=[{"name": "c", "require": "y + [1, 2, 3] <= 1"}])),
     JSON, 400, ["/constraints/0/require"]),
    ("unknown family", "POST", "/v1/models",
     enc(model_with_input({"family": "cauchyish", "mean": 0})), JSON, 400,
     ["/uncertain/1/distribution/family"]),
    ("negative sd", "POST", "/v1/models",
     enc(model_with_input({"family": "normal", "mean": 0, "sd": -1})), JSON,
     400, ["/uncertain/1/distribution/sd"]),
    ("uniform low >= high", "POST", "/v1/models",
     enc(model_with_input({"family": "uniform", "low": 5, "high": 5})), JSON,
     400, ["/uncertain/1/distribution"]),
    ("unknown family parameter", "POST", "/v1/models",
     enc(model_with_input({"family": "gamma", "shape": 2, "scale": 1,
                           "rate": 3})), JSON, 400,
     ["/uncertain/1/distribution/rate"]),
    ("parameter array of wrong size", "POST", "/v1/models",
     enc(model_with_input({"family": "exponential", "mean": [1, 2]}, size=3)),
     JSON, 400, ["/uncertain/1/distribution/mean"]),
    ("discrete weights all zero", "POST", "/v1/models",
     enc(model_with_input({"family": "discrete", "values": [1, 2],
                           "weights": [0, 0]})), JSON, 400,
     ["/uncertain/1/distribution/weights"]),
    ("covariance not positive definite", "POST", "/v1/models",
     enc(model_with_input({"family": "multivariate_normal", "mean": [0, 0],
                           "covariance": [[1, 2], [2, 1]]}, size=2)), JSON,
     400, ["/uncertain/1/distribution/covariance"]),
    ("covariance not symmetric", "POST", "/v1/models",
     enc(model_with_input({"family": "multivariate_normal", "mean": [0, 0],
                           "covariance": [[1, 0.5], [0.2, 1]]}, size=2)),
     JSON, 400, ["/uncertain/1/distribution/covariance"]),
    ("copula correlation not positive definite", "POST", "/v1/models",
     enc(model(uncertain=[{"name": "u", "size": 3, "distribution":
                           {"family": "normal", "mean": 0, "sd": 1}}],
               dependence=[{"kind": "gaussian_copula", "members": ["u"],
                            "correlation": {"equal": -0.9}}],
               constraints=[{"name": "c", "require": "sum(u) <= 3"}],
               decisions=[{"name": "x"}])), JSON, 400,
     ["/dependence/0/correlation"]),
    ("huge input size", "POST", "/v1/models",
     enc(model_with_input({"family": "normal", "mean": 0, "sd": 1},
                          size=10 ** 12)), JSON, 400, ["/uncertain/1/size"]),
    ("negative decision size", "POST", "/v1/models",
     enc(model(decisions=[{"name": "x", "size": -3}])), JSON, 400,
     ["/decisions/0/size"]),
    ("non-finite bound", "POST", "/v1/models",
     b'{"format": 1, "name": "inf-bound", "decisions": [{"name": "x", '
     b'"upper": 1e999}], "uncertain": [], "constraints": '
     b'[{"name": "c", "require": "x <= 1"}]}', JSON, 400,
     ["/decisions/0/upper"]),
    ("overlong name", "POST", "/v1/models", enc(model(name="m" * 200)), JSON,
     400, ["/name"]),

    # ---- check requests ----
    ("decision missing", "POST", CHECKS, enc({"samples": 100}), JSON, 400,
     ["/decision"]),
    ("decision member missing", "POST", CHECKS,
     enc(check_req(decision={"x": 1})), JSON, 400, ["/decision"]),
    ("unknown decision name", "POST", CHECKS,
     enc(check_req(decision={"x": 1, "y": [1, 2], "zz": 3})), JSON, 400,
     ["/decision/zz"]),
    ("wrong decision size", "POST", CHECKS,
     enc(check_req(decision={"x": 1, "y": [1, 2, 3]})), JSON, 400,
     ["/decision/y"]),
    ("decision of wrong type", "POST", CHECKS,
     enc(check_req(decision={"x": "one", "y": [1, 2]})), JSON, 400,
     ["/decision/x"]),
    ("scalar given a vector", "POST", CHECKS,
     enc(check_req(decision={"x": [1], "y": [1, 2]})), JSON, 400,
     ["/decision/x"]),
    ("samples zero", "POST", CHECKS, enc(check_req(samples=0)), JSON, 400,
     ["/samples"]),
    ("samples as a string", "POST", CHECKS, enc(check_req(samples="1000")),
     JSON, 400, ["/samples"]),
    ("samples beyond the cap", "POST", CHECKS,
     enc(check_req(samples=10 ** 15)), JSON, 400, ["/samples"]),
    ("fractional samples", "POST", CHECKS, enc(check_req(samples=10.5)), JSON,
     400, ["/samples"]),
    ("target above 1", "POST", CHECKS, enc(check_req(target=1.5)), JSON, 400,
     ["/target"]),
    ("confidence zero", "POST", CHECKS, enc(check_req(confidence=0)), JSON,
     400, ["/confidence"]),
    ("negative seed", "POST", CHECKS, enc(check_req(seed=-4)), JSON, 400,
     ["/seed"]),
    ("unknown interval method", "POST", CHECKS,
     enc(check_req(interval="guess")), JSON, 400, ["/interval"]),
    ("unknown sampling design", "POST", CHECKS,
     enc(check_req(sampling="lucky")), JSON, 400, ["/sampling"]),
    ("unknown request member", "POST", CHECKS, enc(check_req(speed="max")),
     JSON, 400, ["/speed"]),
    ("malformed expect_digest", "POST", CHECKS,
     enc(check_req(expect_digest="md5:abc")), JSON, 400, ["/expect_digest"]),
    ("wrong expect_digest", "POST", CHECKS,
     enc(check_req(expect_digest="sha256:" + "0" * 64)), JSON, 409,
     ["/expect_digest"]),
    ("wait_s negative", "POST", CHECKS, enc(check_req(wait_s=-1)), JSON, 400,
     ["/wait_s"]),
    ("check of an unknown model", "POST", "/v1/models/no-such-model/checks",
     enc(check_req()), JSON, 404, ["no-such-model"]),
    ("check of version 0", "POST", "/v1/models/bad-input/versions/0/checks",
     enc(check_req()), JSON, 404, ["version"]),
    ("check of a non-numeric version", "POST",
     "/v1/models/bad-input/versions/abc/checks", enc(check_req()), JSON, 404,
     ["version"]),

    # ---- query parameters ----
    ("list: limit zero", "GET", "/v1/checks?limit=0", None, {}, 400,
     ["limit"]),
    ("list: limit not a number", "GET", "/v1/checks?limit=ten", None, {}, 400,
     ["limit"]),
    ("list: bad verdict", "GET", "/v1/checks?verdict=maybe", None, {}, 400,
     ["verdict"]),
    ("list: bad since", "GET", "/v1/checks?since=yesterday", None, {}, 400,
     ["since"]),
    ("list: bad cursor", "GET", "/v1/checks?after=chk_nope", None, {}, 400,
     ["after"]),
    ("list: unknown parameter", "GET", "/v1/checks?colour=red", None, {}, 400,
     ["colour"]),
    ("scenarios: count not a number", "GET",
     "/v1/models/bad-input/scenarios?count=lots", None, {}, 400, ["count"]),
    ("scenarios: unknown stream", "GET",
     "/v1/models/bad-input/scenarios?stream=future", None, {}, 400,
     ["stream"]),

    # ---- routes, methods, sizes ----
    ("unknown route", "GET", "/v1/nothing-here", None, {}, 404,
     ["/v1/nothing-here"]),
    ("unknown top-level route", "GET", "/admin", None, {}, 404, ["/admin"]),
    ("very long path", "GET", "/v1/" + "a" * 3000, None, {}, 404, []),
    ("wrong method on models", "PUT", "/v1/models", enc(MODEL), JSON, 405,
     ["PUT"]),
    ("wrong method on health", "POST", "/v1/health", b"{}", JSON, 405,
     ["POST"]),
    ("invented method", "BREW", "/v1/models", None, {}, 405, ["BREW"]),
    ("unknown check id", "GET", "/v1/checks/chk_00000000000000000000000000",
     None, {}, 404, []),
    ("unknown model", "GET", "/v1/models/absent-model", None, {}, 404,
     ["absent-model"]),
    ("oversize body (declared)", "POST", "/v1/models",
     b" " * (MAX_BODY + 1), JSON, 413, ["max_body"]),
]


def problem_words(body):
    """All the text a problem offers to name its fault."""
    parts = [str(body.get("detail", "")), str(body.get("title", ""))]
    for e in body.get("errors", []) or []:
        parts.append(str(e.get("pointer", "")))
        parts.append(str(e.get("message", "")))
    if isinstance(body.get("limit"), dict):
        parts.append(str(body["limit"].get("name", "")))
    if "offset" in body:
        parts.append("offset")
    return " ".join(parts).lower()


def run_case(d, res, case):
    name, method, path, data, headers, want, words = case
    try:
        st, h, raw = d.raw(method, path, data, headers, timeout=60)
    except Exception as e:  # a dropped connection is a failure too
        res.check(False, "%s: no answer (%r)" % (name, e))
        return
    body = None
    try:
        body = json.loads(raw) if raw else None
    except ValueError:
        pass
    ok_status = (400 <= st < 500) if want is None else st == want
    res.check(ok_status, "%s: status %s, expected %s; body %.300r"
              % (name, st, want or "4xx", raw))
    res.check(is_problem(st, h, body), "%s: not a problem document: %s %r"
              % (name, h.get("content-type"), raw[:200]))
    msgs = apicommon.schemas().problems(method, path, st, h, body)
    res.check(not msgs, "%s: %s" % (name, "; ".join(msgs)))
    if isinstance(body, dict):
        text = problem_words(body)
        for w in words:
            res.check(w.lower() in text, "%s: problem does not name %r: %s"
                      % (name, w, json.dumps(body)[:400]))
    res.check(d.alive(), "%s: daemon no longer answers /v1/health" % name)


def chunked_oversize(d, res):
    """A chunked upload that never declares its length and goes past
    --max-body: a 413 problem at its end, the daemon unharmed."""
    s = socket.create_connection((d.host, d.port), timeout=30)
    try:
        s.sendall(b"POST /v1/models HTTP/1.1\r\nHost: x\r\n"
                  b"Content-Type: application/json\r\n"
                  b"Transfer-Encoding: chunked\r\n\r\n")
        chunk = b" " * 8192
        for _ in range(MAX_BODY // len(chunk) + 2):
            s.sendall(b"%x\r\n%s\r\n" % (len(chunk), chunk))
        s.sendall(b"0\r\n\r\n")
        data = b""
        while b"\r\n\r\n" not in data:
            more = s.recv(4096)
            if not more:
                break
            data += more
        first = data.split(b"\r\n", 1)[0]
        res.check(b" 413 " in first + b" ",
                  "chunked oversize body: 413, got %r" % first)
    finally:
        s.close()
    res.check(d.alive(), "chunked oversize: daemon still answers")


def raw_exchange(d, data, timeout=10):
    """Send raw bytes; (status, headers dict, body bytes) of the answer,
    or (None, {}, b"") when the connection closes without one."""
    s = socket.create_connection((d.host, d.port), timeout=timeout)
    try:
        s.sendall(data)
        buf = b""
        while True:
            try:
                more = s.recv(65536)
            except socket.timeout:
                break
            if not more:
                break
            buf += more
            head, sep, rest = buf.partition(b"\r\n\r\n")
            if sep:
                hdrs = {}
                for line in head.split(b"\r\n")[1:]:
                    k, _, v = line.partition(b":")
                    hdrs[k.strip().lower().decode()] = v.strip().decode()
                n = int(hdrs.get("content-length", "0"))
                if len(rest) >= n:
                    status = int(head.split(b" ")[1])
                    return status, hdrs, rest[:n]
        return None, {}, b""
    finally:
        s.close()


# Framing that two readers may split differently (RFC 9112 section 6.3):
# (name, raw request). Each must be a 400 problem.
FRAMING = [
    ("two equal Content-Length headers",
     b"POST /v1/models HTTP/1.1\r\nHost: x\r\nContent-Type: application/json"
     b"\r\nContent-Length: 2\r\nContent-Length: 2\r\n\r\n{}"),
    ("two different Content-Length headers",
     b"POST /v1/models HTTP/1.1\r\nHost: x\r\nContent-Length: 2\r\n"
     b"Content-Length: 40\r\n\r\n{}"),
    ("Content-Length and Transfer-Encoding",
     b"POST /v1/models HTTP/1.1\r\nHost: x\r\nContent-Length: 2\r\n"
     b"Transfer-Encoding: chunked\r\n\r\n2\r\n{}\r\n0\r\n\r\n"),
    ("Transfer-Encoding then Content-Length",
     b"POST /v1/checks HTTP/1.1\r\nHost: x\r\nTransfer-Encoding: chunked"
     b"\r\nContent-Length: 5\r\n\r\n0\r\n\r\n"),
    ("two Content-Length headers on a GET",
     b"GET /v1/health HTTP/1.1\r\nHost: x\r\nContent-Length: 0\r\n"
     b"Content-Length: 0\r\n\r\n"),
]


def strict_http(d, res):
    """Bad framing, NUL bytes, invalid UTF-8 echoed, exact seed_max."""
    for name, data in FRAMING:
        st, h, raw = raw_exchange(d, data)
        body = None
        try:
            body = json.loads(raw)
        except ValueError:
            pass
        res.check(st == 400 and is_problem(st, h, body),
                  "%s: 400 problem, got %s %r" % (name, st, raw[:200]))
        res.check(d.alive(), "%s: daemon still answers" % name)
    # A list value in one header is refused by libmicrohttpd itself (its
    # own 400 text, connection closed): a 400 either way.
    st, _, _ = raw_exchange(d, b"POST /v1/models HTTP/1.1\r\nHost: x\r\n"
                               b"Content-Length: 2, 2\r\n\r\n{}")
    res.check(st in (400, None), "Content-Length list: 400 or closed, got %s"
              % st)

    # %00 decodes to NUL: in the path, in a query value, in a query name.
    for path in ["/v1/models/bad-input%00/scenarios",
                 "/v1/models/bad%00input",
                 "/v1/checks?label=a%00b",
                 "/v1/models/bad-input/scenarios?count=1%00",
                 "/v1/checks?lab%00el=x",
                 "/v1/health%00"]:
        st, h, raw = d.raw("GET", path)
        body = json.loads(raw) if raw else None
        res.check(st == 400 and is_problem(st, h, body)
                  and "nul" in body.get("detail", "").lower(),
                  "NUL in %s: 400 problem naming NUL, got %s %r"
                  % (path, st, raw[:200]))
    # "%2500" is the text "%00", not a NUL: an ordinary 404
    st, _, raw = d.raw("GET", "/v1/models/x%2500")
    res.check(st == 404, "%%2500: 404 (no NUL), got %s %r" % (st, raw[:200]))

    # Invalid UTF-8 and a control character in a path: the problem and the
    # log line are valid UTF-8 JSON, the bad bytes U+FFFD (Unicode 15,
    # section 3.9, maximal subparts: \xff, \xfe, \xc3 each one U+FFFD;
    # \xe2\x82 one U+FFFD), the control character escaped.
    before = len(d.raw_lines)
    st, h, raw = d.raw("GET", "/v1/models/q%FF%FEz%C3%e2%82y%01")
    text = None
    try:
        text = raw.decode("utf-8")  # strict: fails on invalid UTF-8
    except UnicodeDecodeError:
        pass
    res.check(st == 404 and text is not None,
              "invalid UTF-8 path: 404 in valid UTF-8, got %s %r"
              % (st, raw[:200]))
    if text is not None:
        body = json.loads(text)
        want = "q\ufffd\ufffdz\ufffd\ufffdy\x01"
        res.check(want in body.get("detail", ""),
                  "invalid UTF-8 path: detail holds %r: %r"
                  % (want, body.get("detail")))
        res.check("\\u0001" in text, "control character escaped: %r" % text)
    d.alive()  # one more request, so that the log line is surely out
    logged = [x for x in d.raw_lines[before:] if b'"path":"/v1/models/q' in x]
    res.check(len(logged) == 1, "one log line for the path: %r" % logged)
    for line in logged:
        try:
            obj = json.loads(line.decode("utf-8"))
            res.check(obj["path"] == "/v1/models/" + want,
                      "log path: %r" % obj["path"])
        except (UnicodeDecodeError, ValueError) as e:
            res.check(False, "log line not UTF-8 JSON (%r): %r" % (e, line))

    # seed_max is 2^53 - 1 exactly (JSON numbers are exact integers up to
    # there, RFC 8259 section 6), as a plain integer in the text.
    st, _, raw = d.raw("GET", "/v1/limits")
    lim = {e["name"]: e["value"] for e in json.loads(raw)["limits"]}
    res.check(lim.get("seed_max") == 2 ** 53 - 1
              and isinstance(lim.get("seed_max"), int),
              "seed_max exact: %r" % lim.get("seed_max"))
    res.check(b'"value":9007199254740991}' in raw,
              "seed_max printed as an integer: %r" % raw[:100])


def main():
    res = Results()
    if not os.path.exists(apicommon.BIN):
        print("FEASGATE_BIN %s does not exist" % apicommon.BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-bad-") as tmp:
        d = Daemon("sqlite:%s/bad.db" % tmp, "--max-body", str(MAX_BODY),
                   results=res)
        if not res.check(d.address is not None,
                         "daemon started; first line %r" % d.first):
            d.stop()
            return res.summary()
        try:
            st, _, _ = d.request("POST", "/v1/models", MODEL)
            res.check(st == 201, "good model registered, got %s" % st)
            st, _, b = d.request("POST", CHECKS, check_req())
            res.check(st == 201 and b.get("status") == "done",
                      "good check answered, got %s" % st)
            print("%d cases" % len(CORPUS), flush=True)
            for case in CORPUS:
                run_case(d, res, case)
            chunked_oversize(d, res)
            strict_http(d, res)
        except Exception as e:  # a crash of the test is a failure
            res.check(False, "exception %r" % e)
        code = d.stop()
        res.check(code == 0, "SIGTERM after the corpus: exit 0, got %r" % code)
        crashed = [x for x in d.lines if "AddressSanitizer" in x
                   or "runtime error" in x]
        res.check(not crashed, "sanitizer reports: %r" % crashed[:3])
    return res.summary()


if __name__ == "__main__":
    sys.exit(main())
