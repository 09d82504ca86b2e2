#!/usr/bin/env bash
# npm start — set up everything and run the whole product on loopback with demo data.
source "$(dirname "$0")/lib.sh"

ensure_node_modules
export NODE_ENV="${NODE_ENV:-development}"
if [ -z "${DATABASE_URL:-}" ]; then
  ensure_postgres_binaries
  pg_up demo "${RUNNEL_PG_PORT:-54329}"
  trap pg_down EXIT
  ensure_database "$ADMIN_DATABASE_URL" runnel
  export DATABASE_URL="$ADMIN_DATABASE_URL/runnel"
fi
if [ "$NODE_ENV" != production ]; then export RUNNEL_DEMO="${RUNNEL_DEMO:-1}"; fi

node --import tsx scripts/migrate.ts
if [ "${RUNNEL_DEMO:-0}" = 1 ]; then node --import tsx scripts/seed.ts; fi

if [ ! -f dist/index.html ] || [ -n "$(find src index.html vite.config.ts package-lock.json -newer dist/index.html -print -quit 2>/dev/null)" ]; then
  log "building the client"
  ./node_modules/.bin/vite build --logLevel warn
fi

# the server runs compiled (scripts/build-node.mjs, under a second): plain node, no loader thread
node scripts/build-node.mjs
log "Runnel on http://${HOST:-127.0.0.1}:${PORT:-3000}  (Ctrl-C stops the server and PostgreSQL)"
set +e
node --enable-source-maps .build/node/server.mjs &
SERVER_PID=$!
trap 'kill -TERM $SERVER_PID 2>/dev/null' INT TERM
wait $SERVER_PID
wait $SERVER_PID 2>/dev/null
exit 0
