#!/usr/bin/env bash
# A throwaway PostgreSQL server for the results-database tests (docs/results-db.md): a cluster
# initialised in a new temporary folder, listening only on a Unix socket in that folder
# (listen_addresses = ''), with one database, periodfit_test. Never touches a system cluster.
#
# Usage: eval "$(tools/pg-cluster.sh start)"   # exports PERIODFIT_TEST_PG_URL and PERIODFIT_PG_DIR
#        tools/pg-cluster.sh stop DIR           # stops the server and removes DIR
#
# initdb refuses to run as root, so as root the cluster belongs to Debian's `postgres` user
# (runuser); as anyone else it belongs to that user. The binaries are Debian's
# (/usr/lib/postgresql/<version>/bin; PERIODFIT_PG_BIN overrides). Prints the export lines on
# stdout; progress and errors go to stderr.
set -euo pipefail

pg_bin() {
  if [ -n "${PERIODFIT_PG_BIN:-}" ]; then echo "$PERIODFIT_PG_BIN"; return; fi
  local d
  for d in $(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V -r); do
    [ -x "$d/initdb" ] && { echo "$d"; return; }
  done
  echo "periodfit: pg-cluster: no PostgreSQL server binaries (install Debian's postgresql)" >&2
  return 1
}

as_owner() {
  if [ "$(id -u)" -eq 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi
}

start() {
  local bin dir owner
  bin=$(pg_bin)
  dir=$(mktemp -d "${TMPDIR:-/tmp}/periodfit-pg.XXXXXX")
  owner=$(id -un)
  if [ "$(id -u)" -eq 0 ]; then
    owner=postgres
    chown postgres: "$dir"
  fi
  chmod 700 "$dir"
  as_owner "$bin/initdb" -D "$dir/data" -U "$owner" --auth=trust --encoding=UTF8 --no-locale >"$dir/initdb.log" 2>&1 || {
    echo "periodfit: pg-cluster: initdb failed:" >&2; cat "$dir/initdb.log" >&2; rm -rf "$dir"; return 1; }
  # Root (the test binary) reaches the socket through the folder: let it traverse.
  chmod 711 "$dir"
  as_owner "$bin/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w -t 30 \
    -o "-c listen_addresses='' -c unix_socket_directories='$dir' -c fsync=off -c max_connections=40" start >/dev/null || {
    echo "periodfit: pg-cluster: the server did not start:" >&2; cat "$dir/server.log" >&2; rm -rf "$dir"; return 1; }
  as_owner "$bin/createdb" -h "$dir" -U "$owner" periodfit_test
  echo "periodfit: pg-cluster: PostgreSQL on $dir (stop: tools/pg-cluster.sh stop $dir)" >&2
  echo "export PERIODFIT_PG_DIR='$dir'"
  echo "export PERIODFIT_TEST_PG_URL='postgresql:///periodfit_test?host=$dir&user=$owner'"
}

stop() {
  local dir=${1:?usage: tools/pg-cluster.sh stop DIR}
  case "$dir" in */periodfit-pg.*) ;; *) echo "periodfit: pg-cluster: $dir is not a pg-cluster folder" >&2; return 1;; esac
  [ -d "$dir" ] || return 0
  local bin
  bin=$(pg_bin)
  [ -f "$dir/data/postmaster.pid" ] && as_owner "$bin/pg_ctl" -D "$dir/data" -m immediate -w stop >/dev/null 2>&1 || true
  rm -rf "$dir"
}

case "${1:-}" in
  start) start ;;
  stop) stop "${2:-${PERIODFIT_PG_DIR:-}}" ;;
  *) echo "usage: tools/pg-cluster.sh start | stop DIR" >&2; exit 2 ;;
esac
