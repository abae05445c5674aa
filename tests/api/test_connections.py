#!/usr/bin/python3
"""tests/api/test_connections.py -- many connections, few threads.

Daemon A (--max-connections 1500, --max-connections-per-client 1200):
- 1,000 TCP connections from 127.0.0.1 that send nothing do not stop
  GET /v1/health answering another client (127.0.0.2) within 100 ms;
- the daemon's threads (/proc/PID/task) stay far fewer than the
  connections (event loops, not a thread per connection);
- a check with wait_s still answers 201 meanwhile, and while a long
  check's request waits (suspended) /v1/health still answers in 100 ms;
- GET /v1/limits reports max_connections and max_connections_per_client
  as set;
- the idle connections are closed by the header timeout (10 s) and the
  open count falls back.

Daemon B (--max-connections 100, --max-connections-per-client 4):
- with 4 idle connections open from 127.0.0.1, a 5th from there that
  sends a request gets a 503 problem naming max_connections_per_client,
  with Retry-After and "Connection: close", within 1 s, and the
  connection is then closed; 127.0.0.2 is still served;
- past the room kept for those answers (FG_HTTP_CONNECTIONS_OVERFLOW =
  64 more connections of a client) libmicrohttpd closes new connections
  of that client at once, without an answer;
- with 100 connections open in all, a request from 127.0.0.3 gets a 503
  naming max_connections.

Raises RLIMIT_NOFILE (soft, up to the hard limit) for itself and the
daemons. Standard library (plus apicommon's schema checks); run with
/usr/bin/python3. The last line is "N passed, N failed".
"""
import json
import os
import re
import resource
import socket
import sys
import tempfile
import threading
import time

import apicommon
from apicommon import Daemon, Results

IDLE = 1000
FAST_S = 0.100
HEADER_TIMEOUT_S = 10  # FG_HTTP_HEADER_TIMEOUT_S

MODEL = {
    "format": 1,
    "name": "conn-model",
    "title": "a ferry's load against its limit",
    "decisions": [{"name": "cars", "lower": 0, "upper": 100}],
    "uncertain": [{"name": "weight", "distribution":
                   {"family": "normal", "mean": 1.5, "sd": 0.2}}],
    "constraints": [{"name": "deck", "require": "cars * weight <= 90"}],
}


def raise_fd_limit(want):
    soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
    new = want if hard == resource.RLIM_INFINITY else min(want, hard)
    if new > soft:
        resource.setrlimit(resource.RLIMIT_NOFILE, (new, hard))
    return resource.getrlimit(resource.RLIMIT_NOFILE)[0]


def connect_from(d, source, timeout=5):
    s = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    s.settimeout(timeout)
    s.bind((source, 0))
    s.connect((d.host, d.port))
    return s


def get_from(d, source, path="/v1/health", timeout=5):
    """(seconds, status, headers, body, closed_after) of one GET sent from
    `source` on a new connection."""
    t0 = time.monotonic()
    s = connect_from(d, source, timeout)
    try:
        s.sendall(b"GET %s HTTP/1.1\r\nHost: x\r\n\r\n" % path.encode())
        buf = b""
        status, hdrs, body = None, {}, b""
        while True:
            more = s.recv(65536)
            if not more:
                break
            buf += more
            head, sep, rest = buf.partition(b"\r\n\r\n")
            if sep:
                for line in head.split(b"\r\n")[1:]:
                    k, _, v = line.partition(b":")
                    hdrs[k.strip().lower().decode()] = v.strip().decode()
                n = int(hdrs.get("content-length", "-1"))
                if 0 <= n <= len(rest):
                    status = int(head.split(b" ")[1])
                    body = rest[:n]
                    break
        took = time.monotonic() - t0
        closed = False
        if status is not None and hdrs.get("connection") == "close":
            s.settimeout(2)
            try:
                closed = s.recv(1) == b""
            except OSError:
                closed = True
        return took, status, hdrs, body, closed
    finally:
        s.close()


def closed_by_peer(s):
    s.setblocking(False)
    try:
        return s.recv(1) == b""
    except BlockingIOError:
        return False
    except OSError:
        return True


