#!/usr/bin/env bash
# npm run test:cluster — Crosstally scaled out on loopback, under .data/cluster, then the load test
# through the load balancer while a database node, an app server and a worker are stopped by PID
# and restarted (scripts/cluster/run.ts), then everything stopped by PID.
#
#   bash scripts/cluster/cluster.sh            # up, run, down (what npm run test:cluster does)
#   bash scripts/cluster/cluster.sh up|down|status
#   bash scripts/cluster/cluster.sh start-db N | stop-db N | start-app N | start-worker N   (run.ts uses these)
#
# Processes (ports from CLUSTER_BASE, default 4400; all on 127.0.0.1):
#   db1..db3   MariaDB + Galera: client BASE+1..3, group BASE+11..13, IST BASE+21..23, SST BASE+31..33
#   dbcheck    Galera health for HAProxy: HTTP 200 only when the node is Synced, BASE+51..53
#   haproxy    HTTP BASE+80 → app1/app2 (check GET /health); stats BASE+81;
#              TCP BASE+41 → db1 (db2, db3 as backups)  for app1 and worker1
#              TCP BASE+42 → db2 (db1, db3 as backups)  for app2 and worker2
#              TCP BASE+43 → db3 (db1, db2 as backups)  for the load test's counting and the checks
#   app1, app2 the production build on BASE+61, BASE+62, one uploads folder
#   worker1, worker2, Redis BASE+90, mail fake SMTP BASE+91 / HTTP BASE+92
# Options (environment): CLUSTER_USERS (20), CLUSTER_DURATION (90 s), CLUSTER_BASE (4400),
# CLUSTER_SIGNAL (TERM: how processes are stopped during the run), CLUSTER_KEEP=1 (leave it running).
set -uo pipefail
export CROSSTALLY_MODE=test
: "${CLUSTER_BASE:=4400}"
B=$CLUSTER_BASE
export CROSSTALLY_DATA_DIR="${CLUSTER_DATA_DIR:-$(cd "$(dirname "$0")/../.." && pwd)/.data/cluster}"
export DB_PORT=$((B + 43)) REDIS_PORT=$((B + 90)) SMTP_PORT=$((B + 91)) MAILFAKE_PORT=$((B + 92)) PORT=$((B + 80))
# apps and workers reach their Galera node by TCP (DB_PORT per process), never one node's socket
export DB_SOCKET=""
export DB_NAME=crosstally_cluster ORIGIN="http://127.0.0.1:$((B + 80))"
# reminders far apart: the run checks one delivery per outbox row, not the reminder schedule
export REMINDER_INTERVAL_MINUTES="${REMINDER_INTERVAL_MINUTES:-1440}" SIGNIN_MAX_PER_ADDRESS="${SIGNIN_MAX_PER_ADDRESS:-100000}"
# the load test and the checks sign every account in several times from one address
export SIGNIN_MAX_PER_ACCOUNT="${SIGNIN_MAX_PER_ACCOUNT:-1000}"
export SESSION_IDLE_MINUTES="${SESSION_IDLE_MINUTES:-30}"
# on a machine shared with other work, opening a connection through the balancer can take seconds
export DB_CONNECT_TIMEOUT_MS="${DB_CONNECT_TIMEOUT_MS:-10000}"
. "$(dirname "$0")/../lib/env.sh"
. "$(dirname "$0")/../lib/setup.sh"
cd "$ROOT_DIR" || exit 1
CL="$CROSSTALLY_DATA_DIR"
export RUN_DIR CLUSTER_BASE

