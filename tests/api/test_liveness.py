#!/usr/bin/python3
"""tests/api/test_liveness.py -- no request waits for another's work, and
a deadline holds.

Every build:
  - 100 running checks cancelled at random moments: each DELETE answers
    200 `cancelled` within 2 s, and a GET of the same check made while the
    cancel is in progress answers within 1 s;
  - an in-sample evaluation runs on the pool as part of its check: the
    readiness probe counts its worker busy, and DELETE cancels it.
Builds with the fault seam (-DFG_FAULTS=ON; the daemon says "fault_seam"
at start, otherwise these parts are skipped and said so):
  - a check whose interval computation is slow (FG_FAULT_SLOW_SEED/MS)
    delays neither GET of another check, /v1/ready, /metrics nor a new
    POST by more than 100 ms over their own time before it;
  - --max-check-time with a worker stuck for ever in one block
    (FG_FAULT_STALL_SEED/SAMPLE): the waiting client is answered, the check
    is recorded `timed_out` with the chunks merged before the stuck one;
  - SIGTERM with a stuck worker: the daemon exits within --grace + 5 s,
    every acknowledged check is recorded with a final state, and the
    SQLite file passes PRAGMA integrity_check.
Every answer is checked against its schema (apicommon.Daemon).

Prints "N passed, N failed" last; exits non-zero on any failure.
"""
import os
import random
import sqlite3
import sys
import tempfile
import threading
import time

from apicommon import BIN, Daemon, Results

R = Results()


def check(cond, what):
    """R.check, printing the figure either way (the timings are the point
    of this script)."""
    if cond:
        print("ok: " + what, flush=True)
    return R.check(cond, what)

MODEL = {
    "format": 1, "name": "live-test",
    "decisions": [{"name": "cap"}],
    "uncertain": [{"name": "load", "size": 8,
                   "distribution": {"family": "gamma", "shape": 3, "scale": 2}}],
    "constraints": [{"name": "total", "require": "sum(load) <= cap"}],
}
CHECKS = "/v1/models/live-test/checks"
BIG = 200000000  # samples: runs far longer than any test waits
CHUNK = 16384    # the daemon's default --chunk


def timed(fn, *args):
    t0 = time.monotonic()
    out = fn(*args)
    return time.monotonic() - t0, out


def start(d, seed, samples=BIG, **extra):
    body = dict({"decision": {"cap": 60}, "samples": samples, "seed": seed,
                 "wait_s": 0}, **extra)
    st, _, b = d.request("POST", CHECKS, body)
    return st, (b.get("id") if isinstance(b, dict) else None), b


def fault_build(d):
    """The daemon says "fault_seam" right after "listening" in fault
    builds; give its log a moment to arrive."""
    end = time.time() + 1.5
    while time.time() < end:
        if any('"fault_seam"' in line for line in d.lines):
            return True
        time.sleep(0.05)
    return False


def test_cancels(d):
    """100 cancels at random moments; GET during the end never blocks."""
    rng = random.Random(20261202)
    worst_delete = worst_get = 0.0
    bad = []
    for i in range(100):
        st, cid, _ = start(d, 1000 + i)
        if st != 202 or not cid:
            bad.append("start %d: %s" % (i, st))
            continue
        time.sleep(rng.uniform(0, 0.05))
        got = {}

        def reader():
            time.sleep(0.002)
            got["t"], got["r"] = timed(d.request, "GET", "/v1/checks/" + cid)

        t = threading.Thread(target=reader)
        t.start()
        dt, (st, _, b) = timed(d.request, "DELETE", "/v1/checks/" + cid)
        t.join(30)
        worst_delete = max(worst_delete, dt)
        worst_get = max(worst_get, got.get("t", 99))
        if st != 200 or not isinstance(b, dict) or b.get("status") != "cancelled":
            bad.append("cancel %d: %s %r" % (i, st, b.get("status")
                                            if isinstance(b, dict) else b))
        elif got.get("r", (0,))[0] != 200:
            bad.append("GET during cancel %d: %r" % (i, got.get("r", (0,))[0]))
    check(not bad, "100 cancels at random moments all end cancelled: %r"
          % bad[:3])
    check(worst_delete < 2.0,
          "every cancel ends within 2 s of DELETE (worst %.3f s)" % worst_delete)
    check(worst_get < 1.0,
          "GET during a cancel never blocks (worst %.3f s)" % worst_get)


