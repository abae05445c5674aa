#!/usr/bin/python3
"""tests/api/test_replay.py -- POST /v1/checks/{id}/replay and
`feasgate replay --store STORE ID`.

With one temporary SQLite store, runs checks on a daemon with --workers 1
(a Monte Carlo check and an antithetic one, several chunks each: --chunk
256) and checks:
  - a replay on --workers 1 and, after a restart, on --workers 2 (and
    --chunk 512) reproduces every count: reproduced true, no differences,
    the replay's samples and satisfied equal the original's;
  - the replay is logged as a check of its own: GET /v1/checks/{replay}
    has replay_of = the original, and the store row's replay_of column
    (read with the sqlite3 command) names it too;
  - with the daemon stopped, the stored request's decision is edited in
    the SQLite row (sqlite3 command): the offline `feasgate replay` exits
    1 and a replay over HTTP answers reproduced false with
    /joint/satisfied among the differences; an untouched check still
    replays offline with exit 0;
  - an unknown check is 404;
  - with FG_TEST_PG_HOST/PORT/USER set (tests/pg/cluster.sh), the same on
    the PostgreSQL store: a replay reproduces, and the row's replay_of
    column (read with psql) names the original; skipped otherwise.
Counts do not depend on the number of workers or the chunk size (the
engine merges chunk tallies in order), which is what makes this exact.

Standard library plus apicommon; prints "N passed, N failed" last.
"""
import json
import os
import subprocess
import sys
import tempfile

from apicommon import BIN, Daemon, Results, psql

results = Results()
check = results.check

MODEL = {
    "format": 1,
    "name": "replay-api",
    "decisions": [{"name": "cap"}],
    "uncertain": [
        {"name": "dur", "size": 3,
         "distribution": {"family": "normal", "mean": [2, 3, 4], "sd": 1}},
    ],
    "constraints": [
        {"name": "fits", "require": "sum(dur) <= cap"},
        {"name": "each", "require": "dur <= 5.5"},
    ],
}
REQ = {"decision": {"cap": 10.5}, "samples": 5000, "seed": 77}


def replay(d, cid):
    return d.request("POST", "/v1/checks/%s/replay" % cid, {})


def sqlite(db, sql):
    out = subprocess.run(["sqlite3", db, sql], capture_output=True, text=True)
    return out.returncode, out.stdout.strip(), out.stderr.strip()


def run_daemon(store, workers, chunk, body):
    d = Daemon("sqlite:" + store, "--workers", str(workers), "--chunk",
               str(chunk), results=results)
    if check(d.address is not None, "daemon --workers %d started" % workers):
        try:
            body(d)
        except Exception as e:  # a crash of the test is a failure
            check(False, "exception %r" % e)
    check(d.stop() == 0, "SIGTERM: exit status 0")


def pg_part():
    need = ("FG_TEST_PG_HOST", "FG_TEST_PG_PORT", "FG_TEST_PG_USER")
    if not all(os.environ.get(k) for k in need):
        print("PostgreSQL part not run: %s not set" % ", ".join(need))
        return

    db = "fgreplay_%d" % os.getpid()
    psql("DROP DATABASE IF EXISTS %s" % db)
    psql("CREATE DATABASE %s" % db)
    url = "postgresql:///%s?host=%s&port=%s&user=%s" % (
        db, os.environ["FG_TEST_PG_HOST"], os.environ["FG_TEST_PG_PORT"],
        os.environ["FG_TEST_PG_USER"])
    d = Daemon(url, results=results)
    try:
        if check(d.address is not None, "PostgreSQL daemon started: %r" % d.first):
            st, _, _ = d.request("POST", "/v1/models", MODEL)
            st, _, b = d.request("POST", "/v1/models/replay-api/checks", REQ)
            if check(st == 201, "PostgreSQL check: %d" % st):
                st, _, r = replay(d, b["id"])
                check(st == 201 and r["reproduced"] is True,
                      "PostgreSQL: replay reproduces: %d" % st)
                if st == 201:
                    col = psql("SELECT replay_of FROM checks WHERE id = '%s'"
                               % r["replay"], db)
                    check(col == b["id"], "PostgreSQL row replay_of: %r" % col)
                    st, _, g = d.request("GET", "/v1/checks/%s" % r["replay"])
                    check(g.get("replay_of") == b["id"], "PostgreSQL GET replay_of")
    finally:
        check(d.stop() == 0, "PostgreSQL daemon: SIGTERM exit 0")
        psql("DROP DATABASE IF EXISTS %s" % db)