ensure_cluster_packages() {
	ensure_packages
	local missing=()
	[ -f /usr/lib/galera/libgalera_smm.so ] || missing+=(galera-4)
	command -v mariabackup >/dev/null 2>&1 || missing+=(mariadb-backup)
	command -v socat >/dev/null 2>&1 || missing+=(socat)
	command -v haproxy >/dev/null 2>&1 || [ -x /usr/sbin/haproxy ] || missing+=(haproxy)
	if [ ${#missing[@]} -gt 0 ]; then
		[ "$(id -u)" = 0 ] || die "missing ${missing[*]}: run as root, or install them with apt-get"
		log "installing ${missing[*]} from Debian (once)"
		DEBIAN_FRONTEND=noninteractive apt-get update -qq >/dev/null
		DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null \
			|| die "apt-get install ${missing[*]} failed"
	fi
}

db_sock() { echo "$RUN_DIR/db$1.sock"; }
db_root() { local n=$1; shift; mariadb --no-defaults --protocol=socket --socket="$(db_sock "$n")" -uroot "$@"; }
db_state() { db_root "$1" -Nse "SHOW STATUS LIKE 'wsrep_local_state_comment'" 2>/dev/null | awk '{print $2}'; }

# start-db N [bootstrap]: one Galera node. Bootstrap only for the first start of a new cluster.
start_db() {
	local n=$1 mode=${2:-join} dir="$CL/db$1" pidf="$RUN_DIR/db$1.pid"
	local port=$((B + n)) g=$((B + 10 + n)) ist=$((B + 20 + n)) sst=$((B + 30 + n))
	# each node's own directory for temporary tables and files, as the single server's run/mariadb-tmp
	# (scripts/lib/setup.sh): servers sharing /tmp deleted or refused each other's #sql files. Beside the
	# data directory, not in it: a mariabackup state transfer empties the joiner's data directory (while
	# the server runs) and the donor copies every folder in it as a database.
	local tmp="$RUN_DIR/db$1-tmp"
	mkdir -p "$RUN_DIR" "$tmp"
	if pid_alive "$pidf"; then log "db$n already running (pid $(cat "$pidf"))"; return 0; fi
	if [ ! -d "$dir/mysql" ]; then
		mkdir -p "$dir"
		TMPDIR="$tmp" "$(mariadb_bin mariadb-install-db)" --no-defaults --datadir="$dir" --user=root \
			--auth-root-authentication-method=normal --skip-test-db --skip-name-resolve >"$RUN_DIR/db$n-install.log" 2>&1 \
			|| { cat "$RUN_DIR/db$n-install.log" >&2; die "mariadb-install-db failed for db$n"; }
	fi
	local extra=()
	[ "$mode" = bootstrap ] && extra=(--wsrep-cluster-address=gcomm:// --wsrep-new-cluster)
	# an option file of its own (not --no-defaults): the state-transfer script reads its settings from
	# the server's option file, and without one it reads Debian's /etc/mysql (and logs to syslog)
	cat >"$RUN_DIR/db$n.cnf" <<CNF
[mysqld]
datadir=$dir
tmpdir=$tmp
socket=$(db_sock "$n")
pid-file=$pidf
log-error=$RUN_DIR/db$n.err
port=$port
bind-address=127.0.0.1
skip-name-resolve
user=root
character-set-server=utf8mb4
collation-server=utf8mb4_unicode_ci
innodb-buffer-pool-size=128M
max-connections=300
wsrep-on=ON
wsrep-provider=/usr/lib/galera/libgalera_smm.so
wsrep-cluster-name=crosstally
wsrep-node-name=db$n
wsrep-cluster-address=gcomm://127.0.0.1:$((B + 11)),127.0.0.1:$((B + 12)),127.0.0.1:$((B + 13))
wsrep-node-address=127.0.0.1:$g
wsrep-provider-options="gmcast.listen_addr=tcp://127.0.0.1:$g;ist.recv_addr=127.0.0.1:$ist;gcache.size=256M"
wsrep-sst-receive-address=127.0.0.1:$sst
wsrep-sst-method=mariabackup
wsrep-sst-auth=root:
binlog-format=ROW
innodb-autoinc-lock-mode=2
# causal reads: a read waits until this node has applied what the cluster committed before it
wsrep-sync-wait=1

[sst]
sst-log-archive=0
CNF
	"$(mariadb_bin mariadbd)" --defaults-file="$RUN_DIR/db$n.cnf" "${extra[@]}" >/dev/null 2>&1 &
	echo $! >"$pidf.launch"
}

# Wait until node N is Synced; prints the seconds it took from the call.
wait_synced() {
	local n=$1 limit=${2:-240} t0=${3:-$(date +%s.%N)} i
	for i in $(seq 1 $((limit * 4))); do
		if [ "$(db_state "$n")" = Synced ]; then
			awk -v a="$t0" -v b="$(date +%s.%N)" 'BEGIN{printf "%.1f\n", b-a}'
			return 0
		fi
		sleep 0.25
	done
	tail -30 "$RUN_DIR/db$n.err" >&2
	return 1
}

stop_db() {
	local n=$1 sig=${2:-TERM} pidf="$RUN_DIR/db$1.pid" pid i
	[ -f "$pidf" ] || return 0
	pid=$(cat "$pidf")
	kill -"$sig" "$pid" 2>/dev/null
	for i in $(seq 1 300); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
	kill -0 "$pid" 2>/dev/null && kill -KILL "$pid" 2>/dev/null
	rm -f "$pidf" "$pidf.launch"
}

create_database() {
	db_root 1 -e "CREATE DATABASE IF NOT EXISTS \`$DB_NAME\` CHARACTER SET utf8mb4 COLLATE utf8mb4_unicode_ci;
		CREATE USER IF NOT EXISTS '$DB_USER'@'127.0.0.1' IDENTIFIED BY '$DB_PASSWORD';
		CREATE USER IF NOT EXISTS '$DB_USER'@'localhost' IDENTIFIED BY '$DB_PASSWORD';
		ALTER USER '$DB_USER'@'127.0.0.1' IDENTIFIED BY '$DB_PASSWORD';
		ALTER USER '$DB_USER'@'localhost' IDENTIFIED BY '$DB_PASSWORD';" || die "could not create database $DB_NAME"
}

write_haproxy_cfg() {
	cat >"$RUN_DIR/haproxy.cfg" <<CFG
global
	maxconn 4000
	stats socket $RUN_DIR/haproxy.sock mode 600 level admin

defaults
	timeout connect 2s
	timeout client 60s
	timeout server 60s
	# generous: on a busy machine a live app server may take seconds to answer /health, and two
	# slow answers in a row must not take both out of rotation
	timeout check 5s

# the app servers: a stopped one leaves the rotation after three failed checks (3 s);
# a refused connection is retried on the other (retry-on conn-failure, option redispatch)
frontend web
	mode http
	bind 127.0.0.1:$((B + 80))
	default_backend apps

backend apps
	mode http
	balance roundrobin
	option httpchk GET /health
	http-check expect status 200
	# only a refused connection is retried: the request never reached an app server. Never
	# empty-response: a POST the server ran and then died on would run twice.
	retries 2
	retry-on conn-failure
	option redispatch
	# no on-marked-down shutdown-sessions here: a stopping app server finishes what it has in flight
	default-server inter 1s fall 3 rise 2
	server app1 127.0.0.1:$((B + 61)) check
	server app2 127.0.0.1:$((B + 62)) check

listen stats
	mode http
	bind 127.0.0.1:$((B + 81))
	stats enable
	stats uri /

# the database for each app server and worker: its own node first, the others as backups;
# a node counts as up only while Galera says Synced (dbcheck), so a joining node gets no clients
CFG
	local name prefer others
	for name in a b c; do
		case $name in a) prefer=1; others="2 3" ;; b) prefer=2; others="1 3" ;; c) prefer=3; others="1 2" ;; esac
		cat >>"$RUN_DIR/haproxy.cfg" <<CFG
listen db-$name
	mode tcp
	bind 127.0.0.1:$((B + 40 + prefer))
	timeout client 1h
	timeout server 1h
	option httpchk GET /
	# a refused connection marks the node down at once (observe layer4) and goes to the next
	retries 3
	option redispatch
	default-server inter 1s fall 2 rise 2 on-marked-down shutdown-sessions observe layer4 error-limit 1 on-error mark-down
	server db$prefer 127.0.0.1:$((B + prefer)) check port $((B + 50 + prefer))
CFG
		for o in $others; do
			echo "	server db$o 127.0.0.1:$((B + o)) check port $((B + 50 + o)) backup" >>"$RUN_DIR/haproxy.cfg"
		done
		echo >>"$RUN_DIR/haproxy.cfg"
	done
}

