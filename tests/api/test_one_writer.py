#!/usr/bin/python3
"""tests/api/test_one_writer.py -- one daemon per SQLite file.

Starts `feasgate serve` (daemon A, binary from $FEASGATE_BIN) on a
temporary SQLite store, registers a model and starts a long detached
check, then:

- a second `feasgate serve` on the same file (daemon B) exits non-zero
  within seconds, its message naming the store and A's pid;
- A's running check is still `running` afterwards (B did not mark it
  interrupted) and A still answers;
- the commands that only open the store work while A runs: `feasgate
  keys add`, `keys list`, `register`;
- once A has stopped, a daemon starts on the file again (the lock goes
  with its process).

Standard library plus python3-jsonschema; run with /usr/bin/python3. The
last line is "N passed, N failed"; exit status 1 on any failure.
"""
import json
import os
import subprocess
import sys
import tempfile

import apicommon
from apicommon import Daemon, Results

MODEL = {
    "format": 1,
    "name": "one-writer",
    "title": "a tank level kept under its rim",
    "decisions": [{"name": "fill", "lower": 0, "upper": 10}],
    "uncertain": [{"name": "inflow", "distribution":
                   {"family": "normal", "mean": 1, "sd": 0.5}}],
    "constraints": [{"name": "rim", "require": "fill + inflow <= 8"}],
}


def run(*args, timeout=60):
    p = subprocess.run([apicommon.BIN] + list(args), capture_output=True,
                       timeout=timeout, stdin=subprocess.DEVNULL)
    return p.returncode, p.stdout.decode(), p.stderr.decode()


def main():
    res = Results()
    auth = {}
    cid = "?"
    with tempfile.TemporaryDirectory(prefix="feasgate-one-") as tmp:
        path = os.path.join(tmp, "one.db")
        url = "sqlite:" + path
        a = Daemon(url, "--grace", "0.5", results=res)
        if not res.check(a.address is not None,
                         "daemon A started; first line %r" % a.first):
            a.stop()
            return res.summary()
        try:
            pid_a = json.loads(a.first)["pid"]
            st, _, _ = a.request("POST", "/v1/models", MODEL)
            res.check(st == 201, "model registered, got %s" % st)
            st, _, running = a.request(
                "POST", "/v1/models/one-writer/checks",
                {"decision": {"fill": 2}, "samples": 900000000, "seed": 3,
                 "wait_s": 0})
            res.check(st == 202 and running.get("status") == "running",
                      "long check detached, got %s" % st)
            cid = running.get("id", "?")

            # daemon B on the same file
            code, _, err = run("serve", "--listen", "127.0.0.1:0",
                               "--store", url, "--workers", "1", timeout=30)
            res.check(code not in (0, None),
                      "second daemon refused to start, exit %r" % code)
            res.check(("pid %d" % pid_a) in err and path in err,
                      "its message names the store and A's pid %d: %r"
                      % (pid_a, err[-600:]))
            st, _, b = a.request("GET", "/v1/checks/" + cid)
            res.check(st == 200 and b.get("status") == "running",
                      "A's check still running after B's attempt, got %s %r"
                      % (st, b.get("status") if isinstance(b, dict) else b))
            res.check(a.alive(), "A still answers")

            # commands that only open the store
            code, out, err = run("keys", "add", "ci-reader", "--role",
                                 "reader", "--store", url)
            res.check(code == 0 and "fgk_" in out,
                      "keys add while A runs: exit %r %r" % (code, err[-300:]))
            key = out.strip().splitlines()[-1] if out.strip() else ""
            auth = {"Authorization": "Bearer " + key}
            code, out, err = run("keys", "list", "--store", url)
            res.check(code == 0 and "ci-reader" in out,
                      "keys list while A runs: exit %r %r" % (code, out[-300:]))
            doc = dict(MODEL, name="one-writer-cli")
            mpath = os.path.join(tmp, "m.json")
            with open(mpath, "w") as f:
                json.dump(doc, f)
            code, out, err = run("register", "--store", url, mpath)
            res.check(code == 0, "register while A runs: exit %r %r"
                      % (code, err[-300:]))
            # with a live key in the store every route wants one
            st, _, _ = a.request("GET", "/v1/models/one-writer-cli",
                                 headers=auth)
            res.check(st == 200, "A sees the CLI's model, got %s" % st)
            st, _, b = a.request("GET", "/v1/checks/" + cid, headers=auth)
            res.check(st == 200 and b.get("status") == "running",
                      "A's check still running after the CLI, got %s" % st)
        except Exception as e:  # a crash of the test is a failure
            res.check(False, "exception %r" % e)
        # A's stop cancels its detached check after --grace
        res.check(a.stop() == 0, "A stopped: exit 0")

        c = Daemon(url, results=res)
        res.check(c.address is not None,
                  "a daemon starts once A is gone; first line %r" % c.first)
        if c.address:
            st, _, b = c.request("GET", "/v1/checks/" + cid, headers=auth)
            res.check(st == 200 and b.get("status") == "cancelled",
                      "A's check recorded cancelled at its stop, got %s %r"
                      % (st, b.get("status") if isinstance(b, dict) else b))
        res.check(c.stop() == 0, "third daemon stopped: exit 0")
    return res.summary()


if __name__ == "__main__":
    sys.exit(main())
