#!/usr/bin/python3
"""tests/api/test_remote.py -- the remote gate, cancellation and deadlines.

Starts `feasgate serve` (apicommon.Daemon) on a temporary SQLite store with
keys, registers a one-line model (u ~ Normal(0, 1), require u <= x, so
P(feasible) = Phi(x)) and checks:
  - `feasgate check --server URL --key KEY MODEL REQUEST.json`: exit 0 for
    a passing candidate (x = 3), 1 for a failing one (x = 0), 2 for an
    inconclusive one (x = Phi^-1(0.9) with 4096 samples), each printing the
    result body with the same counts as the offline `feasgate check` of
    the same model, request and seed; 3 for an unknown model, a missing or
    under-privileged key, a bad body (the problem's detail and pointer on
    stderr), an unreachable server and bad usage; FEASGATE_KEY as the twin
    of --key; the 202 path (wait_s 0, polled to the end); --timeout
    cancelling a check that runs on;
  - DELETE /v1/checks/{id}: a running asynchronous check and one whose
    request is still waiting both end `cancelled` with partial counts,
    recorded in the store; 409 once ended, 404 for an unknown id;
  - --max-check-time: a check that runs longer ends `timed_out` with its
    partial counts, recorded; the remote gate exits 3 on it.

Standard library (plus apicommon's jsonschema checks of every answer).
Prints one line per failed check and "N passed, N failed" as the last line;
exits non-zero on any failure.
"""
import json
import os
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time

from apicommon import BIN, Daemon, Results, is_problem

R = Results()
check = R.check

MODEL = {
    "format": 1,
    "name": "gate",
    "title": "remote gate test model",
    "decisions": [{"name": "x", "lower": -10, "upper": 10}],
    "uncertain": [{"name": "u", "distribution":
                   {"family": "normal", "mean": 0, "sd": 1}}],
    "constraints": [{"name": "cap", "require": "u <= x"}],
}
# Phi(3) = 0.99865 passes, Phi(0) = 0.5 fails, Phi(1.28155) = 0.9 sits on
# the target, so 4096 samples leave it inconclusive (the offline check of
# the same seed says so too, and the counts are compared below).
CANDIDATES = [("pass", 3, 0), ("fail", 0, 1), ("inconclusive", 1.2815515655, 2)]
# Large enough that a check asked to wait 0 s is still running when
# answered (202), small enough to end within seconds on 2 cores.
ASYNC_SAMPLES = 20000000
# Runs for minutes: only ever cancelled or timed out.
LONG_SAMPLES = 1000000000


def bearer(key):
    return {"Authorization": "Bearer " + key}


def add_key(store, name, role):
    p = subprocess.run([BIN, "keys", "add", name, "--role", role, "--store",
                        store], capture_output=True, text=True, timeout=60)
    check(p.returncode == 0, "keys add %s: %s" % (name, p.stderr))
    return p.stdout.strip().splitlines()[-1]


def write(tmp, name, obj):
    path = os.path.join(tmp, name)
    with open(path, "w") as f:
        json.dump(obj, f)
    return path


def gate(url, *args, key=None, env_key=None, timeout=300):
    cmd = [BIN, "check", "--server", url] + list(args)
    if key is not None:
        cmd[4:4] = ["--key", key]
    env = dict(os.environ)
    env.pop("FEASGATE_KEY", None)
    if env_key is not None:
        env["FEASGATE_KEY"] = env_key
    p = subprocess.run(cmd, capture_output=True, text=True, env=env,
                       timeout=timeout)
    body = None
    try:
        body = json.loads(p.stdout) if p.stdout.strip() else None
    except ValueError:
        pass
    return p.returncode, body, p.stderr


def offline(tmp, req_path):
    mpath = write(tmp, "model.json", MODEL)
    p = subprocess.run([BIN, "check", mpath, req_path], capture_output=True,
                       text=True, timeout=300)
    return p.returncode, json.loads(p.stdout)


def stored(store, cid):
    db = sqlite3.connect(store[len("sqlite:"):])
    row = db.execute("SELECT status, result, key FROM checks WHERE id = ?",
                     (cid,)).fetchone()
    db.close()
    return row


def wait_for(pred, seconds):
    end = time.monotonic() + seconds
    while not pred():
        if time.monotonic() > end:
            return False
        time.sleep(0.1)
    return True


