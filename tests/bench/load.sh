#!/usr/bin/env bash
# tests/bench/load.sh -- load benchmark of the daemon with wrk.
#
# Starts `feasgate serve` on 127.0.0.1 (an ephemeral port, a temporary
# SQLite store), registers a small model, then runs wrk for LOAD_SECONDS
# (30) with LOAD_CONNECTIONS (32) connections, each POSTing a small check
# (LOAD_SAMPLES = 2000 samples, fixed seed) that the daemon simulates,
# records in the store twice (accepted, ended) and answers 201. Prints
# requests per second, latency percentiles, the error count (socket errors
# and non-2xx answers) and the daemon's resident memory (VmRSS from
# /proc/PID/status) before and after, plus the check counters from
# /metrics.
#
# Then the same run again with LOAD_IDLE (1000) more connections held
# open that send nothing -- from 127.0.1.x source addresses, 50 to an
# address (within the per-client limit), reopened as soon as the
# daemon's header timeout closes them -- to show that idle sockets do
# not slow the clients that talk. LOAD_IDLE=0 skips it.
#
# A benchmark, not a test: it never fails on speed and ctest does not run
# it. Traffic goes to 127.0.0.1 only; wrk runs for a fixed time and is
# itself bounded by `timeout`. Needs Debian's wrk and curl.
#
#   tests/bench/load.sh [path/to/feasgate]     (default: build/feasgate)
#   LOAD_SECONDS=10 LOAD_CONNECTIONS=8 tests/bench/load.sh
#   LOAD_STORE='postgresql:///db?host=/tmp/pg' tests/bench/load.sh
set -euo pipefail

ROOT="$(cd "$(dirname "$0")/../.." && pwd)"
BIN="${1:-${FEASGATE_BIN:-$ROOT/build/feasgate}}"
SECONDS_RUN="${LOAD_SECONDS:-30}"
CONNECTIONS="${LOAD_CONNECTIONS:-32}"
THREADS="${LOAD_THREADS:-2}"
SAMPLES="${LOAD_SAMPLES:-2000}"
WORKERS="${LOAD_WORKERS:-$(nproc)}"
IDLE="${LOAD_IDLE:-1000}"
# wrk's own time plus start-up and the final report.
WRK_BOUND_S=$((SECONDS_RUN + 30))

for tool in wrk curl; do
  if ! command -v "$tool" >/dev/null; then
    echo "load.sh: '$tool' is missing (Debian package $tool)" >&2
    exit 1
  fi
done
[ -x "$BIN" ] || { echo "load.sh: no daemon at $BIN (build first)" >&2; exit 1; }

tmp="$(mktemp -d /tmp/feasgate-load.XXXXXX)"
pid=""
cleanup() {
  if [ -n "$pid" ] && kill -0 "$pid" 2>/dev/null; then
    kill -TERM "$pid"
    wait "$pid" 2>/dev/null || true
  fi
  rm -rf "$tmp"
}
trap cleanup EXIT

# LOAD_STORE: another store URL (e.g. a PostgreSQL database); the default
# is a fresh SQLite file.
STORE="${LOAD_STORE:-sqlite:$tmp/load.db}"
# room for the idle sockets: descriptors and --max-connections
hard="$(ulimit -Hn)"
[ "$hard" = unlimited ] && hard=$((IDLE + 512))
ulimit -n "$(( hard < IDLE + 512 ? hard : IDLE + 512 ))" 2>/dev/null || true
"$BIN" serve --listen 127.0.0.1:0 --store "$STORE" \
  --workers "$WORKERS" --log-level warn \
  --max-connections "$((IDLE + CONNECTIONS + 64))" 2>"$tmp/daemon.log" &
pid=$!
addr=""
for _ in $(seq 1 100); do # up to 10 s for the "listening" line
  addr="$(head -n 1 "$tmp/daemon.log" 2>/dev/null |
    sed -n 's/.*"address":"\([^"]*\)".*/\1/p')"
  [ -n "$addr" ] && break
  sleep 0.1
done
[ -n "$addr" ] || { echo "load.sh: daemon did not start" >&2; cat "$tmp/daemon.log" >&2; exit 1; }
case "$addr" in
127.0.0.1:*) ;;
*) echo "load.sh: refusing to load a non-loopback address $addr" >&2; exit 1 ;;
esac
url="http://$addr"

