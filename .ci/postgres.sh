#!/usr/bin/env bash
# Start a throwaway PostgreSQL 15 under /tmp for the store tests (sourced by .ci/run).
# Socket only, fsync off; `pg_stop` (set as an EXIT trap by the caller) removes it.
# Sets TESTPLAN_TEST_PG_URL for the tests.
PG_BIN=${PG_BIN:-/usr/lib/postgresql/15/bin}
PG_DIR=$(mktemp -d /tmp/testplan-pg.XXXXXX)
chmod 755 "$PG_DIR"
mkdir "$PG_DIR/data" "$PG_DIR/socket"
chown -R postgres:postgres "$PG_DIR"
as_pg() { if [ "$(id -un)" = postgres ]; then "$@"; else runuser -u postgres -- "$@"; fi; }
as_pg "$PG_BIN/initdb" -D "$PG_DIR/data" -U postgres -A trust --no-sync >/dev/null
as_pg "$PG_BIN/pg_ctl" -D "$PG_DIR/data" -l "$PG_DIR/log" -w start \
    -o "-c listen_addresses='' -k $PG_DIR/socket -c fsync=off -c synchronous_commit=off -c full_page_writes=off -c max_connections=200" >/dev/null
pg_stop() {
    as_pg "$PG_BIN/pg_ctl" -D "$PG_DIR/data" -m immediate stop >/dev/null 2>&1 || true
    rm -rf "$PG_DIR"
}
export TESTPLAN_TEST_PG_URL="postgresql+psycopg://postgres@/postgres?host=$PG_DIR/socket"
echo "postgres: throwaway server at $PG_DIR/socket"