def test_gate(d, tmp, keys, store):
    url = "http://%s" % d.address
    for what, x, code in CANDIDATES:
        req = write(tmp, what + ".json", {"decision": {"x": x},
                                          "samples": 4096, "seed": 11,
                                          "target": 0.9, "label": what})
        rc, body, err = gate(url, "gate", req, key=keys["checker"])
        check(rc == code, "%s candidate: exit %d, got %d (%s)"
              % (what, code, rc, err.strip()))
        check(isinstance(body, dict) and body.get("verdict") == what
              and body.get("status") == "done"
              and body.get("key") == "pipe",
              "%s candidate: the result body is printed: %r"
              % (what, (body or {}).get("verdict")))
        orc, ob = offline(tmp, req)
        check(orc == code and body and
              body["joint"]["satisfied"] == ob["joint"]["satisfied"]
              and body["joint"]["samples"] == ob["joint"]["samples"] == 4096,
              "%s: remote counts equal the offline counts" % what)
        if body:
            row = stored(store, body.get("id"))
            check(row and row[0] == "done" and row[2] == "pipe",
                  "%s: recorded with its key: %r" % (what, row and row[::2]))
    req = write(tmp, "pass-env.json", {"decision": {"x": 3}, "samples": 2048})
    rc, body, err = gate(url, "gate", req, env_key=keys["checker"])
    check(rc == 0, "FEASGATE_KEY is the twin of --key: %d %s" % (rc, err))
    rc, body, err = gate(url + "/", "gate", req, key=keys["checker"])
    check(rc == 0, "a trailing / on --server is fine: %d %s" % (rc, err))

    rc, body, err = gate(url, "nosuch", req, key=keys["checker"])
    check(rc == 3 and "404" in err and "nosuch" in err and body is None,
          "unknown model: exit 3 with the problem's detail: %r" % err)
    rc, _, err = gate(url, "gate", req)
    check(rc == 3 and "401" in err, "no key: exit 3, 401 said: %r" % err)
    rc, _, err = gate(url, "gate", req, key="fgk_" + "Z" * 43)
    check(rc == 3 and "401" in err, "wrong key: exit 3: %r" % err)
    rc, _, err = gate(url, "gate", req, key=keys["reader"])
    check(rc == 3 and "403" in err and "role" in err,
          "reader key: exit 3 with the 403 detail: %r" % err)
    bad = write(tmp, "bad.json", {"decision": {"x": 3, "y": 1}})
    rc, _, err = gate(url, "gate", bad, key=keys["checker"])
    check(rc == 3 and "400" in err and "/decision/y" in err,
          "bad body: exit 3 with detail and pointer: %r" % err)
    rc, _, err = gate("http://127.0.0.1:1", "gate", req, key=keys["checker"])
    check(rc == 3 and err.strip(), "unreachable server: exit 3: %r" % err)
    rc, _, err = gate("ftp://" + d.address, "gate", req, key=keys["checker"])
    check(rc == 3 and "http" in err, "non-HTTP URL: exit 3: %r" % err)
    rc, _, err = gate(url, "gate", key=keys["checker"])
    check(rc == 3 and "usage" in err, "missing REQUEST.json: exit 3")
    rc, _, err = gate(url, "gate", os.path.join(tmp, "absent.json"),
                      key=keys["checker"])
    check(rc == 3 and "absent.json" in err, "unreadable request: exit 3")
    rc, _, err = gate(url, "Bad Name", req, key=keys["checker"])
    check(rc == 3 and "model name" in err, "invalid model name: exit 3")
    rc, _, err = gate(url, "gate", req, "--timeout", "0",
                      key=keys["checker"])
    check(rc == 3 and "--timeout" in err, "--timeout 0 refused: exit 3")

    # 202, then polled to the end.
    slow = write(tmp, "slow.json", {"decision": {"x": 3},
                                    "samples": ASYNC_SAMPLES, "seed": 4,
                                    "wait_s": 0})
    before = len(d.lines)
    rc, body, err = gate(url, "gate", slow, key=keys["checker"])
    check(rc == 0 and body and body.get("status") == "done"
          and body["joint"]["samples"] == ASYNC_SAMPLES,
          "the 202 path is polled to the end: exit %d %s" % (rc, err))
    posts = [json.loads(l) for l in d.lines[before:]
             if '"event":"request"' in l and '"POST"' in l]
    check(any(e.get("status") == 202 for e in posts),
          "the POST was answered 202: %r" % [e.get("status") for e in posts])
    gets = [l for l in d.lines[before:] if '"event":"request"' in l
            and '"GET"' in l and "/v1/checks/" in l]
    check(len(gets) >= 1, "and GET /v1/checks/{id} was polled (%d)"
          % len(gets))

    # --timeout: gives up, exits 3 and cancels the check it left.
    long = write(tmp, "long.json", {"decision": {"x": 3},
                                    "samples": LONG_SAMPLES, "wait_s": 0,
                                    "label": "given up"})
    t0 = time.monotonic()
    rc, body, err = gate(url, "gate", long, "--timeout", "1.5",
                         key=keys["checker"])
    took = time.monotonic() - t0
    check(rc == 3 and "timeout" in err and took < 30,
          "--timeout 1.5: exit 3 after %.1fs: %r" % (took, err))
    st, _, b = d.request("GET", "/v1/checks?label=given%20up", None,
                         bearer(keys["reader"]))
    ids = [c["id"] for c in b.get("checks", [])] if st == 200 else []
    check(len(ids) == 1 and wait_for(
        lambda: stored(store, ids[0])[0] == "cancelled", 20),
        "the abandoned check was cancelled: %r"
        % (stored(store, ids[0])[0] if ids else None))