cat >"$tmp/model.json" <<'EOF'
{"format": 1, "name": "load-small", "title": "load benchmark model",
 "decisions": [{"name": "x", "lower": 0, "upper": 10},
               {"name": "y", "size": 3, "lower": 0, "upper": 10}],
 "uncertain": [{"name": "u", "distribution": {"family": "normal", "mean": 0, "sd": 1}},
               {"name": "d", "size": 3, "distribution": {"family": "gamma", "shape": 4, "scale": 0.5}}],
 "constraints": [{"name": "cap", "require": "u + x <= 3"},
                 {"name": "rows", "require": "d - y <= 2"}]}
EOF
code="$(curl -s -o /dev/null -w '%{http_code}' -X POST "$url/v1/models" \
  -H 'Content-Type: application/json' --data @"$tmp/model.json")"
[ "$code" = 201 ] || { echo "load.sh: registering the model gave $code" >&2; exit 1; }

body="{\"decision\": {\"x\": 1, \"y\": [1, 1, 1]}, \"samples\": $SAMPLES, \"seed\": 7, \"label\": \"load\"}"
cat >"$tmp/check.lua" <<EOF
-- POST one small check per request; report percentiles and errors.
wrk.method = "POST"
wrk.path = "/v1/models/load-small/checks"
wrk.body = '$body'
wrk.headers["Content-Type"] = "application/json"

done = function(summary, latency, requests)
  local e = summary.errors
  io.write(string.format("requests        %d in %.1f s\n",
    summary.requests, summary.duration / 1e6))
  io.write(string.format("requests/s      %.1f\n",
    summary.requests / (summary.duration / 1e6)))
  for _, p in ipairs({50, 90, 99, 99.9}) do
    io.write(string.format("latency p%-5s  %.2f ms\n", tostring(p),
      latency:percentile(p) / 1000))
  end
  io.write(string.format("latency max     %.2f ms\n", latency.max / 1000))
  io.write(string.format("errors          %d (connect %d, read %d, write %d, non-2xx %d, timeout %d)\n",
    e.connect + e.read + e.write + e.status + e.timeout,
    e.connect, e.read, e.write, e.status, e.timeout))
end
EOF

rss() { sed -n 's/^VmRSS:[[:space:]]*//p' "/proc/$pid/status"; }
run_wrk() {
  timeout "$WRK_BOUND_S" wrk -t "$THREADS" -c "$CONNECTIONS" -d "${SECONDS_RUN}s" \
    --timeout 30s -s "$tmp/check.lua" "$url" | sed -n '/^requests  /,$p'
}
echo "feasgate load benchmark: $CONNECTIONS connections, $THREADS wrk threads, ${SECONDS_RUN} s, $SAMPLES samples per check, $WORKERS workers"
echo "daemon          $BIN ($url)"
echo "VmRSS before    $(rss)"
run_wrk
echo "VmRSS after     $(rss)"
curl -s "$url/metrics" | grep -E '^feasgate_(checks_total\{status="done"\}|samples_simulated_total|http_requests_total\{method="POST",route="/v1/models/\{name\}/checks")' || true

[ "$IDLE" -gt 0 ] || exit 0
# IDLE sockets held open for the whole second run (reopened when the
# header timeout closes them); prints how many were open at the end.
cat >"$tmp/idle.py" <<'EOF'
import select, socket, sys, time
host, port, n, seconds = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), float(sys.argv[4])
def one(i):
    s = socket.socket()
    s.bind(("127.0.1.%d" % (1 + i // 50), 0))
    s.connect((host, port))
    return s
socks = [one(i) for i in range(n)]
reopened = 0
end = time.monotonic() + seconds
while time.monotonic() < end:
    p = select.poll()
    for s in socks:
        p.register(s, select.POLLIN)
    ready = {fd for fd, _ in p.poll(500)}
    for i, s in enumerate(socks):
        if s.fileno() in ready:
            s.close()
            socks[i] = one(i)
            reopened += 1
print("idle sockets    %d held open (%d reopened after the header timeout)"
      % (len(socks), reopened))
EOF
echo
echo "the same with $IDLE idle connections held open"
/usr/bin/python3 "$tmp/idle.py" 127.0.0.1 "${addr##*:}" "$IDLE" "$((SECONDS_RUN + 3))" &
idle_pid=$!
sleep 2
echo "VmRSS before    $(rss)"
echo "daemon threads  $(ls "/proc/$pid/task" | wc -l)"
run_wrk
echo "VmRSS after     $(rss)"
wait "$idle_pid" || true
