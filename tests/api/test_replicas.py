#!/usr/bin/python3
"""tests/api/test_replicas.py -- two daemons sharing one PostgreSQL store.

Two `feasgate serve` processes on one PostgreSQL database, as two replicas
behind a load balancer would be: a model registered through one is listed,
read and checked through the other; a check run by one is read back by the
other and appears in its log; registering the same document through the
other is the same version (idempotent across replicas); the same request
gives the same counts on either. A key added to the shared store with
`feasgate keys add` is required by both within seconds. While one replica
runs a detached check, DELETE through the other cancels it (asked
through the store, picked up by the owner within a second), and
the other reports its progress (noted in the store every second). A
detached check left running when its replica is killed (SIGKILL) is
marked interrupted by the surviving replica's sweep within the stale window
plus a sweep period (store/replicas.c: 10 s + 5 s), and the survivor stays
ready throughout. When the database refuses the survivor, GET /v1/ready is
503 naming the store, and a check that ends meanwhile is answered from
memory; once the database accepts again the replica reconnects by itself,
is ready, and records that check (written again every second until the
store takes it). Every answer is checked against its schema.

Needs FG_TEST_PG_HOST, FG_TEST_PG_PORT, FG_TEST_PG_USER (tests/pg/cluster.sh;
deploy/test starts a server); without them it exits 77, which ctest reports
as skipped.

Prints "N passed, N failed" last; exits non-zero on any failure.
"""
import json
import os
import signal
import subprocess
import sys
import time

from apicommon import BIN, Daemon, Results, psql, wait_until

R = Results()

MODEL = {
    "format": 1, "name": "shared-line",
    "title": "Two replicas, one log (invented figures)",
    "decisions": [{"name": "cap"}],
    "uncertain": [{"name": "load", "size": 6,
                   "distribution": {"family": "gamma", "shape": 4, "scale": 2.5}}],
    "constraints": [{"name": "total", "require": "sum(load) <= cap"}],
}



def start_detached(d, samples, seed, headers):
    """A check answered at once (wait_s 0): (status, id)."""
    st, _, body = d.request("POST", "/v1/models/shared-line/checks",
                            {"decision": {"cap": 75}, "samples": samples,
                             "seed": seed, "wait_s": 0, "stop_early": False},
                            headers=headers)
    return st, body.get("id") if isinstance(body, dict) else None



