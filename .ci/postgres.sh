# A throwaway PostgreSQL cluster for the database-facing tests. Sourced by .ci/run, which calls
# start_postgres before the tests and stop_postgres on exit.
#
# start_postgres: installs PostgreSQL from the distribution's packages when no initdb is found,
# creates a cluster in a fresh temporary directory (owned by the `postgres` user when run as
# root), starts it on a free port on 127.0.0.1 only, creates the test database over the Unix
# socket and exports VETTING_TEST_PG_URL. Every connection is trusted (--auth=trust, and an
# explicit pg_hba.conf), so nothing ever waits for a typed password.
# stop_postgres: a fast shutdown and removal of the temporary directory.
#
# Usable by hand too:  source .ci/postgres.sh && start_postgres && .venv/bin/python -m pytest; stop_postgres

_pg_log() { echo "[postgres.sh] $*" >&2; }

_pg_bindir() {
  local dir
  dir=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1)
  if [ -n "$dir" ] && [ -x "$dir/initdb" ]; then
    echo "$dir"
    return 0
  fi
  if command -v initdb >/dev/null 2>&1; then
    dirname "$(command -v initdb)"
    return 0
  fi
  return 1
}

# Run a PostgreSQL program as the cluster owner (postgres refuses to run as root).
_pg_as_owner() {
  if [ "$(id -u)" = "0" ]; then
    if command -v runuser >/dev/null 2>&1; then
      runuser -u postgres -- "$@"
    else
      su postgres -s /bin/sh -c "$(printf '%q ' "$@")"
    fi
  else
    "$@"
  fi
}

_pg_free_port() {
  python3 - <<'EOF'
import socket
s = socket.socket()
s.bind(("127.0.0.1", 0))
print(s.getsockname()[1])
s.close()
EOF
}

start_postgres() {
  local bindir
  if ! bindir=$(_pg_bindir); then
    if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
      _pg_log "initdb not found: installing PostgreSQL from the distribution's packages"
      DEBIAN_FRONTEND=noninteractive apt-get update -qq >&2 || return 1
      DEBIAN_FRONTEND=noninteractive apt-get install -y -qq postgresql >&2 || return 1
      bindir=$(_pg_bindir) || return 1
    else
      _pg_log "initdb not found and cannot install PostgreSQL (not root or no apt-get)"
      return 1
    fi
  fi
  if [ "$(id -u)" = "0" ] && ! id postgres >/dev/null 2>&1; then
    useradd --system --home-dir /var/lib/postgresql --shell /bin/sh postgres || return 1
  fi

  VETTING_PG_DIR=$(mktemp -d "${TMPDIR:-/tmp}/vetting-pg.XXXXXX") || return 1
  export VETTING_PG_DIR
  mkdir -p "$VETTING_PG_DIR/data" "$VETTING_PG_DIR/sock"
  if [ "$(id -u)" = "0" ]; then
    chown -R postgres: "$VETTING_PG_DIR"
  fi
  chmod 700 "$VETTING_PG_DIR/data"
  VETTING_PG_BIN=$bindir
  export VETTING_PG_BIN

  local port
  port=$(_pg_free_port) || return 1
  VETTING_PG_PORT=$port
  export VETTING_PG_PORT

  _pg_log "initdb in $VETTING_PG_DIR/data ($bindir)"
  _pg_as_owner "$bindir/initdb" -D "$VETTING_PG_DIR/data" -U postgres --auth=trust \
    --encoding=UTF8 --locale=C.UTF-8 --no-sync >"$VETTING_PG_DIR/initdb.log" 2>&1 \
    || _pg_as_owner "$bindir/initdb" -D "$VETTING_PG_DIR/data" -U postgres --auth=trust \
      --encoding=UTF8 --no-locale --no-sync >"$VETTING_PG_DIR/initdb.log" 2>&1 \
    || { cat "$VETTING_PG_DIR/initdb.log" >&2; return 1; }

  # Trust on the socket and on 127.0.0.1 only; nothing asks for a password.
  cat >"$VETTING_PG_DIR/data/pg_hba.conf" <<'EOF'
local   all   all                 trust
host    all   all   127.0.0.1/32  trust
EOF

  _pg_log "starting on 127.0.0.1:$port"
  if ! _pg_as_owner "$bindir/pg_ctl" -D "$VETTING_PG_DIR/data" -l "$VETTING_PG_DIR/server.log" \
      -o "-c listen_addresses=127.0.0.1 -p $port -k $VETTING_PG_DIR/sock -c fsync=off -c full_page_writes=off -c max_connections=200" \
      -w -t 60 start >&2; then
    cat "$VETTING_PG_DIR/server.log" >&2 || true
    return 1
  fi

  _pg_as_owner "$bindir/createdb" -h "$VETTING_PG_DIR/sock" -p "$port" -U postgres vetting_test \
    </dev/null >&2 || return 1

  VETTING_TEST_PG_URL="postgresql+psycopg://postgres@127.0.0.1:$port/vetting_test"
  export VETTING_TEST_PG_URL
  _pg_log "ready: VETTING_TEST_PG_URL=$VETTING_TEST_PG_URL"
}

stop_postgres() {
  if [ -n "${VETTING_PG_DIR:-}" ] && [ -d "$VETTING_PG_DIR" ]; then
    if [ -n "${VETTING_PG_BIN:-}" ] && [ -f "$VETTING_PG_DIR/data/postmaster.pid" ]; then
      _pg_log "stopping"
      _pg_as_owner "$VETTING_PG_BIN/pg_ctl" -D "$VETTING_PG_DIR/data" -m fast -w stop >&2 || true
    fi
    rm -rf "$VETTING_PG_DIR"
  fi
  unset VETTING_PG_DIR VETTING_TEST_PG_URL VETTING_PG_PORT VETTING_PG_BIN
}