start_haproxy() {
	write_haproxy_cfg
	haproxy -c -q -f "$RUN_DIR/haproxy.cfg" || die "haproxy configuration rejected ($RUN_DIR/haproxy.cfg)"
	haproxy -D -p "$RUN_DIR/haproxy.pid" -f "$RUN_DIR/haproxy.cfg" >"$RUN_DIR/haproxy.log" 2>&1 || die "haproxy did not start"
	log "HAProxy: http://127.0.0.1:$((B + 80)) (stats http://127.0.0.1:$((B + 81))/), databases on $((B + 41))–$((B + 43))"
}

# app N: the production build, its own port, its database through its HAProxy listener
# (app3 and app4 are not behind the balancer: run.ts starts them with a short idle period to check
# the idle logoff across two servers without restarting the two that carry the load)
start_app_n() {
	local n=$1
	# SHUTDOWN_TIMEOUT: on SIGTERM adapter-node finishes the requests in flight (slow on a busy machine)
	PORT=$((B + 60 + n)) DB_PORT=$((B + 40 + (n - 1) % 3 + 1)) SESSION_IDLE_MINUTES="${APP_SESSION_IDLE_MINUTES:-$SESSION_IDLE_MINUTES}" SHUTDOWN_TIMEOUT=90 start_node_process "app$n" node --env-file="$ENV_FILE" "$CROSSTALLY_BUILD_DIR/index.js"
	wait_http "http://127.0.0.1:$((B + 60 + n))/health" || { tail -30 "$RUN_DIR/app$n.log" >&2; die "app$n did not start"; }
	log "app$n on 127.0.0.1:$((B + 60 + n)) (pid $(cat "$RUN_DIR/app$n.pid")), database via $((B + 40 + (n - 1) % 3 + 1))"
}