def main():
    need = ("FG_TEST_PG_HOST", "FG_TEST_PG_PORT", "FG_TEST_PG_USER")
    if not all(os.environ.get(k) for k in need):
        print("not run: %s not set (tests/pg/cluster.sh)" % ", ".join(need))
        return 77
    if not os.path.exists(BIN):
        print("FEASGATE_BIN %s does not exist" % BIN)
        print("0 passed, 1 failed")
        return 1
    db = "fgapi_%d" % os.getpid()
    psql("DROP DATABASE IF EXISTS %s" % db)
    psql("CREATE DATABASE %s" % db)
    url = "postgresql:///%s?host=%s&port=%s&user=%s" % (
        db, os.environ["FG_TEST_PG_HOST"], os.environ["FG_TEST_PG_PORT"],
        os.environ["FG_TEST_PG_USER"])
    a = Daemon(url, results=R)
    b = Daemon(url, results=R)
    try:
        if not R.check(a.address and b.address, "both replicas started: %s / %s"
                       % (a.first, b.first)):
            return R.summary()
        R.check(json.loads(a.first).get("store", "").startswith("postgresql:"),
                "the start-up line names the store: %s" % a.first)

        st, _, reg = a.request("POST", "/v1/models", MODEL)
        R.check(st == 201 and reg.get("version") == 1, "registered on A: %s" % st)
        st, _, same = b.request("POST", "/v1/models", MODEL)
        R.check(st == 200 and same.get("version") == 1
                and same.get("digest") == reg.get("digest"),
                "the same document through B is the same version: %s %s"
                % (st, same.get("version")))
        st, _, lst = b.request("GET", "/v1/models")
        names = [m.get("name") for m in lst.get("models", [])] if st == 200 else []
        R.check("shared-line" in names, "B lists the model: %s" % names)

        req = {"decision": {"cap": 75}, "samples": 20000, "seed": 31}
        st, _, res = a.request("POST", "/v1/models/shared-line/checks", req)
        R.check(st == 201 and res.get("status") == "done",
                "check on A: %s %s" % (st, res.get("status")))
        cid = res.get("id")
        st, _, via_b = b.request("GET", "/v1/checks/%s" % cid)
        R.check(st == 200 and via_b.get("joint") == res.get("joint")
                and via_b.get("verdict") == res.get("verdict"),
                "B reads A's check: %s" % st)
        st, _, res_b = b.request("POST", "/v1/models/shared-line/checks", req)
        R.check(st == 201 and res_b.get("joint") == res.get("joint"),
                "the same request on B gives the same counts: %s / %s"
                % (res_b.get("joint"), res.get("joint")))
        st, _, log = a.request("GET", "/v1/checks?model=shared-line")
        ids = [c.get("id") for c in log.get("checks", [])] if st == 200 else []
        R.check(cid in ids and res_b.get("id") in ids,
                "A's log holds both replicas' checks: %s" % ids)

        # a key added to the shared store is required by both replicas
        kp = subprocess.run([BIN, "keys", "add", "gate", "--role", "checker",
                             "--store", url], capture_output=True, text=True,
                            timeout=60)
        R.check(kp.returncode == 0, "keys add on the shared store: %d %s"
                % (kp.returncode, kp.stderr.strip()))
        key = (kp.stdout.strip().splitlines() or [""])[-1]
        H = {"Authorization": "Bearer " + key}
        both = wait_until(lambda: all(
            d.request("GET", "/v1/models")[0] == 401 for d in (a, b)), 5)
        R.check(both, "both replicas require the new key")
        R.check(all(d.request("GET", "/v1/models", headers=H)[0] == 200
                    for d in (a, b)), "both replicas accept it")

        # a check running on A, cancelled through B
        st, cid1 = start_detached(a, 900000000, 6, H)
        R.check(st == 202, "another long check answered 202 on A: %s" % st)
        t1 = time.time()
        st, _, gone = b.request("DELETE", "/v1/checks/%s" % cid1, headers=H)
        R.check(st == 200 and isinstance(gone, dict)
                and gone.get("status") == "cancelled",
                "DELETE through B cancels A's check: %s %s after %.1f s"
                % (st, gone.get("status") if isinstance(gone, dict) else gone,
                   time.time() - t1))
        st, _, seen1 = a.request("GET", "/v1/checks/%s" % cid1, headers=H)
        R.check(st == 200 and seen1.get("status") == "cancelled"
                and 0 <= seen1.get("joint", {}).get("samples", -1) < 900000000,
                "A reports it cancelled with its partial counts: %s %s"
                % (st, seen1.get("status") if isinstance(seen1, dict) else seen1))
        st, _, again = b.request("DELETE", "/v1/checks/%s" % cid1, headers=H)
        R.check(st == 409, "a second DELETE: 409 (it ended): %s" % st)

        # a comparison run by A, read through B while it runs and after
        # its end, and cancelled through B (every candidate)
        pair = {"candidates": [{"label": "lo", "decision": {"cap": 70}},
                               {"label": "hi", "decision": {"cap": 80}}],
                "samples": 100000000, "seed": 12, "wait_s": 0}
        st, _, cmp_a = a.request("POST", "/v1/models/shared-line/comparisons",
                                 pair, headers=H)
        cmp_id = cmp_a.get("id", "") if isinstance(cmp_a, dict) else ""
        R.check(st == 202 and cmp_id.startswith("cmp_"),
                "a long comparison answered 202 on A: %s" % st)
        st, _, seen = b.request("GET", "/v1/comparisons/%s" % cmp_id,
                                headers=H)
        R.check(st == 200 and seen.get("status") == "running"
                and len(seen.get("candidates", [])) == 2,
                "B shows A's comparison running with both candidates: %s %r"
                % (st, seen.get("status") if isinstance(seen, dict) else seen))
        st, _, gone = b.request("DELETE", "/v1/comparisons/%s" % cmp_id,
                                headers=H)
        R.check(st == 200 and isinstance(gone, dict)
                and gone.get("status") == "cancelled",
                "DELETE through B cancels A's comparison: %s %r"
                % (st, gone.get("status") if isinstance(gone, dict) else gone))
        st, _, seen = b.request("GET", "/v1/comparisons/%s" % cmp_id,
                                headers=H)
        cands = seen.get("candidates", []) if isinstance(seen, dict) else []
        R.check(st == 200 and seen.get("status") == "cancelled"
                and len(cands) == 2
                and all(c.get("status") == "cancelled" for c in cands),
                "B reads the ended comparison from the store, every candidate "
                "cancelled: %s" % st)
        for c in cands:
            st, _, ch = b.request("GET", "/v1/checks/%s" % c.get("id"),
                                  headers=H)
            R.check(st == 200 and ch.get("status") == "cancelled",
                    "candidate %s is in the check log: %s"
                    % (c.get("label"), st))
        st, _, small = a.request("POST", "/v1/models/shared-line/comparisons",
                                 dict(pair, samples=20000, wait_s=30),
                                 headers=H)
        sid = small.get("id", "") if isinstance(small, dict) else ""
        st, _, via_b = b.request("GET", "/v1/comparisons/%s" % sid, headers=H)
        R.check(st == 200 and isinstance(via_b, dict)
                and via_b.get("status") == "done"
                and via_b.get("pairs") == small.get("pairs"),
                "a finished comparison reads the same through B: %s" % st)

        # a long detached check on A; A dies; B marks it interrupted
        st, rid = start_detached(a, 900000000, 5, H)
        R.check(st == 202, "a long check answered 202 on A: %s" % st)
        st, _, seen = b.request("GET", "/v1/checks/%s" % rid, headers=H)
        R.check(st == 200 and seen.get("status") == "running",
                "B sees it running: %s %s" % (st, seen.get("status")
                                              if isinstance(seen, dict) else seen))
        # A notes its running checks' progress in the store every second
        # (http/registry.c), so B reports how far A has come
        def progressed():
            s2, _, c2 = b.request("GET", "/v1/checks/%s" % rid, headers=H)
            pr = c2.get("progress") if s2 == 200 and isinstance(c2, dict) else None
            return bool(pr) and pr.get("samples_done", 0) > 0
        R.check(wait_until(progressed, 10),
                "B reports A's progress (samples_done > 0)")
        a.proc.send_signal(signal.SIGKILL)
        a.proc.wait()
        t0 = time.time()

        def interrupted():
            s2, _, c2 = b.request("GET", "/v1/checks/%s" % rid, headers=H)
            return (s2 == 200 and c2.get("status") == "interrupted"
                    and c2.get("key") == "gate")
        ok = wait_until(interrupted, 40)
        R.check(ok, "B marked the dead replica's check interrupted after %.1f s"
                % (time.time() - t0))
        st, _, rd = b.request("GET", "/v1/ready")
        R.check(st == 200, "B stays ready: %s" % st)

        # the database refuses B: /v1/ready says so (503); a check that
        # ends meanwhile is answered from memory and recorded once the
        # database is back (http/registry.c writes it again every second).
        # 40M samples take seconds in Release and up to minutes under the
        # sanitizers on a busy machine, hence the generous wait.
        st, cid2 = start_detached(b, 40000000, 8, H)
        R.check(st == 202, "a check of a few seconds on B: %s" % st)
        psql("ALTER DATABASE %s ALLOW_CONNECTIONS false" % db)
        psql("SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE "
             "datname = '%s'" % db)

        def ended_in_memory():
            s2, _, c2 = b.request("GET", "/v1/checks/%s" % cid2, headers=H)
            return s2 == 200 and c2.get("status") == "done"
        R.check(wait_until(ended_in_memory, 240),
                "B answers the check done while the database is away")

        def unrecorded():
            s2, _, raw = b.raw("GET", "/metrics")
            for line in raw.decode().splitlines():
                if line.startswith("feasgate_checks_unrecorded "):
                    return int(line.split()[1])
            return -1
        R.check(wait_until(lambda: unrecorded() == 1, 10),
                "B's /metrics counts it unrecorded: %d" % unrecorded())
        st, hd, rd = b.request("GET", "/v1/ready")
        R.check(st == 503 and isinstance(rd, dict)
                and "store" in rd.get("detail", ""),
                "B not ready while the database refuses it: %s %s"
                % (st, rd.get("detail") if isinstance(rd, dict) else rd))
        st, _, _ = b.request("GET", "/v1/models", headers=H)
        R.check(st in (500, 503), "a request needing the store fails: %s" % st)
        psql("ALTER DATABASE %s ALLOW_CONNECTIONS true" % db)
        R.check(wait_until(lambda: b.request("GET", "/v1/ready")[0] == 200, 10),
                "B ready again once the database accepts it")
        st, _, _ = b.request("GET", "/v1/checks/%s" % cid, headers=H)
        R.check(st == 200, "and serves the log again: %s" % st)

        def recorded():
            return psql("SELECT status FROM checks WHERE id = '%s'" % cid2,
                        db) == "done"
        R.check(wait_until(recorded, 20),
                "the check that ended during the outage is recorded done")
        st, _, c2 = b.request("GET", "/v1/checks/%s" % cid2, headers=H)
        R.check(st == 200 and c2.get("status") == "done"
                and c2.get("joint", {}).get("samples") == 40000000,
                "and read back from the store with all its samples: %s" % st)
        R.check(any('"event":"recorded_late"' in l for l in b.lines),
                "B's log says it was recorded late")
        R.check(unrecorded() == 0, "and /metrics counts nothing unrecorded")
        s2, _, raw = b.raw("GET", "/metrics")
        R.check('feasgate_store_info{backend="postgresql"} 1' in raw.decode(),
                "B's /metrics names its store backend")
        code = b.stop()
        R.check(code == 0, "B stops cleanly: %s" % code)
    finally:
        for d in (a, b):
            if d.proc.poll() is None:
                d.proc.kill()
                d.proc.wait()
        psql("DROP DATABASE IF EXISTS %s WITH (FORCE)" % db)
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
