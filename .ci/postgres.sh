# shellcheck shell=bash
# Sourced by .ci/run: a throwaway PostgreSQL cluster on loopback for the server
# half of the store tests. pg_start WORK starts it and exports MATCHER_TEST_PG_URL
# (returns non-zero when it could not be started: no binaries, no postgres user);
# pg_stop stops it and removes its folder (called from the EXIT trap, pass or fail).
# The server refuses to run as root, so as root initdb/pg_ctl run as `postgres`,
# in their own temporary folder (WORK itself is private to root).

_pg_dir=""
_pg_bin=""

_pg_find_bin() {
  local d
  for d in /usr/lib/postgresql/15/bin /usr/local/bin /usr/lib/postgresql/*/bin; do
    if [ -x "$d/initdb" ] && [ -x "$d/pg_ctl" ]; then _pg_bin="$d"; return 0; fi
  done
  if command -v initdb >/dev/null 2>&1 && command -v pg_ctl >/dev/null 2>&1; then
    _pg_bin="$(dirname "$(command -v initdb)")"; return 0
  fi
  return 1
}

_pg_as_server_user() {
  if [ "$(id -u)" -eq 0 ]; then
    runuser -u postgres -- "$@"
  else
    "$@"
  fi
}

_pg_free_port() {
  python3 -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1]); s.close()'
}

pg_start() {
  local work="$1" port
  _pg_find_bin || { echo "ci: no PostgreSQL server binaries (initdb, pg_ctl)"; return 1; }
  if [ "$(id -u)" -eq 0 ]; then
    id postgres >/dev/null 2>&1 || { echo "ci: running as root and there is no postgres user"; return 1; }
    command -v runuser >/dev/null 2>&1 || { echo "ci: running as root and runuser is missing"; return 1; }
  fi
  _pg_dir=$(mktemp -d /tmp/matcher-ci-pg.XXXXXX) || return 1
  [ "$(id -u)" -eq 0 ] && chown postgres: "$_pg_dir"
  chmod 700 "$_pg_dir"
  port=$(_pg_free_port) || return 1
  _pg_as_server_user "$_pg_bin/initdb" -D "$_pg_dir/data" -U postgres -A trust -E UTF8 --locale=C --no-sync \
    >"$work/pg-initdb.log" 2>&1 || { echo "ci: initdb failed:"; tail -5 "$work/pg-initdb.log"; return 1; }
  # superuser trusted on loopback; every other role (the tests' password-protected and
  # read-only roles) must give its password
  _pg_as_server_user sh -c "cat > '$_pg_dir/data/pg_hba.conf'" <<'HBA'
local all all trust
host all postgres 127.0.0.1/32 trust
host all postgres ::1/128 trust
host all all 127.0.0.1/32 scram-sha-256
host all all ::1/128 scram-sha-256
HBA
  _pg_as_server_user "$_pg_bin/pg_ctl" -D "$_pg_dir/data" -l "$_pg_dir/server.log" -w -t 60 \
    -o "-c listen_addresses=127.0.0.1 -c port=$port -c unix_socket_directories=$_pg_dir -c fsync=off -c synchronous_commit=off -c full_page_writes=off -c max_connections=60" \
    start >"$work/pg-start.log" 2>&1 || { echo "ci: pg_ctl start failed:"; tail -5 "$work/pg-start.log"; tail -5 "$_pg_dir/server.log" 2>/dev/null; return 1; }
  export MATCHER_TEST_PG_URL="postgresql+psycopg://postgres@127.0.0.1:$port/postgres"
  echo "ci: PostgreSQL $("$_pg_bin/pg_ctl" --version | awk '{print $3}') started on 127.0.0.1:$port"
}

pg_stop() {
  if [ -n "$_pg_dir" ]; then
    if [ -f "$_pg_dir/data/postmaster.pid" ]; then
      _pg_as_server_user "$_pg_bin/pg_ctl" -D "$_pg_dir/data" -m immediate -w stop >/dev/null 2>&1 || true
    fi
    rm -rf "$_pg_dir"
    _pg_dir=""
    echo "ci: PostgreSQL stopped"
  fi
}