def threads_of(pid):
    return len(os.listdir("/proc/%d/task" % pid))


def part_a(res, tmp):
    d = Daemon("sqlite:%s/a.db" % tmp, "--max-connections", "1500",
               "--max-connections-per-client", "1200", results=res)
    if not res.check(d.address is not None, "daemon A started: %r" % d.first):
        d.stop()
        return
    idle = []
    try:
        pid = json.loads(d.first)["pid"]
        st, _, _ = d.request("POST", "/v1/models", MODEL)
        res.check(st == 201, "model registered: %s" % st)
        st, _, b = d.request("GET", "/v1/limits")
        lim = {e["name"]: e["value"] for e in b["limits"]}
        res.check(lim.get("max_connections") == 1500
                  and lim.get("max_connections_per_client") == 1200,
                  "limits report the connection limits: %r"
                  % {k: lim.get(k) for k in ("max_connections",
                                              "max_connections_per_client")})
        t_open = time.monotonic()
        for _ in range(IDLE):
            idle.append(connect_from(d, "127.0.0.1"))
        time.sleep(0.5)  # let the daemon accept them all
        res.check(not any(closed_by_peer(s) for s in idle[:50]),
                  "idle connections are held open, not dropped")
        times = []
        for _ in range(20):
            took, st, _, _, _ = get_from(d, "127.0.0.2")
            res.check(st == 200, "health from 127.0.0.2 with %d idle "
                      "sockets: %s" % (IDLE, st))
            times.append(took)
        times.sort()
        print("health with %d idle sockets: median %.1f ms, max %.1f ms"
              % (IDLE, 1000 * times[len(times) // 2], 1000 * times[-1]))
        res.check(times[-1] < FAST_S, "every health answer within 100 ms, "
                  "slowest %.1f ms" % (1000 * times[-1]))
        nthreads = threads_of(pid)
        print("daemon threads with %d connections open: %d" % (IDLE, nthreads))
        res.check(nthreads < 50, "threads stay few: %d" % nthreads)

        # a check with wait_s answers while the sockets stay open
        st, _, b = d.request("POST", "/v1/models/conn-model/checks",
                             {"decision": {"cars": 50}, "samples": 20000,
                              "seed": 4, "wait_s": 30})
        res.check(st == 201 and b.get("status") == "done",
                  "check with wait_s answered 201 done: %s %r"
                  % (st, b.get("status") if isinstance(b, dict) else b))
        # a long check's request waits 2 s suspended; health stays fast
        out = {}

        def long_check():
            out["r"] = d.request("POST", "/v1/models/conn-model/checks",
                                 {"decision": {"cars": 50},
                                  "samples": 900000000, "seed": 5,
                                  "wait_s": 2})
        t = threading.Thread(target=long_check)
        t.start()
        time.sleep(0.3)
        _, st, _, body, _ = get_from(d, "127.0.0.2", "/metrics")
        res.check("feasgate_http_requests_waiting 1\n" in body.decode(),
                  "/metrics shows the one suspended request")
        slow = max(get_from(d, "127.0.0.2")[0] for _ in range(10))
        res.check(slow < FAST_S, "health within 100 ms while a request "
                  "waits for its check: %.1f ms" % (1000 * slow))
        t.join(60)
        st, _, b = out.get("r", (None, None, None))
        res.check(st == 202 and isinstance(b, dict)
                  and b.get("status") == "running",
                  "the long check answered 202 after its wait_s: %s" % st)
        if isinstance(b, dict) and b.get("id"):
            st, _, _ = d.request("DELETE", "/v1/checks/" + b["id"])
            res.check(st == 200, "long check cancelled: %s" % st)

        # the header timeout closes the idle sockets
        left = HEADER_TIMEOUT_S + 3 - (time.monotonic() - t_open)
        if left > 0:
            time.sleep(left)
        closed = sum(1 for s in idle if closed_by_peer(s))
        res.check(closed == IDLE, "header timeout closed %d of %d idle "
                  "connections within %d s" % (closed, IDLE,
                                               HEADER_TIMEOUT_S + 3))
        res.check(d.alive(), "daemon A still answers")
    except Exception as e:  # a crash of the test is a failure
        res.check(False, "part A exception %r" % e)
    finally:
        for s in idle:
            s.close()
    res.check(d.stop() == 0, "daemon A: SIGTERM exit 0")


def part_b(res, tmp):
    d = Daemon("sqlite:%s/b.db" % tmp, "--max-connections", "100",
               "--max-connections-per-client", "4", results=res)
    if not res.check(d.address is not None, "daemon B started: %r" % d.first):
        d.stop()
        return
    held = []
    try:
        for _ in range(4):
            held.append(connect_from(d, "127.0.0.1"))
        time.sleep(0.2)
        took, st, h, body, closed = get_from(d, "127.0.0.1")
        doc = json.loads(body) if body else {}
        res.check(st == 503 and "max_connections_per_client"
                  in doc.get("detail", ""),
                  "5th connection of a client: 503 naming the limit, got "
                  "%s %r" % (st, body[:200]))
        res.check(h.get("retry-after") == "2" and
                  h.get("connection") == "close" and closed,
                  "503 has Retry-After and Connection: close, then the "
                  "connection closes: %r closed=%s" % (h, closed))
        res.check(took < 1.0, "the 503 comes fast: %.3f s" % took)
        res.check(apicommon.is_problem(st, h, doc, 503), "503 is a problem doc")
        _, st, _, _, _ = get_from(d, "127.0.0.2")
        res.check(st == 200, "another client is served: %s" % st)
        # past the overflow room of one client (4 + 64) libmicrohttpd
        # closes new connections from it at once, without an answer
        extra = []
        for _ in range(80):
            try:
                extra.append(connect_from(d, "127.0.0.1"))
            except OSError:
                pass
        time.sleep(0.5)
        dropped = [s for s in extra if closed_by_peer(s)]
        res.check(len(dropped) == 80 - 64, "connections of a client past "
                  "its overflow room are closed at once: %d of %d"
                  % (len(dropped), len(extra)))
        # 68 open now; 32 more from another client fill max_connections
        for _ in range(32):
            held.append(connect_from(d, "127.0.0.2"))
        time.sleep(0.3)
        _, st, _, body, _ = get_from(d, "127.0.0.3")
        doc = json.loads(body) if body else {}
        res.check(st == 503 and "max_connections =" in doc.get("detail", ""),
                  "beyond max_connections: 503 naming it, got %s %r"
                  % (st, body[:200]))
        # 4 + 64 from 127.0.0.1, 31 from 127.0.0.2, and this scrape
        held.pop().close()
        time.sleep(0.3)
        _, st, _, body, _ = get_from(d, "127.0.0.4", "/metrics")
        text = body.decode()
        res.check("feasgate_http_connections_refused_total 2\n" in text,
                  "/metrics counts the two 503s: %r"
                  % [x for x in text.splitlines() if "refused" in x])
        m = re.search(r"^feasgate_http_connections (\d+)$", text, re.M)
        res.check(m is not None and int(m.group(1)) == 100,
                  "/metrics counts 100 open connections: %r"
                  % (m.group(1) if m else None))
        for s in extra:
            s.close()
    except Exception as e:  # a crash of the test is a failure
        res.check(False, "part B exception %r" % e)
    finally:
        for s in held:
            s.close()
    time.sleep(0.3)
    res.check(d.alive(), "daemon B still answers once they are gone")
    res.check(d.stop() == 0, "daemon B: SIGTERM exit 0")


def main():
    res = Results()
    if not os.path.exists(apicommon.BIN):
        print("FEASGATE_BIN %s does not exist" % apicommon.BIN)
        print("0 passed, 1 failed")
        return 1
    limit = raise_fd_limit(4096)
    if not res.check(limit >= IDLE + 200, "descriptor limit %d" % limit):
        return res.summary()
    with tempfile.TemporaryDirectory(prefix="feasgate-conn-") as tmp:
        part_b(res, tmp)
        part_a(res, tmp)
    return res.summary()


if __name__ == "__main__":
    sys.exit(main())