def test_cancel(d, keys, store):
    ck = bearer(keys["checker"])
    body = {"decision": {"x": 3}, "samples": LONG_SAMPLES, "seed": 9,
            "wait_s": 0}
    st, _, b = d.request("POST", "/v1/models/gate/checks", body, ck)
    check(st == 202 and b.get("status") == "running", "long check: 202")
    cid = b.get("id", "")
    time.sleep(0.5)
    st, h, b = d.request("DELETE", "/v1/checks/%s" % cid, None,
                         bearer(keys["reader"]))
    check(is_problem(st, h, b, 403), "a reader cannot cancel: %d" % st)
    st, _, b = d.request("DELETE", "/v1/checks/%s" % cid, None, ck)
    n = b.get("joint", {}).get("samples", 0) if isinstance(b, dict) else 0
    check(st == 200 and b.get("status") == "cancelled"
          and 0 < n < LONG_SAMPLES and b.get("verdict") is None
          and b.get("finished_at"),
          "DELETE: 200, cancelled, partial counts (%d of %d)"
          % (n, LONG_SAMPLES))
    sat = b.get("joint", {}).get("satisfied", -1) if st == 200 else -1
    check(0 <= sat <= n, "partial satisfied count %d of %d" % (sat, n))
    st, _, g = d.request("GET", "/v1/checks/%s" % cid, None, ck)
    check(st == 200 and g.get("status") == "cancelled"
          and g.get("joint", {}).get("samples") == n,
          "GET after DELETE: the same cancelled record")
    row = stored(store, cid)
    check(row and row[0] == "cancelled" and row[1]
          and json.loads(row[1])["joint"]["samples"] == n,
          "the store holds the cancelled result: %r" % (row and row[0]))
    st, h, b = d.request("DELETE", "/v1/checks/%s" % cid, None, ck)
    check(is_problem(st, h, b, 409) and "cancelled" in b.get("detail", ""),
          "DELETE again: 409 (%d)" % st)
    st, h, b = d.request("DELETE", "/v1/checks/chk_01M8SSM39JRCH76JQCHZYTAFKG",
                         None, ck)
    check(is_problem(st, h, b, 404), "DELETE of an unknown id: 404 (%d)" % st)
    st, h, b = d.request("DELETE", "/v1/checks/not-an-id", None, ck)
    check(is_problem(st, h, b, 404), "DELETE of a malformed id: 404 (%d)" % st)

    # A check whose request is still waiting (wait_s 30) is found too.
    answer = {}

    def post():
        answer["r"] = d.request("POST", "/v1/models/gate/checks",
                                {"decision": {"x": 3},
                                 "samples": LONG_SAMPLES, "wait_s": 30,
                                 "label": "waited"}, ck)

    t = threading.Thread(target=post)
    t.start()
    running = []

    def find():
        st, _, b = d.request("GET", "/v1/checks?label=waited", None, ck)
        running[:] = [c["id"] for c in b.get("checks", [])
                      if c.get("status") == "running"] if st == 200 else []
        return bool(running)

    check(wait_for(find, 10), "the waited check is listed as running")
    wid = running[0] if running else ""
    st, _, g = d.request("GET", "/v1/checks/%s" % wid, None, ck)
    check(st == 200 and g.get("status") == "running" and "progress" in g,
          "GET shows the waited check live, with progress")
    t0 = time.monotonic()
    st, _, b = d.request("DELETE", "/v1/checks/%s" % wid, None, ck)
    check(st == 200 and b.get("status") == "cancelled",
          "DELETE of a waited check: cancelled (%d)" % st)
    t.join(60)
    pst, _, pb = answer.get("r", (0, {}, {}))
    check(pst == 201 and pb.get("status") == "cancelled"
          and time.monotonic() - t0 < 20,
          "its POST answers 201 with the cancelled body (%d)" % pst)
    row = stored(store, wid)
    check(row and row[0] == "cancelled" and row[1],
          "the waited check is recorded cancelled")


