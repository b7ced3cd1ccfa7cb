#!/usr/bin/env bash
# tests/postgresql/cluster.sh - a throw-away PostgreSQL server for the tests
# and benchmarks: Debian's postgresql binaries, a cluster in a folder of our
# own owned by an unprivileged user, listening on 127.0.0.1 only.
#
#   cluster.sh start DIR PORT [fast]
#                               initdb (first time) and start; prints the
#                               connection string on stdout. `fast` turns
#                               fsync and full-page writes off: for the
#                               tests, whose crashes are of processes (the
#                               operating system keeps what was written),
#                               never of the machine. The benchmarks start
#                               it without, as a deployment runs.
#   cluster.sh stop DIR         fast shutdown
#   cluster.sh kill DIR         SIGKILL of the postmaster (crash tests)
#
# The server runs as the user `postgres` when started by root (PostgreSQL
# refuses to run as root), otherwise as the calling user. Authentication is
# `trust` for 127.0.0.1: the server is reachable only from this machine and
# lives as long as the test run. The database is `mitilog`, the role the
# bootstrap superuser `mitilog`.
set -euo pipefail

command=${1:-}
dir=${2:-}
port=${3:-55432}
speed=${4:-}
if [ -z "$command" ] || [ -z "$dir" ]; then
  echo "usage: $0 start|stop|kill DIR [PORT]" >&2
  exit 2
fi

bindir=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
if [ -z "$bindir" ] || [ ! -x "$bindir/initdb" ]; then
  echo "cluster.sh: PostgreSQL's server programs are not installed; run deploy/install-dependencies.sh" >&2
  exit 1
fi

as_owner() {
  if [ "$(id -u)" -eq 0 ]; then
    runuser -u postgres -- "$@"
  else
    "$@"
  fi
}

case "$command" in
start)
  mkdir -p "$dir"
  if [ "$(id -u)" -eq 0 ]; then chown postgres: "$dir"; fi
  chmod 700 "$dir"
  if [ ! -f "$dir/data/PG_VERSION" ]; then
    as_owner "$bindir/initdb" -D "$dir/data" -U mitilog --auth=trust \
      --encoding=UTF8 --locale=C.UTF-8 >"$dir/initdb.log" 2>&1 || {
      cat "$dir/initdb.log" >&2
      exit 1
    }
  fi
  # synchronous_commit stays on in both: a commit is in the write-ahead log
  # (handed to the operating system) before it is acknowledged, so a killed
  # server loses nothing acknowledged. fsync is on unless `fast` is asked.
  durability=""
  if [ "$speed" = fast ]; then durability="-c fsync=off -c full_page_writes=off"; fi
  as_owner "$bindir/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w -t 60 \
    -o "-c listen_addresses=127.0.0.1 -c port=$port -c unix_socket_directories='$dir' -c max_connections=200 -c shared_buffers=256MB $durability" \
    start >/dev/null || {
    tail -20 "$dir/server.log" >&2
    exit 1
  }
  if ! as_owner "$bindir/psql" -h 127.0.0.1 -p "$port" -U mitilog -d postgres -tAc \
    "SELECT 1 FROM pg_database WHERE datname = 'mitilog'" | grep -q 1; then
    as_owner "$bindir/createdb" -h 127.0.0.1 -p "$port" -U mitilog mitilog
  fi
  echo "host=127.0.0.1 port=$port dbname=mitilog user=mitilog"
  ;;
stop)
  as_owner "$bindir/pg_ctl" -D "$dir/data" -m fast -w stop >/dev/null 2>&1 || true
  ;;
kill)
  if [ -f "$dir/data/postmaster.pid" ]; then
    kill -9 "$(head -1 "$dir/data/postmaster.pid")" 2>/dev/null || true
  fi
  ;;
*)
  echo "usage: $0 start|stop|kill DIR [PORT]" >&2
  exit 2
  ;;
esac