start_worker_n() {
	local n=$1
	DB_PORT=$((B + 40 + n)) start_node_process "worker$n" node --env-file="$ENV_FILE" --import tsx scripts/worker.ts
	log "worker$n (pid $(cat "$RUN_DIR/worker$n.pid")), database via $((B + 40 + n))"
}

up() {
	ensure_cluster_packages
	ensure_node_modules
	mkdir -p "$RUN_DIR" "$ROOT_DIR/.bench"
	write_env_file
	load_env_file
	local t0 j secs
	# a fresh cluster each run: the figures are for a known start
	rm -rf "$CL/db1" "$CL/db2" "$CL/db3" "$CL/uploads"
	rm -f "$RUN_DIR"/*.log "$RUN_DIR"/*.err "$RUN_DIR"/*.first-join
	# the production build (when sources changed) runs while the nodes join
	( ensure_build ) &
	local build_pid=$!
	start_db 1 bootstrap
	wait_synced 1 60 >/dev/null || die "db1 did not start (log $RUN_DIR/db1.err)"
	cp "$RUN_DIR/db1.pid.launch" "$RUN_DIR/db1.pid" 2>/dev/null
	log "db1 bootstrapped the cluster (pid $(cat "$RUN_DIR/db1.pid"))"
	create_database
	# both joiners at once: the donor serves one state transfer at a time, but the scripts' own
	# start-up (most of the time on a busy machine) overlaps
	t0=$(date +%s.%N)
	start_db 2
	start_db 3
	for j in 2 3; do
		secs=$(wait_synced "$j" 300 "$t0") || die "db$j did not join (log $RUN_DIR/db$j.err)"
		cp "$RUN_DIR/db$j.pid.launch" "$RUN_DIR/db$j.pid"
		echo "$secs" >"$RUN_DIR/db$j.first-join"
		log "db$j joined by state transfer (mariabackup SST) ${secs} s after the joiners started"
	done
	start_redis
	redis-cli -p "$REDIS_PORT" flushall >/dev/null
	start_mailfake
	node -e "fetch(process.argv[1], { method: 'DELETE' }).catch(() => {})" "http://127.0.0.1:$MAILFAKE_PORT/messages"
	DB_PORT=$((B + 1)) MIGRATE_SOCKET="$(db_sock 1)" node_modules/.bin/tsx scripts/migrate.ts || die "migration failed"
	DB_PORT=$((B + 1)) node_modules/.bin/tsx db/seeds/run.ts test >/dev/null || die "seeding failed"
	wait "$build_pid" || die "build failed (log: $CROSSTALLY_DATA_DIR/build.log)"
	start_dbcheck
	start_haproxy
	start_app_n 1
	start_app_n 2
	start_worker_n 1
	start_worker_n 2
	wait_http "http://127.0.0.1:$((B + 80))/health" || die "the load balancer does not reach an app server"
}

start_dbcheck() {
	start_node_process dbcheck node_modules/.bin/tsx scripts/cluster/dbcheck.ts
	wait_http "http://127.0.0.1:$((B + 51))/" || { tail -20 "$RUN_DIR/dbcheck.log" >&2; die "dbcheck did not start"; }
}

down() {
	local n
	for n in 1 2 3 4; do stop_pidfile "$RUN_DIR/app$n.pid"; stop_pidfile "$RUN_DIR/worker$n.pid"; done
	stop_pidfile "$RUN_DIR/haproxy.pid"
	stop_pidfile "$RUN_DIR/dbcheck.pid"
	stop_pidfile "$RUN_DIR/mailfake.pid"
	if pid_alive "$RUN_DIR/redis.pid"; then redis-cli -p "$REDIS_PORT" shutdown nosave >/dev/null 2>&1 || true; fi
	stop_pidfile "$RUN_DIR/redis.pid"
	# the last node to leave is the one a restart could bootstrap from; all three leave here
	for n in 3 2 1; do
		[ -f "$RUN_DIR/db$n.pid" ] || { [ -f "$RUN_DIR/db$n.pid.launch" ] && mv "$RUN_DIR/db$n.pid.launch" "$RUN_DIR/db$n.pid"; }
		stop_db "$n"
	done
}

case "${1:-run}" in
	up) up ;;
	down) down ;;
	status) for f in "$RUN_DIR"/*.pid; do [ -f "$f" ] && { pid_alive "$f" && echo "$(basename "$f" .pid) running $(cat "$f")" || echo "$(basename "$f" .pid) stale"; }; done ;;
	start-db) load_env_file; start_db "$2"; secs=$(wait_synced "$2" "${3:-240}") || exit 1; cp "$RUN_DIR/db$2.pid.launch" "$RUN_DIR/db$2.pid"; echo "$secs" ;;
	stop-db) stop_db "$2" "${3:-TERM}" ;;
	start-app) load_env_file; start_app_n "$2" ;;
	start-worker) load_env_file; start_worker_n "$2" ;;
	run)
		cleanup() { trap - INT TERM EXIT; [ "${CLUSTER_KEEP:-0}" = 1 ] && { log "left running (CLUSTER_KEEP=1); stop with: bash scripts/cluster/cluster.sh down"; return; }; log "stopping the cluster"; down; }
		trap cleanup INT TERM EXIT
		t_start=$(date +%s)
		up
		log "cluster up in $(( $(date +%s) - t_start )) s; running the load test through the balancer"
		node_modules/.bin/tsx scripts/cluster/run.ts
		status=$?
		[ $status -eq 0 ] && log "test:cluster passed" || log "test:cluster FAILED (exit $status); logs in $RUN_DIR"
		exit $status ;;
	*) echo "usage: $0 [run|up|down|status|start-db N|stop-db N [SIG]|start-app N|start-worker N]" >&2; exit 2 ;;
esac