def test_deadline(tmp, keys_store):
    store, key = keys_store
    d = Daemon(store, "--max-check-time", "0.5", results=R)
    if not check(d.address is not None, "daemon with --max-check-time 0.5"):
        d.stop()
        return
    t0 = time.monotonic()
    st, _, b = d.request("POST", "/v1/models/gate/checks",
                         {"decision": {"x": 3}, "samples": LONG_SAMPLES,
                          "wait_s": 30}, bearer(key))
    took = time.monotonic() - t0
    n = b.get("joint", {}).get("samples", 0) if isinstance(b, dict) else 0
    check(st == 201 and b.get("status") == "timed_out"
          and 0 < n < LONG_SAMPLES and took < 20,
          "a check past its deadline ends timed_out with partial counts "
          "(%d, %d samples, %.1fs)" % (st, n, took))
    row = stored(store, b.get("id", "")) if isinstance(b, dict) else None
    check(row and row[0] == "timed_out" and row[1]
          and json.loads(row[1])["joint"]["samples"] == n,
          "timed_out is recorded with its counts: %r" % (row and row[0]))
    # Asynchronous: recorded by the registry.
    st, _, b = d.request("POST", "/v1/models/gate/checks",
                         {"decision": {"x": 3}, "samples": LONG_SAMPLES,
                          "wait_s": 0}, bearer(key))
    aid = b.get("id", "") if isinstance(b, dict) else ""
    check(st == 202 and wait_for(
        lambda: (stored(store, aid) or ("",))[0] == "timed_out", 20),
        "an asynchronous check times out and is recorded")
    req = write(tmp, "deadline.json", {"decision": {"x": 3},
                                       "samples": LONG_SAMPLES})
    rc, body, err = gate("http://%s" % d.address, "gate", req, key=key)
    check(rc == 3 and body and body.get("status") == "timed_out"
          and "timed_out" in err,
          "the remote gate exits 3 on timed_out: %d %r" % (rc, err))
    check(d.stop() == 0, "clean stop")
    p = subprocess.run([BIN, "serve", "--max-check-time", "0", "--store",
                        store], capture_output=True, text=True, timeout=20)
    check(p.returncode == 3 and "--max-check-time" in p.stderr,
          "--max-check-time 0 is refused: %r" % p.stderr)


def main():
    with tempfile.TemporaryDirectory() as tmp:
        store = "sqlite:" + os.path.join(tmp, "remote.db")
        keys = {"checker": add_key(store, "pipe", "checker"),
                "reader": add_key(store, "dash", "reader"),
                "author": add_key(store, "modeller", "author")}
        d = Daemon(store, results=R)
        if not check(d.address is not None, "the daemon starts: %r" % d.first):
            d.stop()
            return R.summary()
        try:
            st, _, _ = d.request("POST", "/v1/models", MODEL,
                                 bearer(keys["author"]))
            check(st == 201, "model registered: %d" % st)
            test_gate(d, tmp, keys, store)
            test_cancel(d, keys, store)
        finally:
            check(d.stop() == 0, "clean stop")
        test_deadline(tmp, (store, keys["checker"]))
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
