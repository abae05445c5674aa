#!/usr/bin/python3
"""tests/api/test_shutdown.py -- a clean stop keeps its promises.

SIGTERM while a synchronous check is in flight: the daemon stops accepting,
lets the check finish, answers it (201, status done), records it, and exits
0; after a restart on the same store the check is in the log as done. A
check answered 202 that is still running when the grace period (--grace 0)
runs out is cancelled and recorded as cancelled, with its partial counts.
Every answer is checked against its schema (apicommon.Daemon).

Prints "N passed, N failed" last; exits non-zero on any failure.
"""
import os
import sys
import tempfile
import threading
import time

import apicommon
from apicommon import BIN, Daemon, Results

# The in-flight check takes well under a second in Release but tens of
# seconds under the sanitizers on a busy machine: the first daemon gets a
# grace period (and this script a stop wait) long enough for it to finish,
# since a check still running when --grace runs out is cancelled.
GRACE_S = 150
apicommon.STOP_TIMEOUT_S = GRACE_S + 30

R = Results()

MODEL = {
    "format": 1, "name": "stop-test",
    "decisions": [{"name": "cap"}],
    "uncertain": [{"name": "load", "size": 8,
                   "distribution": {"family": "gamma", "shape": 3, "scale": 2}}],
    "constraints": [{"name": "total", "require": "sum(load) <= cap"}],
}


def wait_until(pred, seconds):
    end = time.time() + seconds
    while time.time() < end:
        if pred():
            return True
        time.sleep(0.05)
    return False


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory(prefix="feasgate-stop-") as tmp:
        store = "sqlite:%s/stop.db" % tmp
        d = Daemon(store, "--grace", str(GRACE_S), results=R)
        if not R.check(d.address is not None, "daemon started"):
            return R.summary()
        st, _, _ = d.request("POST", "/v1/models", MODEL)
        R.check(st == 201, "model registered: %s" % st)

        # A synchronous check large enough to be in flight for a while.
        answer = {}

        def sync_check():
            answer["r"] = d.request("POST", "/v1/models/stop-test/checks",
                                    {"decision": {"cap": 60}, "samples": 6000000,
                                     "seed": 4, "wait_s": 60})

        t = threading.Thread(target=sync_check)
        t.start()
        # Wait until the daemon has accepted and started it.
        started = wait_until(lambda: _running(d), 10)
        R.check(started, "the synchronous check is running before SIGTERM")
        code = d.stop()
        t.join(GRACE_S + 30)
        R.check(code == 0, "SIGTERM with a check in flight: exit 0, got %r" % code)
        st, _, body = answer.get("r", (None, None, None))
        R.check(st == 201, "the in-flight check was answered 201, got %r" % st)
        ok = isinstance(body, dict)
        R.check(ok and body.get("status") == "done" and body["joint"]["samples"] == 6000000,
                "the in-flight check completed all its samples")
        cid = body.get("id") if ok else None

        # Restart: it is in the log as done; then a detached check is
        # cancelled at shutdown when the grace period is 0.
        d = Daemon(store, "--grace", "0", results=R)
        if R.check(d.address is not None, "restart on the same store"):
            st, _, got = d.request("GET", "/v1/checks/%s" % cid)
            R.check(st == 200 and got.get("status") == "done",
                    "the completed check is in the log as done: %s %s"
                    % (st, got.get("status") if isinstance(got, dict) else got))
            st, _, run = d.request("POST", "/v1/models/stop-test/checks",
                                   {"decision": {"cap": 60}, "samples": 200000000,
                                    "seed": 5, "wait_s": 0})
            R.check(st == 202, "a long check answered 202: %s" % st)
            rid = run.get("id") if isinstance(run, dict) else None
            time.sleep(0.5)
            code = d.stop()
            R.check(code == 0, "SIGTERM with a detached check: exit 0, got %r" % code)
            d = Daemon(store, results=R)
            if R.check(d.address is not None, "second restart"):
                st, _, got = d.request("GET", "/v1/checks/%s" % rid)
                ok = st == 200 and isinstance(got, dict)
                R.check(ok and got.get("status") == "cancelled",
                        "the detached check was recorded as cancelled: %s"
                        % (got.get("status") if ok else st))
                R.check(ok and got["joint"]["samples"] < 200000000,
                        "its partial counts are kept")
                d.stop()
    return R.summary()


def _running(d):
    """The check list shows a running check."""
    try:
        st, _, body = d.request("GET", "/v1/checks?limit=5")
    except OSError:
        return False
    return st == 200 and any(c.get("status") == "running" for c in body.get("checks", []))


if __name__ == "__main__":
    sys.exit(main())
