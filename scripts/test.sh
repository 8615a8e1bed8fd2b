#!/usr/bin/env bash
# npm test: the same set-up as npm start, with its own data directory, database and ports, then
# every test (unit, integration against the real MariaDB and Redis, end-to-end in Chromium).
set -uo pipefail
export CROSSTALLY_MODE=test CROSSTALLY_NEED_BROWSER=1
. "$(dirname "$0")/lib/env.sh"
. "$(dirname "$0")/lib/setup.sh"
cd "$ROOT_DIR" || exit 1

ensure_packages
ensure_node_modules
mkdir -p "$RUN_DIR"
# short intervals so reminder tests run in seconds
export REMINDER_INTERVAL_MINUTES="${REMINDER_INTERVAL_MINUTES:-0.05}" SESSION_IDLE_MINUTES="${SESSION_IDLE_MINUTES:-30}"
# every test signs in from 127.0.0.1: the per-address limit is unit-tested instead
export SIGNIN_MAX_PER_ADDRESS="${SIGNIN_MAX_PER_ADDRESS:-100000}"
write_env_file
load_env_file

cleanup() { trap - INT TERM EXIT; stop_all; }
trap cleanup INT TERM EXIT

start_mariadb
ensure_database fresh
start_redis
redis_cli flushall >/dev/null
rm -rf "$CROSSTALLY_DATA_DIR/uploads"
start_mailfake
MIGRATE_SOCKET="$RUN_DIR/mariadb.sock" node_modules/.bin/tsx scripts/migrate.ts || die "migration failed"
node_modules/.bin/tsx db/seeds/run.ts test || die "seeding failed"
ensure_build
start_worker
start_app

export MIGRATE_SOCKET="$RUN_DIR/mariadb.sock" RUN_DIR
log "running tests"
node_modules/.bin/vitest run "$@"
status=$?
[ $status -eq 0 ] && log "all tests passed" || log "tests failed (exit $status); logs in $RUN_DIR"
exit $status
