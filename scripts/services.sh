#!/usr/bin/env bash
# Start or stop Crosstally's own services without the app: scripts/services.sh up|down|status
# (CROSSTALLY_MODE=test for the test set). Used by benchmarks and by hand.
set -uo pipefail
. "$(dirname "$0")/lib/env.sh"
. "$(dirname "$0")/lib/setup.sh"
cd "$ROOT_DIR" || exit 1
case "${1:-}" in
	up) ensure_packages; ensure_node_modules; mkdir -p "$RUN_DIR"; write_env_file; load_env_file
		start_mariadb; ensure_database; start_redis; start_mailfake
		MIGRATE_SOCKET="$RUN_DIR/mariadb.sock" node_modules/.bin/tsx scripts/migrate.ts ;;
	down) # a running `npm start` stops what it started itself (by PID); then anything left, by PID file
		if pid_alive "$RUN_DIR/start.pid"; then
			kill -TERM "$(cat "$RUN_DIR/start.pid")" 2>/dev/null
			for _ in $(seq 1 100); do pid_alive "$RUN_DIR/start.pid" || break; sleep 0.2; done
		fi
		stop_all; rm -f "$RUN_DIR/start.pid" ;;
	status) for f in "$RUN_DIR"/*.pid; do [ -f "$f" ] && { pid_alive "$f" && echo "$(basename "$f" .pid) running $(cat "$f")" || echo "$(basename "$f" .pid) stale"; }; done ;;
	*) echo "usage: $0 up|down|status" >&2; exit 2 ;;
esac
