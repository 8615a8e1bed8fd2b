#!/usr/bin/env bash
# The benchmark's own stack, used by `npm run bench` (scripts/bench/all.ts):
#   stack.sh services   MariaDB, Redis, mail fake, a fresh database (BENCH_KEEP_DATA=1 keeps it),
#                       migrations, accounts + catalog seed
#   stack.sh app        build if stale, then the app and the worker
#   stack.sh down       stop everything started under $CROSSTALLY_DATA_DIR/run, by PID file
# all.ts sets its own data dir and ports (.data/bench, 3371/6471/2671/2672/3071) unless overridden.
set -uo pipefail
export CROSSTALLY_MODE="${CROSSTALLY_MODE:-test}"
# the figures in README were measured with two app processes (scripts/serve.js); opt-in elsewhere
export APP_PROCESSES="${APP_PROCESSES:-2}"
. "$(dirname "$0")/../lib/env.sh"
. "$(dirname "$0")/../lib/setup.sh"
cd "$ROOT_DIR" || exit 1
case "${1:-}" in
	services)
		# an app left from an earlier run would keep serving the old build and database
		stop_pidfile "$RUN_DIR/app.pid"; stop_pidfile "$RUN_DIR/worker.pid"
		ensure_packages; ensure_node_modules; mkdir -p "$RUN_DIR"
		# the benchmarks sign in many times from 127.0.0.1
		export SIGNIN_MAX_PER_ADDRESS="${SIGNIN_MAX_PER_ADDRESS:-100000}" SIGNIN_MAX_PER_ACCOUNT="${SIGNIN_MAX_PER_ACCOUNT:-100000}" SIGNIN_MAX_PER_PAIR="${SIGNIN_MAX_PER_PAIR:-100000}"
		write_env_file; load_env_file
		# a fresh database each run unless BENCH_KEEP_DATA=1: the figures then never depend on leftovers
		start_mariadb; if [ "${BENCH_KEEP_DATA:-0}" = 1 ]; then ensure_database; else ensure_database fresh; fi
		start_redis; redis_cli flushall >/dev/null; start_mailfake
		MIGRATE_SOCKET="$RUN_DIR/mariadb.sock" node_modules/.bin/tsx scripts/migrate.ts || die "migration failed"
		DB_POOL_MAX=2 node_modules/.bin/tsx db/seeds/run.ts test || die "seeding failed" ;;
	app)
		load_env_file; mkdir -p "$(dirname "$CROSSTALLY_BUILD_DIR")"
		ensure_build; start_worker; start_app
		log "app on $ORIGIN (pid $(cat "$RUN_DIR/app.pid")), worker pid $(cat "$RUN_DIR/worker.pid")" ;;
	stop-app)
		stop_pidfile "$RUN_DIR/app.pid"; stop_pidfile "$RUN_DIR/worker.pid" ;;
	down) stop_all ;;
	*) echo "usage: $0 services|app|stop-app|down" >&2; exit 2 ;;
esac
