#!/usr/bin/python3
"""tests/api/test_balancer.py -- three replicas behind a real nginx.

Three `feasgate serve` processes share one PostgreSQL database and sit
behind Debian's nginx, configured by deploy/nginx-replicas.conf itself
(only its upstream addresses and listen port are replaced by this test's
loopback ones). Every request below goes through the balancer, which
spreads them round robin, so reading, polling and cancelling a check
generally reach a replica other than the one running it:

- a model registered through the balancer is checked through it, and the
  same request gives the same counts whichever replica answers;
- a detached check (wait_s 0) is polled through the balancer: every poll
  answers 200, progress grows, and DELETE through the balancer cancels it;
- a detached comparison likewise: polled at /v1/comparisons/{id}, then
  cancelled, each candidate ending cancelled in the log;
- the replica running a long check is killed (SIGKILL): through the
  balancer every request keeps answering (nginx passes idempotent
  requests on to a live replica), and the check is marked interrupted by
  the survivors' sweep.

Needs FG_TEST_PG_HOST, FG_TEST_PG_PORT, FG_TEST_PG_USER (tests/pg/cluster.sh;
deploy/test starts a server) and nginx (deploy/lib/setup.sh installs it);
without them it exits 77, which ctest reports as skipped.

Prints "N passed, N failed" last; exits non-zero on any failure.
"""
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from apicommon import ROOT, Daemon, Endpoint, Results, psql, wait_until

R = Results()
NGINX = shutil.which("nginx") or "/usr/sbin/nginx"
EXAMPLE = ROOT / "deploy" / "nginx-replicas.conf"

MODEL = {
    "format": 1, "name": "depot-fuel",
    "title": "Fuel at three depots behind one balancer (invented figures)",
    "decisions": [{"name": "stock", "size": 3}],
    "uncertain": [{"name": "draw", "size": 3,
                   "distribution": {"family": "gamma", "shape": 6,
                                    "scale": 4}}],
    "constraints": [{"name": "cover", "require": "draw <= stock"}],
}



def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def nginx_config(workdir, port, replicas):
    """The example file with this test's addresses, inside a minimal main
    configuration that keeps every path in workdir."""
    text = EXAMPLE.read_text()
    servers = re.findall(r"^\s*server 127\.0\.0\.1:\d+[^;]*;$", text, re.M)
    if len(servers) != len(replicas):
        raise RuntimeError("%s lists %d upstream servers, the test runs %d"
                           % (EXAMPLE, len(servers), len(replicas)))
    for line, d in zip(servers, replicas):
        text = text.replace(line, re.sub(r"127\.0\.0\.1:\d+", d.address, line),
                            1)
    text, n = re.subn(r"listen 127\.0\.0\.1:\d+;", "listen 127.0.0.1:%d;" % port,
                      text)
    if n != 1:
        raise RuntimeError("%s has no single loopback listen line" % EXAMPLE)
    (workdir / "replicas.conf").write_text(text)
    main = """daemon off;
master_process off;
pid {d}/nginx.pid;
error_log {d}/error.log warn;
events {{ worker_connections 512; }}
http {{
    access_log {d}/access.log;
    client_body_temp_path {d}/body;
    proxy_temp_path {d}/proxy;
    fastcgi_temp_path {d}/fastcgi;
    uwsgi_temp_path {d}/uwsgi;
    scgi_temp_path {d}/scgi;
    include {d}/replicas.conf;
}}
""".format(d=workdir)
    (workdir / "nginx.conf").write_text(main)
    return workdir / "nginx.conf"



def owner_pid(db, check_id):
    out = psql("SELECT i.pid FROM checks c JOIN instances i ON i.id = c.owner"
               " WHERE c.id = '%s'" % check_id, db)
    return int(out) if out else None