def test_in_sample_on_pool(d):
    st, cid, b = start(d, 31, samples=1000,
                       in_sample={"seed": 7, "count": 100000000})
    check(st == 202 and cid, "a check with a large in-sample evaluation is "
          "answered 202 at once: %s" % st)
    if not cid:
        return
    time.sleep(0.3)
    st, _, ready = d.request("GET", "/v1/ready")
    busy = ready.get("workers_busy", 0) if isinstance(ready, dict) else 0
    check(st == 200 and busy >= 1,
          "the in-sample evaluation keeps a worker busy, as /v1/ready "
          "says (%r)" % busy)
    dt, (st, _, b) = timed(d.request, "DELETE", "/v1/checks/" + cid)
    check(st == 200 and isinstance(b, dict) and b.get("status") == "cancelled"
          and dt < 2.0,
          "DELETE cancels it during its in-sample evaluation: %s %r in %.3f s"
          % (st, b.get("status") if isinstance(b, dict) else b, dt))
    inside = b.get("in_sample", {}) if isinstance(b, dict) else {}
    check(isinstance(inside, dict) and inside.get("count", -1) < 100000000,
          "its in-sample count is what was evaluated before the cancel: %r"
          % inside)


def test_slow_interval(tmp):
    d = Daemon("sqlite:%s/slow.db" % tmp, results=R,
               env=dict(os.environ, FG_FAULT_SLOW_SEED="4242",
                        FG_FAULT_SLOW_MS="3000"))
    if not check(d.address is not None, "daemon with a slow interval started"):
        return
    try:
        d.request("POST", "/v1/models", MODEL)
        st, other, _ = start(d, 5, samples=20000, wait_s=10)
        check(st == 201, "another check ends: %s" % st)

        def ops():
            return [
                timed(d.request, "GET", "/v1/checks/%s" % other)[0],
                timed(d.request, "GET", "/v1/ready")[0],
                timed(d.request, "GET", "/metrics")[0],
                timed(d.request, "POST", CHECKS,
                      {"decision": {"cap": 60}, "samples": 2000, "seed": 6,
                       "wait_s": 10})[0],
            ]
        base = [max(x) for x in zip(*(ops() for _ in range(3)))]
        # The slow check: its end figures take 3 s to compute.
        st, slow, _ = start(d, 4242, samples=20000)
        check(st in (201, 202), "the slow check starts: %s" % st)
        time.sleep(0.2)
        during = [max(x) for x in zip(*(ops() for _ in range(3)))]
        names = ["GET another check", "/v1/ready", "/metrics", "a new POST"]
        for n, b0, b1 in zip(names, base, during):
            check(b1 <= b0 + 0.1,
                  "%s while an interval takes 3 s: %.3f s (before: %.3f s)"
                  % (n, b1, b0))
        end = time.time() + 20
        st, _, got = d.request("GET", "/v1/checks/%s" % slow)
        while time.time() < end and isinstance(got, dict) \
                and got.get("status") == "running":
            time.sleep(0.2)
            st, _, got = d.request("GET", "/v1/checks/%s" % slow)
        check(isinstance(got, dict) and got.get("status") == "done",
              "the slow check ends done: %r" % (got.get("status")
                                                 if isinstance(got, dict)
                                                 else got))
        ms = got.get("elapsed_ms", 0) if isinstance(got, dict) else 0
        check(ms >= 3000, "its end figures did take the armed 3 s, so the "
              "timings above fell inside it (elapsed %r ms)" % ms)
    finally:
        d.stop()


