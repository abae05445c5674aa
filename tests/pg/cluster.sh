#!/bin/bash
# tests/pg/cluster.sh -- a private, throw-away PostgreSQL server for the
# tests of the PostgreSQL store backend.
#
#   tests/pg/cluster.sh start DIR   initdb in DIR/data, start the server on
#                                   a Unix socket in DIR only (no TCP), and
#                                   print the variables the tests read:
#                                   FG_TEST_PG_HOST, FG_TEST_PG_PORT,
#                                   FG_TEST_PG_USER (eval the output)
#   tests/pg/cluster.sh stop DIR    stop it (DIR is left for the caller)
#
# Uses Debian's server binaries (package postgresql, newest installed
# major version). initdb refuses to run as root, so as root the server runs
# as the `postgres` account the package creates. Settings are for tests:
# trust authentication on the socket, fsync off.
set -euo pipefail

cmd="${1:?usage: cluster.sh start|stop DIR}"
dir="${2:?usage: cluster.sh start|stop DIR}"
port="${FG_TEST_PG_PORT:-54329}"
bin="$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1)"
if [ -z "$bin" ] || [ ! -x "$bin/initdb" ]; then
  echo "cluster.sh: no PostgreSQL server binaries under /usr/lib/postgresql" >&2
  exit 1
fi
as=()
if [ "$(id -u)" -eq 0 ]; then as=(runuser -u postgres --); fi

case "$cmd" in
start)
  mkdir -p "$dir"
  if [ "$(id -u)" -eq 0 ]; then chown postgres "$dir"; fi
  "${as[@]}" "$bin/initdb" -D "$dir/data" -A trust -U fgtest -E UTF8 \
    --no-instructions >"$dir/initdb.log" 2>&1 ||
    { cat "$dir/initdb.log" >&2; exit 1; }
  "${as[@]}" "$bin/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w \
    -o "-c listen_addresses='' -k $dir -p $port -c fsync=off -c max_connections=200" \
    start >/dev/null ||
    { cat "$dir/server.log" >&2; exit 1; }
  echo "export FG_TEST_PG_HOST='$dir' FG_TEST_PG_PORT='$port' FG_TEST_PG_USER='fgtest'"
  ;;
stop)
  "${as[@]}" "$bin/pg_ctl" -D "$dir/data" -m fast -w stop >/dev/null 2>&1 || true
  ;;
*)
  echo "usage: cluster.sh start|stop DIR" >&2
  exit 2
  ;;
esac
