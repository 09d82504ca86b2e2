#!/usr/bin/env bash
# npm run bench — benchmarks on this machine, against a PostgreSQL cluster of their own.
source "$(dirname "$0")/lib.sh"
ensure_node_modules
ensure_postgres_binaries
pg_up bench "${RUNNEL_BENCH_PG_PORT:-54349}"
trap pg_down EXIT
export BENCH_ADMIN_DATABASE_URL="$ADMIN_DATABASE_URL"
# compiled, as npm start runs the server (scripts/build-node.mjs); the processes the benchmarks start are too
node scripts/build-node.mjs
export RUNNEL_COMPILED=1
node --max-old-space-size=2048 --expose-gc --enable-source-maps .build/node/bench-run.mjs "$@"