def test_stuck_deadline(tmp):
    d = Daemon("sqlite:%s/stuck.db" % tmp, "--max-check-time", "2",
               results=R,
               env=dict(os.environ, FG_FAULT_STALL_SEED="777",
                        FG_FAULT_STALL_SAMPLE=str(2 * CHUNK + 100)))
    if not check(d.address is not None, "daemon with a stuck block started"):
        return
    try:
        d.request("POST", "/v1/models", MODEL)
        dt, (st, _, b) = timed(d.request, "POST", CHECKS,
                               {"decision": {"cap": 60}, "samples": 2000000,
                                "seed": 777, "wait_s": 20})
        ok = isinstance(b, dict)
        check(st == 201 and ok and b.get("status") == "timed_out",
              "a check with a stuck worker ends timed_out: %s %r"
              % (st, b.get("status") if ok else b))
        check(dt < 2 + 1 + 2,
              "the waiting client is answered soon after --max-check-time "
              "(%.2f s)" % dt)
        # Chunks 0 and 1 merged; chunk 2 is stuck, so nothing after it.
        n = b.get("joint", {}).get("samples") if ok else None
        check(n == 2 * CHUNK,
              "it keeps the counts merged before the stuck chunk: %r" % n)
        st, _, got = d.request("GET", "/v1/checks/%s" % b.get("id"))
        check(st == 200 and got.get("status") == "timed_out"
              and got.get("joint", {}).get("samples") == 2 * CHUNK,
              "recorded timed_out with its merged counts")
        st, _, ready = d.request("GET", "/v1/ready")
        check(st == 200, "the daemon still answers /v1/ready: %s" % st)
        st, cid, _ = start(d, 8, samples=20000, wait_s=10)
        check(st == 201, "a new check still runs on the other worker: %s" % st)
    finally:
        d.stop()


def test_stuck_sigterm(tmp):
    path = "%s/term.db" % tmp
    grace = 1
    d = Daemon("sqlite:" + path, "--grace", str(grace), results=R,
               env=dict(os.environ, FG_FAULT_STALL_SEED="778",
                        FG_FAULT_STALL_SAMPLE="0"))
    if not check(d.address is not None, "daemon with a stuck block started"):
        return
    d.request("POST", "/v1/models", MODEL)
    ids = []
    # The stuck check's client waits (wait_s 60): it must be answered.
    waiter = {}

    def wait_for_stuck():
        waiter["r"] = d.request("POST", CHECKS,
                                {"decision": {"cap": 60}, "samples": BIG,
                                 "seed": 778, "wait_s": 60})

    t = threading.Thread(target=wait_for_stuck)
    t.start()
    for seed in (9, 10):
        st, cid, _ = start(d, seed)
        check(st == 202, "check seed %d acknowledged: %s" % (seed, st))
        if cid:
            ids.append(cid)
    time.sleep(0.5)
    t0 = time.monotonic()
    code = d.stop()
    dt = time.monotonic() - t0
    t.join(30)
    st, _, b = waiter.get("r", (None, None, None))
    check(st == 201 and isinstance(b, dict) and b.get("status") == "cancelled",
          "the client waiting for the stuck check is answered, cancelled: "
          "%s %r" % (st, b.get("status") if isinstance(b, dict) else b))
    if isinstance(b, dict) and b.get("id"):
        ids.append(b["id"])
    check(code == 0, "SIGTERM with a stuck worker: exit 0, got %r" % code)
    check(dt < grace + 5, "it exits within --grace + 5 s: %.2f s" % dt)
    db = sqlite3.connect(path)
    try:
        (integrity,) = db.execute("PRAGMA integrity_check").fetchone()
        check(integrity == "ok", "PRAGMA integrity_check: %s" % integrity)
        rows = dict(db.execute("SELECT id, status FROM checks").fetchall())
    finally:
        db.close()
    for cid in ids:
        check(rows.get(cid) in ("cancelled", "timed_out", "interrupted"),
              "acknowledged check %s recorded with a final state: %r"
              % (cid, rows.get(cid)))


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-live-") as tmp:
        d = Daemon("sqlite:%s/live.db" % tmp, "--max-scenarios", "100000000",
                   results=R)
        if not check(d.address is not None, "daemon started"):
            return R.summary()
        faults = fault_build(d)
        try:
            st, _, _ = d.request("POST", "/v1/models", MODEL)
            check(st == 201, "model registered: %s" % st)
            test_cancels(d)
            test_in_sample_on_pool(d)
        finally:
            check(d.stop() == 0, "clean stop")
        if not faults:
            print("fault seam not built in (-DFG_FAULTS=ON): the stuck-worker "
                  "and slow-interval parts are not run")
        else:
            test_slow_interval(tmp)
            test_stuck_deadline(tmp)
            test_stuck_sigterm(tmp)
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
