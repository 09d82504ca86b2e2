#!/usr/bin/env bash
# Shared set-up steps for `npm start`, `npm test` and `npm run bench`.
# Everything here is idempotent: a second run reuses what the first one made.
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$ROOT"

log() { printf '\033[1;34m[runnel]\033[0m %s\n' "$*" >&2; }
die() { printf '\033[1;31m[runnel]\033[0m %s\n' "$*" >&2; exit 1; }

as_root() {
  if [ "$(id -u)" = 0 ]; then "$@"; elif command -v sudo >/dev/null; then sudo "$@"; else die "need root for: $*"; fi
}

apt_install() {
  log "installing Debian packages: $*"
  if [ ! -f /tmp/.runnel-apt-updated ]; then
    as_root env DEBIAN_FRONTEND=noninteractive apt-get update -qq && touch /tmp/.runnel-apt-updated
  fi
  as_root env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "$@" >/dev/null
}

ensure_node_modules() {
  local stamp="node_modules/.package-lock.json"
  if [ ! -d node_modules ] || [ ! -f "$stamp" ] || [ package-lock.json -nt "$stamp" ]; then
    log "installing npm dependencies (npm ci)"
    npm ci --no-audit --no-fund --loglevel=error
  fi
}

pg_bindir() {
  local d
  for d in $(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V -r); do
    if [ -x "$d/initdb" ] && [ -x "$d/pg_ctl" ]; then echo "$d"; return 0; fi
  done
  return 1
}

ensure_postgres_binaries() {
  if ! pg_bindir >/dev/null; then
    apt_install postgresql
    # Debian starts its own cluster on 5432; we do not need it.
    as_root pg_ctlcluster --force "$(ls /usr/lib/postgresql | sort -V | tail -1)" main stop >/dev/null 2>&1 || true
  fi
  pg_bindir >/dev/null || die "PostgreSQL server binaries not found after install"
  if ! id postgres >/dev/null 2>&1; then
    as_root useradd --system --user-group --home-dir /var/lib/postgresql --shell /bin/bash postgres
  fi
}

ensure_mosquitto() {
  if [ ! -x /usr/sbin/mosquitto ]; then apt_install mosquitto; fi
  # the package starts a system broker on 1883; the tests run their own on ports of their own
  as_root systemctl stop mosquitto >/dev/null 2>&1 || true
  as_root pkill -x -f '/usr/sbin/mosquitto -c /etc/mosquitto/mosquitto.conf' >/dev/null 2>&1 || true
}

ensure_chromium() {
  if [ ! -x /usr/bin/chromium ]; then apt_install chromium; fi
}

# A folder the postgres user can reach: the project's .data/ when every parent is
# enterable by that user, otherwise one under /var/tmp (printed).
pg_base_dir() {
  local want="$ROOT/.data"
  mkdir -p "$want"
  if [ "$(id -u)" = 0 ] && ! runuser -u postgres -- test -x "$want" 2>/dev/null; then
    local alt="/var/tmp/runnel-$(echo -n "$ROOT" | md5sum | cut -c1-8)"
    mkdir -p "$alt"
    log "postgres cannot enter $want; keeping the database cluster in $alt" 
    echo "$alt"
  else
    echo "$want"
  fi
}

as_postgres() {
  if [ "$(id -u)" = 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi
}

# pg_up NAME PORT — creates (first time) and starts a cluster; exports PGDATA_DIR and ADMIN_DATABASE_URL.
pg_up() {
  local name="$1" port="$2" bin base data pwfile
  bin="$(pg_bindir)"
  base="$(pg_base_dir)"
  data="$base/pg-$name"
  pwfile="$base/pg-$name.password"
  if [ ! -s "$pwfile" ]; then
    head -c 18 /dev/urandom | base64 | tr -dc 'A-Za-z0-9' > "$pwfile"
  fi
  chmod 600 "$pwfile"
  if [ ! -f "$data/PG_VERSION" ]; then
    log "creating PostgreSQL cluster in $data (port $port)"
    rm -rf "$data"; mkdir -p "$data"
    [ "$(id -u)" = 0 ] && chown postgres:postgres "$data" && chmod 700 "$data"
    local tmppw; tmppw="$(mktemp)"; cp "$pwfile" "$tmppw"; chmod 644 "$tmppw"
    as_postgres "$bin/initdb" -D "$data" -U runnel --pwfile="$tmppw" --auth-local=scram-sha-256 \
      --auth-host=scram-sha-256 -E UTF8 --locale=C.UTF-8 >/dev/null
    rm -f "$tmppw"
    cat >> "$data/postgresql.conf" <<CONF
listen_addresses = '127.0.0.1'
port = $port
unix_socket_directories = '$data'
max_connections = 200
shared_buffers = 256MB
fsync = on
synchronous_commit = on
log_min_messages = warning
CONF
  fi
  if ! as_postgres "$bin/pg_ctl" -D "$data" status >/dev/null 2>&1; then
    log "starting PostgreSQL ($data, 127.0.0.1:$port)"
    # setsid: a Ctrl-C in the terminal reaches the server, which stops first; we stop PostgreSQL after it.
    as_postgres setsid "$bin/pg_ctl" -D "$data" -l "$data/server.log" -w -t 60 start >/dev/null \
      || { tail -20 "$data/server.log" >&2; die "PostgreSQL did not start"; }
    PG_STARTED_BY_US=1
  fi
  PGDATA_DIR="$data"
  ADMIN_DATABASE_URL="postgres://runnel:$(cat "$pwfile")@127.0.0.1:$port"
  export PGDATA_DIR ADMIN_DATABASE_URL
}

# pg_down [--quiet] — stop the cluster when this script started it; --quiet prints nothing.
pg_down() {
  if [ -n "${PGDATA_DIR:-}" ] && [ "${PG_STARTED_BY_US:-0}" = 1 ]; then
    [ "${1:-}" = --quiet ] || log "stopping PostgreSQL"
    as_postgres "$(pg_bindir)/pg_ctl" -D "$PGDATA_DIR" -m fast -w stop >/dev/null 2>&1 || true
  fi
}

# ensure_database URL_BASE NAME — create the database when missing.
ensure_database() {
  local base="$1" name="$2"
  node --input-type=module -e "
    import pg from 'pg';
    const c = new pg.Client({ connectionString: '$base/postgres' });
    await c.connect();
    const r = await c.query('select 1 from pg_database where datname = \$1', ['$name']);
    if (r.rowCount === 0) await c.query('create database \"$name\"');
    await c.end();
  "
}
