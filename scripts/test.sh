#!/usr/bin/env bash
# npm test — set up a throw-away test database cluster, then run the whole suite.
source "$(dirname "$0")/lib.sh"

ensure_node_modules
ensure_chromium
ensure_mosquitto
if [ -z "${TEST_ADMIN_DATABASE_URL:-}" ]; then
  ensure_postgres_binaries
  pg_up test "${RUNNEL_TEST_PG_PORT:-54339}"
  # quiet, so vitest's summary stays the last thing printed
  trap 'pg_down --quiet' EXIT
  export TEST_ADMIN_DATABASE_URL="$ADMIN_DATABASE_URL"
fi
export NODE_ENV=test
if [ ! -f dist/index.html ] || [ -n "$(find src index.html vite.config.ts package-lock.json -newer dist/index.html -print -quit 2>/dev/null)" ]; then
  log "building the client for the browser tests"
  ./node_modules/.bin/vite build --logLevel warn
fi
./node_modules/.bin/vitest run "$@"
