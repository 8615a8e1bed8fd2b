#!/usr/bin/env bash
# npm start: install what is missing, start Crosstally's own MariaDB, Redis and mail fake,
# migrate, seed the demo clinic once, build, and serve the app with its worker. Ctrl-C stops
# every process this script started, by PID.
set -uo pipefail
. "$(dirname "$0")/lib/env.sh"
. "$(dirname "$0")/lib/setup.sh"
cd "$ROOT_DIR" || exit 1

ensure_packages
ensure_node_modules
mkdir -p "$RUN_DIR"
echo $$ >"$RUN_DIR/start.pid" # `npm stop` (scripts/services.sh down) asks this script to stop
write_env_file
load_env_file

cleanup() {
	trap - INT TERM EXIT
	log "stopping"
	stop_all
	rm -f "$RUN_DIR/start.pid"
	log "stopped"
	exit 0
}
trap cleanup INT TERM EXIT

start_mariadb
ensure_database
start_redis
start_mailfake
log "migrating"
MIGRATE_SOCKET="$RUN_DIR/mariadb.sock" node_modules/.bin/tsx scripts/migrate.ts || die "migration failed"
DB_POOL_MAX=1 node_modules/.bin/tsx db/seeds/run.ts demo || die "seeding failed"
ensure_build
start_worker
start_app

cat <<MSG

  Crosstally is running at $ORIGIN

  Demo accounts (password for all: crosstally-demo):
    scorer    sam.scorer@demo.crosstally.test     (also: rae.scorer@…, kit.scorer@…)
    reviewer  rita.reviewer@demo.crosstally.test
    lead      lee.lead@demo.crosstally.test
    admin     ada.admin@demo.crosstally.test

  Mail is caught by the local fake: sign in as admin and open Mailbox.
  Logs: $RUN_DIR/*.log    Press Ctrl-C (or run npm stop elsewhere) to stop.

MSG

# Wait for either child to exit (or Ctrl-C).
while pid_alive "$RUN_DIR/app.pid" && pid_alive "$RUN_DIR/worker.pid"; do sleep 1; done
log "a process exited unexpectedly; see $RUN_DIR/app.log and $RUN_DIR/worker.log"
tail -n 20 "$RUN_DIR/app.log" "$RUN_DIR/worker.log" >&2
exit 1
