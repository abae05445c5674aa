#!/usr/bin/python3
"""tests/api/test_ops.py -- the operational endpoints over real HTTP.

Starts `feasgate serve` (binary from $FEASGATE_BIN) on an ephemeral
loopback port with a temporary store, and checks:

- GET /metrics: Prometheus text exposition 0.0.4 (content type, every
  sample line well formed, HELP and TYPE before each family); request
  counters by route template and status grow by exactly what was sent;
  checks by status and verdict, samples simulated and the duration
  histogram (cumulative buckets from 0.005 s to 600 s, +Inf equal to
  _count) follow two checks of known size; gauges for the queue and busy
  workers; process_start_time_seconds close to now;
- GET /v1/openapi.json: byte for byte schemas/openapi.json (embedded at
  build time, so the daemon reads no file);
- GET /v1/ready: 200 with health.schema.json's body while idle, 503 with
  a reason and Retry-After while the queue is full (--queue 1);
- every JSON answer against its schema (apicommon.py).

Standard library plus python3-jsonschema; run with /usr/bin/python3. The
last line is "N passed, N failed"; exit status 1 on any failure.
"""
import json
import os
import re
import sys
import tempfile
import time

import apicommon
from apicommon import Daemon, Results, is_problem

MODEL = {
    "format": 1,
    "name": "ops-model",
    "decisions": [{"name": "x", "lower": 0, "upper": 10}],
    "uncertain": [{"name": "u", "distribution":
                   {"family": "normal", "mean": 0, "sd": 1}}],
    "constraints": [{"name": "c", "require": "u + x <= 3"}],
}
# Exposition format 0.0.4: name{labels} value
SAMPLE = re.compile(r'^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{(.*)\})? '
                    r'(-?[0-9.eE+-]+|\+Inf|-Inf|NaN)$')
LABEL = re.compile(r'([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"')
BOUNDS = ["0.005", "0.01", "0.025", "0.05", "0.1", "0.25", "0.5", "1", "2.5",
          "5", "10", "30", "60", "120", "300", "600", "+Inf"]


def parse_metrics(res, text):
    """{(name, frozenset(labels)): value}; format faults are failures."""
    out = {}
    typed = set()
    for line in text.split("\n"):
        if not line:
            continue
        if line.startswith("# TYPE "):
            parts = line.split(" ")
            res.check(len(parts) == 4 and parts[3] in
                      ("counter", "gauge", "histogram"), "TYPE line %r" % line)
            typed.add(parts[2])
            continue
        if line.startswith("# HELP "):
            continue
        m = SAMPLE.match(line)
        if not res.check(m is not None, "metrics line malformed: %r" % line):
            continue
        name, labels = m.group(1), frozenset(LABEL.findall(m.group(3) or ""))
        family = re.sub(r"_(bucket|sum|count)$", "", name)
        res.check(name in typed or family in typed,
                  "metric %s has no TYPE line before it" % name)
        out[(name, labels)] = float(m.group(4))
    res.check(text.endswith("\n"), "exposition ends with a new line")
    return out


def value(metrics, name, **labels):
    return metrics.get((name, frozenset(labels.items())), 0.0)


def scrape(res, d):
    st, h, raw = d.raw("GET", "/metrics")
    res.check(st == 200, "GET /metrics: 200, got %s" % st)
    res.check(h.get("content-type", "").startswith(
        "text/plain; version=0.0.4"),
        "metrics content type, got %r" % h.get("content-type"))
    return parse_metrics(res, raw.decode("utf-8"))