def main():
    need = ("FG_TEST_PG_HOST", "FG_TEST_PG_PORT", "FG_TEST_PG_USER")
    if not all(os.environ.get(k) for k in need):
        print("not run: %s not set (tests/pg/cluster.sh)" % ", ".join(need))
        return 77
    if not os.path.exists(NGINX):
        print("not run: nginx is not installed (deploy/lib/setup.sh)")
        return 77
    db = "fglb_%d" % os.getpid()
    psql("DROP DATABASE IF EXISTS %s" % db)
    psql("CREATE DATABASE %s" % db)
    url = "postgresql:///%s?host=%s&port=%s&user=%s" % (
        db, os.environ["FG_TEST_PG_HOST"], os.environ["FG_TEST_PG_PORT"],
        os.environ["FG_TEST_PG_USER"])
    work = Path(tempfile.mkdtemp(prefix="fglb."))
    replicas = [Daemon(url, results=R) for _ in range(3)]
    ngx = None
    try:
        if not R.check(all(d.address for d in replicas),
                       "three replicas started: %s"
                       % [d.first for d in replicas]):
            return R.summary()
        port = free_port()
        conf = nginx_config(work, port, replicas)
        ngx = subprocess.Popen([NGINX, "-p", str(work), "-c", str(conf),
                                "-e", str(work / "error.log")],
                               stdin=subprocess.DEVNULL,
                               stdout=subprocess.DEVNULL,
                               stderr=subprocess.PIPE)
        lb = Endpoint("127.0.0.1", port, results=R)

        def lb_up():
            try:
                return lb.raw("GET", "/v1/health", timeout=2)[0] == 200
            except OSError:
                return False
        if not R.check(wait_until(lb_up, 10), "nginx answers on :%d" % port):
            return R.summary()

        st, _, reg = lb.request("POST", "/v1/models", MODEL)
        R.check(st == 201, "registered through the balancer: %s" % st)
        req = {"decision": {"stock": [40, 40, 40]}, "samples": 20000,
               "seed": 5}
        firsts = []
        for _ in range(3):
            st, _, res = lb.request("POST", "/v1/models/depot-fuel/checks", req)
            firsts.append((st, res.get("joint", {}).get("satisfied")
                           if isinstance(res, dict) else None))
        R.check(all(s == 201 for s, _ in firsts)
                and len({k for _, k in firsts}) == 1,
                "the same request three times through the balancer, the same "
                "counts: %s" % firsts)

        # a detached check, polled and cancelled through the balancer
        st, _, run = lb.request("POST", "/v1/models/depot-fuel/checks",
                                dict(req, samples=900000000, seed=6, wait_s=0,
                                     stop_early=False))
        R.check(st == 202, "a long check answered 202: %s" % st)
        cid = run.get("id") if isinstance(run, dict) else None
        polls = []

        def progressed():
            s2, _, c2 = lb.request("GET", "/v1/checks/%s" % cid)
            polls.append(s2)
            pr = c2.get("progress") if s2 == 200 and isinstance(c2, dict) \
                else None
            return bool(pr) and pr.get("samples_done", 0) > 0
        R.check(wait_until(progressed, 15), "its progress grows, seen "
                "through the balancer")
        R.check(all(s == 200 for s in polls), "every poll answered 200: %s"
                % sorted(set(polls)))
        t0 = time.time()
        st, _, gone = lb.request("DELETE", "/v1/checks/%s" % cid)
        R.check(st == 200 and isinstance(gone, dict)
                and gone.get("status") == "cancelled",
                "DELETE through the balancer cancels it: %s in %.1f s"
                % (st, time.time() - t0))
        st, _, seen = lb.request("GET", "/v1/checks/%s" % cid)
        R.check(st == 200 and seen.get("status") == "cancelled",
                "and any replica reads it cancelled: %s" % st)

        # a detached comparison, polled and cancelled through the balancer
        cmp_req = {"candidates": [
            {"label": "lean", "decision": {"stock": [30, 30, 30]}},
            {"label": "ample", "decision": {"stock": [45, 45, 45]}}],
            "samples": 200000000, "seed": 9, "wait_s": 0}
        st, _, cmp = lb.request("POST", "/v1/models/depot-fuel/comparisons",
                                cmp_req)
        R.check(st == 202 and isinstance(cmp, dict) and cmp.get("id"),
                "a long comparison answered 202 with an id: %s" % st)
        mid = cmp.get("id") if isinstance(cmp, dict) else None
        cstat = [lb.request("GET", "/v1/comparisons/%s" % mid)[0]
                 for _ in range(6)]
        R.check(all(s == 200 for s in cstat),
                "the comparison polled through the balancer: %s" % cstat)
        st, _, cgone = lb.request("DELETE", "/v1/comparisons/%s" % mid)
        R.check(st == 200, "DELETE of the comparison through the balancer: %s"
                % st)

        def candidates_cancelled():
            s2, _, c2 = lb.request("GET", "/v1/comparisons/%s" % mid)
            if s2 != 200 or not isinstance(c2, dict):
                return False
            cands = c2.get("candidates") or []
            return len(cands) == 2 and all(
                c.get("status") == "cancelled" for c in cands)
        R.check(wait_until(candidates_cancelled, 10),
                "both candidates end cancelled")

        # the replica running a long check dies; the others keep answering
        st, _, run = lb.request("POST", "/v1/models/depot-fuel/checks",
                                dict(req, samples=900000000, seed=7, wait_s=0,
                                     stop_early=False))
        rid = run.get("id") if isinstance(run, dict) else None
        R.check(st == 202 and rid, "another long check: %s" % st)
        pid = owner_pid(db, rid)
        victim = [d for d in replicas if d.proc.pid == pid]
        if not R.check(len(victim) == 1, "its owner is one of the replicas "
                       "(pid %s)" % pid):
            return R.summary()
        victim[0].proc.send_signal(signal.SIGKILL)
        victim[0].proc.wait()
        t0 = time.time()
        answers = []

        def interrupted():
            s1 = lb.request("GET", "/v1/models")[0]
            s2, _, c2 = lb.request("GET", "/v1/checks/%s" % rid)
            answers.extend((s1, s2))
            return s2 == 200 and c2.get("status") == "interrupted"
        R.check(wait_until(interrupted, 40, step=0.5),
                "the survivors mark the dead replica's check interrupted "
                "after %.1f s" % (time.time() - t0))
        R.check(answers and all(s == 200 for s in answers),
                "every request through the balancer answered 200 meanwhile "
                "(%d requests): %s" % (len(answers), sorted(set(answers))))
        st, _, res = lb.request("POST", "/v1/models/depot-fuel/checks", req)
        R.check(st == 201 and res.get("joint", {}).get("satisfied")
                == firsts[0][1], "a new check through the balancer still "
                "gives the same counts: %s" % st)
    finally:
        if ngx is not None:
            ngx.terminate()
            try:
                ngx.wait(10)
            except subprocess.TimeoutExpired:
                ngx.kill()
                ngx.wait()
        for d in replicas:
            if d.proc.poll() is None:
                d.stop()
        psql("DROP DATABASE IF EXISTS %s WITH (FORCE)" % db)
        shutil.rmtree(work, ignore_errors=True)
    return R.summary()


if __name__ == "__main__":
    sys.exit(main())