def main():
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    ids = {}
    with tempfile.TemporaryDirectory(prefix="feasgate-replay-") as tmp:
        store = os.path.join(tmp, "s.db")

        def first(d):
            st, _, _ = d.request("POST", "/v1/models", MODEL)
            check(st in (200, 201), "register: %d" % st)
            for name, req in (("mc", REQ),
                              ("anti", dict(REQ, sampling="antithetic")),
                              ("tamper", dict(REQ, seed=78))):
                st, _, b = d.request("POST", "/v1/models/replay-api/checks", req)
                check(st == 201, "check %s: 201, got %d" % (name, st))
                ids[name] = b
            for name in ("mc", "anti"):
                st, h, b = replay(d, ids[name]["id"])
                ok = st == 201 and b["reproduced"] is True and b["differences"] == []
                check(ok, "%s: replay on 1 worker reproduces: %d %r" %
                      (name, st, b if st != 201 else b["differences"]))
                if st == 201:
                    o, r = ids[name]["joint"], b["result"]["joint"]
                    check((o["samples"], o["satisfied"]) == (r["samples"], r["satisfied"]),
                          "%s: same joint counts %r %r" % (name, o, r))
                    check(b["result"].get("replay_of") == ids[name]["id"],
                          "%s: the replay's body names its original" % name)
                    check(h.get("location") == "/v1/checks/%s" % b["replay"],
                          "Location of the replay")
                    st2, _, g = d.request("GET", "/v1/checks/%s" % b["replay"])
                    check(st2 == 200 and g.get("replay_of") == ids[name]["id"],
                          "%s: GET of the replay has replay_of" % name)
                    ids[name + "_replay"] = b["replay"]
            st, _, b = replay(d, "chk_00000000000000000000000000")
            check(st == 404, "unknown check: 404, got %d" % st)

        run_daemon(store, 1, 256, first)
        if "mc_replay" in ids:
            rc, out, err = sqlite(store, "SELECT replay_of FROM checks WHERE id = '%s'"
                                  % ids["mc_replay"])
            check(rc == 0 and out == ids["mc"]["id"],
                  "store row replay_of names the original: %r %r" % (out, err))

        def second(d):
            for name in ("mc", "anti"):
                st, _, b = replay(d, ids[name]["id"])
                check(st == 201 and b["reproduced"] is True,
                      "%s: replay on 2 workers, chunk 512 reproduces: %d %r" %
                      (name, st, b.get("differences") if isinstance(b, dict) else b))

        run_daemon(store, 2, 512, second)

        # tamper with the stored request: another decision
        tid = ids["tamper"]["id"]
        rc, out, err = sqlite(store, "UPDATE checks SET request = json_set(request,"
                              " '$.decision.cap', 10.0) WHERE id = '%s'" % tid)
        check(rc == 0, "sqlite3 edits the stored request: %s" % err)
        out = subprocess.run([BIN, "replay", "--store", "sqlite:" + store, tid],
                             capture_output=True, text=True)
        check(out.returncode == 1, "offline replay of the tampered check: exit 1, "
              "got %d %s" % (out.returncode, out.stderr))
        if out.returncode in (0, 1):
            b = json.loads(out.stdout)
            check(b["reproduced"] is False and b["replay"] is None,
                  "offline: reproduced false")
        out = subprocess.run([BIN, "replay", "--store", "sqlite:" + store,
                              ids["mc"]["id"]], capture_output=True, text=True)
        check(out.returncode == 0, "offline replay of an untouched check: exit 0, "
              "got %d %s" % (out.returncode, out.stderr))

        def third(d):
            st, _, b = replay(d, tid)
            fields = [x["field"] for x in b.get("differences", [])] if st == 201 else []
            check(st == 201 and b["reproduced"] is False and
                  "/joint/satisfied" in fields,
                  "tampered request: reproduced false naming /joint/satisfied: %d %r" %
                  (st, fields))

        run_daemon(store, 2, 256, third)
    pg_part()
    return results.summary()


if __name__ == "__main__":
    sys.exit(main())