def test_metrics(res, d):
    before = scrape(res, d)
    for _ in range(3):
        d.request("GET", "/v1/health")
    d.request("GET", "/v1/no-such-thing")
    st, _, _ = d.request("POST", "/v1/models", MODEL)
    res.check(st == 201, "model registered, got %s" % st)
    for samples, x in ((20000, 1), (30000, 9)):
        st, _, b = d.request("POST", "/v1/models/ops-model/checks",
                             {"decision": {"x": x}, "samples": samples,
                              "seed": 5})
        res.check(st == 201, "check answered, got %s" % st)
    after = scrape(res, d)

    def grew(name, by, **labels):
        got = value(after, name, **labels) - value(before, name, **labels)
        res.check(got == by, "%s%r grew by %s, expected %s"
                  % (name, labels, got, by))

    grew("feasgate_http_requests_total", 3, method="GET",
         route="/v1/health", status="200")
    grew("feasgate_http_requests_total", 1, method="GET", route="(unknown)",
         status="404")
    grew("feasgate_http_requests_total", 1, method="POST",
         route="/v1/models", status="201")
    grew("feasgate_http_requests_total", 2, method="POST",
         route="/v1/models/{name}/checks", status="201")
    # the first scrape itself is counted by the second
    grew("feasgate_http_requests_total", 1, method="GET", route="/metrics",
         status="200")
    grew("feasgate_checks_total", 2, status="done")
    # x = 1: P(u <= 2) = 0.977 > 0.9, pass; x = 9: P(u <= -6) ~ 0, fail
    grew("feasgate_check_verdicts_total", 1, verdict="pass")
    grew("feasgate_check_verdicts_total", 1, verdict="fail")
    grew("feasgate_samples_simulated_total", 50000)
    grew("feasgate_check_duration_seconds_count", 2)

    buckets = [value(after, "feasgate_check_duration_seconds_bucket", le=b)
               for b in BOUNDS]
    res.check(all(a <= b for a, b in zip(buckets, buckets[1:])),
              "histogram buckets cumulative: %r" % buckets)
    res.check(buckets[-1] == value(after,
                                   "feasgate_check_duration_seconds_count"),
              "+Inf bucket equals _count")
    res.check(value(after, "feasgate_check_duration_seconds_sum") >= 0,
              "histogram _sum present")
    res.check(("feasgate_queue_depth", frozenset()) in after
              and ("feasgate_workers_busy", frozenset()) in after,
              "queue depth and busy-worker gauges present")
    res.check(value(after, "feasgate_workers") == 2, "workers gauge is 2")
    started = value(after, "process_start_time_seconds")
    res.check(0 < time.time() - started < 600,
              "process_start_time_seconds is recent: %s" % started)


def test_openapi(res, d):
    st, h, raw = d.raw("GET", "/v1/openapi.json")
    with open(apicommon.SCHEMAS / "openapi.json", "rb") as f:
        want = f.read()
    res.check(st == 200 and raw == want,
              "openapi.json served byte for byte (%s, %d of %d bytes)"
              % (st, len(raw), len(want)))
    res.check(h.get("content-type", "").startswith("application/json"),
              "openapi.json content type")
    doc = json.loads(raw)
    res.check("/metrics" in doc.get("paths", {})
              and "/v1/openapi.json" in doc.get("paths", {}),
              "the document describes /metrics and itself")


def test_ready(res, tmp):
    d = Daemon("sqlite:%s/ready.db" % tmp, "--queue", "1", "--grace", "0",
               results=res)
    if not res.check(d.address is not None, "ready daemon started"):
        d.stop()
        return
    st, h, b = d.request("GET", "/v1/ready")
    res.check(st == 200 and b.get("status") == "ok",
              "ready while idle: 200 status ok, got %s %r" % (st, b))
    d.request("POST", "/v1/models", MODEL)
    st, h, b = d.request("POST", "/v1/models/ops-model/checks",
                         {"decision": {"x": 1}, "samples": 900000000,
                          "wait_s": 0})
    res.check(st == 202, "long check accepted (202), got %s" % st)
    st, h, b = d.request("GET", "/v1/ready")
    res.check(is_problem(st, h, b, 503) and "queue" in b.get("detail", ""),
              "ready with a full queue: 503 naming the queue, got %s %r"
              % (st, b))
    res.check(h.get("retry-after", "").isdigit(), "ready 503: Retry-After")
    m = scrape(res, d)
    res.check(value(m, "feasgate_queue_depth") == 1,
              "queue depth gauge 1 with one check on the pool")
    res.check(value(m, "feasgate_checks_detached") == 1,
              "one detached check")
    res.check(value(m, "feasgate_checks_unrecorded") == 0,
              "no check end waiting for the store")
    res.check(value(m, "feasgate_http_connections") >= 1,
              "open connections gauge counts the scrape's own: %s"
              % value(m, "feasgate_http_connections"))
    res.check(value(m, "feasgate_http_requests_waiting") == 0,
              "no request waiting for a check")
    res.check(value(m, "feasgate_http_connections_refused_total") == 0,
              "no connection refused")
    res.check(value(m, "feasgate_store_info", backend="sqlite") == 1,
              "the store backend: feasgate_store_info{backend=\"sqlite\"} 1")
    res.check(d.stop() == 0, "ready daemon: exit 0")


def main():
    res = Results()
    if not os.path.exists(apicommon.BIN):
        print("FEASGATE_BIN %s does not exist" % apicommon.BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-ops-") as tmp:
        d = Daemon("sqlite:%s/ops.db" % tmp, results=res)
        if res.check(d.address is not None, "daemon started"):
            try:
                test_metrics(res, d)
                test_openapi(res, d)
            except Exception as e:  # a crash of the test is a failure
                res.check(False, "exception %r" % e)
        res.check(d.stop() == 0, "SIGTERM: exit 0")
        test_ready(res, tmp)
    return res.summary()


if __name__ == "__main__":
    sys.exit(main())
