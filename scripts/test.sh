#!/usr/bin/env bash
# npm test: the same set-up as npm start, with its own data directory, database and ports, then
# every test (unit, integration against the real MariaDB and Redis, end-to-end in Chromium).
set -uo pipefail
export CROSSTALLY_MODE=test CROSSTALLY_NEED_BROWSER=1
. "$(dirname "$0")/lib/env.sh"
. "$(dirname "$0")/lib/setup.sh"
cd "$ROOT_DIR" || exit 1

# Unit tests need no service: `npm test -- tests/unit` (only unit paths given) starts none, and a
# full run takes them first, in parallel, before MariaDB, Redis and the app are started.
only_unit=1
[ $# -eq 0 ] && only_unit=0
for a in "$@"; do case "$a" in tests/unit | tests/unit/* | ./tests/unit | ./tests/unit/*) ;; *) only_unit=0 ;; esac done

[ $only_unit = 1 ] || ensure_packages
ensure_node_modules
mkdir -p "$RUN_DIR"
# Types first (svelte-check over the app, the scripts and the tests), then ESLint and Prettier: an
# error fails the run before any service starts. CROSSTALLY_SKIP_CHECK=1 skips all three for a quick
# subset while iterating.
if [ "${CROSSTALLY_SKIP_CHECK:-0}" != 1 ]; then
	log "type check (npm run check)"
	npm run --silent check -- --threshold error --output machine >"$RUN_DIR/check.log" 2>&1
	check_status=$?
	if [ $check_status -ne 0 ]; then
		grep -E 'ERROR|COMPLETED' "$RUN_DIR/check.log" >&2 || tail -n 40 "$RUN_DIR/check.log" >&2
		die "type check failed (npm run check); no tests were run"
	fi
	# Lint (ESLint) and format (Prettier) next, also before any service starts.
	log "lint and format check (npm run lint)"
	if ! npx eslint . >"$RUN_DIR/lint.log" 2>&1; then
		tail -n 40 "$RUN_DIR/lint.log" >&2
		die "lint failed (npx eslint .); no tests were run"
	fi
	if ! npx prettier --check . >>"$RUN_DIR/lint.log" 2>&1; then
		grep -F '[warn]' "$RUN_DIR/lint.log" | head -n 20 >&2
		die "files not formatted (npm run format writes them); no tests were run"
	fi
fi
unit_status=0
if [ $only_unit = 1 ] || [ $# -eq 0 ]; then
	log "unit tests (no services, files in parallel)"
	node_modules/.bin/vitest run --fileParallelism "${@:-tests/unit}"
	unit_status=$?
	if [ $only_unit = 1 ]; then
		[ $unit_status -eq 0 ] && log "all tests passed" || log "tests failed (exit $unit_status)"
		exit $unit_status
	fi
	set -- tests/integration tests/e2e
fi

# a day between reminders: the protocols the suite leaves in review stay quiet (hundreds of chains
# every 3 s flooded the worker and delayed every other e-mail); the notification tests save a
# 3-second interval as the site setting while they run
export REMINDER_INTERVAL_MINUTES="${REMINDER_INTERVAL_MINUTES:-1440}" SESSION_IDLE_MINUTES="${SESSION_IDLE_MINUTES:-30}"
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
[ $status -eq 0 ] && [ $unit_status -ne 0 ] && { log "the unit tests failed (above)"; status=$unit_status; }
[ $status -eq 0 ] && log "all tests passed" || log "tests failed (exit $status); logs in $RUN_DIR"
exit $status
