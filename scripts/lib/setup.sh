# Installation and service management. Sourced after lib/env.sh.
# shellcheck shell=bash

ensure_packages() {
	local missing=()
	command -v mariadbd >/dev/null 2>&1 || [ -x /usr/sbin/mariadbd ] || missing+=(mariadb-server mariadb-client)
	command -v redis-server >/dev/null 2>&1 || missing+=(redis-server)
	if [ "${CROSSTALLY_NEED_BROWSER:-0}" = 1 ]; then
		command -v chromium >/dev/null 2>&1 || missing+=(chromium)
		# the print and report tests read the PDF and the .docx back with independent tools
		command -v pdftoppm >/dev/null 2>&1 && command -v pdftotext >/dev/null 2>&1 || missing+=(poppler-utils)
		command -v pandoc >/dev/null 2>&1 || missing+=(pandoc)
		command -v unzip >/dev/null 2>&1 || missing+=(unzip)
	fi
	if [ ${#missing[@]} -gt 0 ]; then
		[ "$(id -u)" = 0 ] || die "missing ${missing[*]}: run as root, or install them with apt-get"
		log "installing ${missing[*]} from Debian (once)"
		DEBIAN_FRONTEND=noninteractive apt-get update -qq >/dev/null
		DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null \
			|| die "apt-get install ${missing[*]} failed"
	fi
}

ensure_node_modules() {
	cd "$ROOT_DIR" || exit 1
	if [ ! -d node_modules ] || [ package-lock.json -nt node_modules/.package-lock.json ]; then
		log "installing npm packages (npm ci)"
		npm ci --no-audit --no-fund --loglevel=error || die "npm ci failed"
	fi
}

# Build unless build/ is newer than every source file.
ensure_build() {
	cd "$ROOT_DIR" || exit 1
	local stamp="$CROSSTALLY_BUILD_DIR/.built"
	if [ -f "$stamp" ] && [ -z "$(find src static package-lock.json svelte.config.js vite.config.ts tailwind.config.ts postcss.config.js -newer "$stamp" -print -quit 2>/dev/null)" ]; then
		return 0
	fi
	log "building the app"
	# the stamp takes the time the build starts: a source saved during the build is newer, so the
	# next run builds again instead of serving the build that missed it
	local started="$CROSSTALLY_DATA_DIR/.build-started"
	mkdir -p "$CROSSTALLY_DATA_DIR" && touch "$started"
	# tsconfig.json extends ./.svelte-kit/tsconfig.json; a build into another kit dir (the bench's
	# CROSSTALLY_KIT_DIR) does not write that file, so a never-built checkout needs one sync first.
	if [ ! -f .svelte-kit/tsconfig.json ]; then
		env -u CROSSTALLY_KIT_DIR node_modules/.bin/svelte-kit sync >"$CROSSTALLY_DATA_DIR/sync.log" 2>&1 || { cat "$CROSSTALLY_DATA_DIR/sync.log" >&2; die "svelte-kit sync failed"; }
	fi
	npx vite build --logLevel warn >"$CROSSTALLY_DATA_DIR/build.log" 2>&1 || { tail -40 "$CROSSTALLY_DATA_DIR/build.log" >&2; die "build failed (log: $CROSSTALLY_DATA_DIR/build.log)"; }
	mv -f "$started" "$stamp"
}

mariadb_bin() { command -v "$1" 2>/dev/null || echo "/usr/sbin/$1"; }

pid_alive() { [ -f "$1" ] && kill -0 "$(cat "$1")" 2>/dev/null; }

# Refuse to start a server on a port another process already listens on: otherwise a second run on the
# same ports (an earlier test run still going, a demo) would answer our health checks and catch our
# mail, and the tests would fail far from the cause.
port_in_use() { (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; }
ensure_port_free() {
	local port="$1" what="$2" var="$3"
	port_in_use "$port" && die "port $port ($what) is already in use by another process; stop it (another Crosstally run?) or set $var to a free port"
	return 0
}

# The data folder and the run folder (MariaDB's socket, Redis's config with its password, PID
# files, logs) are for the user running Crosstally only: 0700. Called by every start below.
secure_dirs() {
	mkdir -p "$CROSSTALLY_DATA_DIR" "$RUN_DIR"
	chmod 700 "$CROSSTALLY_DATA_DIR" "$RUN_DIR"
}

start_mariadb() {
	local dir="$CROSSTALLY_DATA_DIR/mariadb" sock="$RUN_DIR/mariadb.sock" pidf="$RUN_DIR/mariadb.pid" tmp="$RUN_DIR/mariadb-tmp"
	secure_dirs
	# its own directory for temporary tables and files: servers sharing /tmp on one machine deleted or
	# refused each other's ("Error on delete of '/tmp/#sql-temptable-…'"), failing a rebuild or an install
	mkdir -p "$tmp"
	if pid_alive "$pidf"; then log "MariaDB already running (pid $(cat "$pidf"))"; secure_mariadb_root; return 0; fi
	ensure_port_free "$DB_PORT" MariaDB DB_PORT
	if [ ! -d "$dir/mysql" ]; then
		log "initialising MariaDB data directory $dir"
		mkdir -p "$dir"
		# root@localhost by unix_socket only: the OS user root, over the socket (no password, no TCP)
		TMPDIR="$tmp" "$(mariadb_bin mariadb-install-db)" --no-defaults --datadir="$dir" --user=root \
			--auth-root-authentication-method=socket --skip-test-db --skip-name-resolve >"$RUN_DIR/mariadb-install.log" 2>&1 \
			|| { cat "$RUN_DIR/mariadb-install.log" >&2; die "mariadb-install-db failed"; }
	fi
	"$(mariadb_bin mariadbd)" --no-defaults --datadir="$dir" --socket="$sock" --pid-file="$pidf" --tmpdir="$tmp" \
		--log-error="$RUN_DIR/mariadb.err" --port="$DB_PORT" --bind-address=127.0.0.1 --skip-name-resolve \
		--user=root --character-set-server=utf8mb4 --collation-server=utf8mb4_unicode_ci \
		--innodb-buffer-pool-size=256M --max-connections=300 >/dev/null 2>&1 &
	local i
	for i in $(seq 1 100); do
		if mariadb-admin --no-defaults --protocol=socket --socket="$sock" -uroot ping >/dev/null 2>&1; then
			log "MariaDB listening on 127.0.0.1:$DB_PORT (pid $(cat "$pidf"))"; secure_mariadb_root; return 0
		fi
		sleep 0.2
	done
	tail -20 "$RUN_DIR/mariadb.err" >&2
	die "MariaDB did not start (port $DB_PORT busy? set DB_PORT)"
}

mariadb_root() { mariadb --no-defaults --protocol=socket --socket="$RUN_DIR/mariadb.sock" -uroot "$@"; }

# MariaDB's root: only root@localhost, authenticated by unix_socket (the OS user root over the
# socket, in the 0700 run folder); every other root account (127.0.0.1, ::1, the host name,
# anonymous users) is dropped, so root cannot sign in over TCP at all. Idempotent: also converts
# data folders made before (root with an empty password on 127.0.0.1). No --skip-grant-tables.
secure_mariadb_root() {
	local drops
	drops="$(mariadb_root -N -e "SELECT CONCAT('DROP USER ', QUOTE(user), '@', QUOTE(host), ';') FROM mysql.user
		WHERE (user = 'root' AND host <> 'localhost') OR user = ''")" || die "could not read MariaDB's accounts as root over the socket"
	mariadb_root -e "$drops ALTER USER 'root'@'localhost' IDENTIFIED VIA unix_socket; FLUSH PRIVILEGES;" \
		|| die "could not restrict MariaDB's root to the socket"
}

# Create the database and the app user; password generated once and kept in the env file.
ensure_database() {
	local fresh="${1:-keep}"
	if [ "$fresh" = fresh ]; then mariadb_root -e "DROP DATABASE IF EXISTS \`$DB_NAME\`"; fi
	mariadb_root -e "CREATE DATABASE IF NOT EXISTS \`$DB_NAME\` CHARACTER SET utf8mb4 COLLATE utf8mb4_unicode_ci;
		CREATE USER IF NOT EXISTS '$DB_USER'@'127.0.0.1' IDENTIFIED BY '$DB_PASSWORD';
		CREATE USER IF NOT EXISTS '$DB_USER'@'localhost' IDENTIFIED BY '$DB_PASSWORD';
		ALTER USER '$DB_USER'@'127.0.0.1' IDENTIFIED BY '$DB_PASSWORD';
		ALTER USER '$DB_USER'@'localhost' IDENTIFIED BY '$DB_PASSWORD';" || die "could not create database $DB_NAME"
}

# redis-cli with the generated password (REDISCLI_AUTH: never on a command line, where ps shows it).
redis_cli() { REDISCLI_AUTH="$REDIS_PASSWORD" redis-cli -h 127.0.0.1 -p "$REDIS_PORT" --no-auth-warning "$@"; }

# Redis asks for the password generated in the env file (requirepass). It is written to
# $RUN_DIR/redis.conf (0600, in the 0700 run folder) rather than passed on the command line.
write_redis_conf() {
	[ -n "${REDIS_PASSWORD:-}" ] || die "REDIS_PASSWORD is not set (write_env_file generates it)"
	(umask 077 && printf 'requirepass %s\n' "$REDIS_PASSWORD" >"$RUN_DIR/redis.conf")
}

start_redis() {
	local pidf="$RUN_DIR/redis.pid"
	secure_dirs
	mkdir -p "$RUN_DIR/redis"
	if pid_alive "$pidf"; then log "Redis already running (pid $(cat "$pidf"))"; return 0; fi
	ensure_port_free "$REDIS_PORT" Redis REDIS_PORT
	write_redis_conf
	redis-server "$RUN_DIR/redis.conf" --port "$REDIS_PORT" --bind 127.0.0.1 --save '' --appendonly no --dir "$RUN_DIR/redis" \
		--pidfile "$pidf" --daemonize yes --maxmemory-policy noeviction --logfile "$RUN_DIR/redis.log" >/dev/null \
		|| die "redis-server did not start"
	local i
	for i in $(seq 1 50); do
		if [ "$(redis_cli ping 2>/dev/null)" = PONG ]; then log "Redis listening on 127.0.0.1:$REDIS_PORT (pid $(cat "$pidf"))"; return 0; fi
		sleep 0.1
	done
	die "Redis did not answer on port $REDIS_PORT (with the password of $ENV_FILE)"
}

# Start a node process in the background and record its PID.
start_node_process() {
	local name="$1"; shift
	local pidf="$RUN_DIR/$name.pid"
	if pid_alive "$pidf"; then log "$name already running (pid $(cat "$pidf"))"; return 0; fi
	( cd "$ROOT_DIR" && exec "$@" ) >>"$RUN_DIR/$name.log" 2>&1 &
	echo $! >"$pidf"
}

wait_http() {
	local url="$1" i
	for i in $(seq 1 150); do
		if node -e "fetch(process.argv[1]).then(r=>process.exit(r.ok?0:1),()=>process.exit(1))" "$url" 2>/dev/null; then return 0; fi
		sleep 0.2
	done
	return 1
}

start_mailfake() {
	if ! pid_alive "$RUN_DIR/mailfake.pid"; then
		ensure_port_free "$SMTP_PORT" "the mail fake's SMTP" SMTP_PORT
		ensure_port_free "$MAILFAKE_PORT" "the mail fake's HTTP" MAILFAKE_PORT
	fi
	# one node process with tsx's loader, not the tsx command (see start_worker): mailfake.pid holds the
	# fake itself, so a stop's TERM reaches its own handler instead of the wrapper's relay and 30 ms KILL
	start_node_process mailfake node --import tsx scripts/mailfake.ts
	wait_http "http://127.0.0.1:$MAILFAKE_PORT/health" || { tail -20 "$RUN_DIR/mailfake.log" >&2; die "mail fake did not start"; }
	log "mail fake: SMTP 127.0.0.1:$SMTP_PORT, messages at http://127.0.0.1:$MAILFAKE_PORT/messages"
}

start_app() {
	pid_alive "$RUN_DIR/app.pid" || ensure_port_free "$PORT" "the app" PORT
	# scripts/serve.js: copies of the server sharing the port (APP_PROCESSES). npm start: one per core, at
	# most 4 (test:load measured 2 on 2 cores: 193 req/s, p95 0.55 s); npm test: 1, as its timings assume
	local copies=1
	[ "$CROSSTALLY_MODE" = test ] || copies=$(n=$(nproc 2>/dev/null || echo 1); [ "$n" -gt 4 ] && echo 4 || echo "$n")
	APP_PROCESSES="${APP_PROCESSES:-$copies}" start_node_process app node --env-file="$ENV_FILE" scripts/serve.js "$CROSSTALLY_BUILD_DIR"
	wait_http "http://127.0.0.1:$PORT/health" || { tail -30 "$RUN_DIR/app.log" >&2; die "app did not start"; }
}

# The worker runs in one node process with tsx's loader (--import tsx), not under the tsx command: that
# wrapper relays a TERM to the node process it starts and KILLs it when the process does not confirm
# within 30 ms (a worker busy rendering mail), so a stop could cut sends in flight; the PID file now
# holds the worker itself, and its own SIGTERM handler stops it (scripts/worker.ts).
start_worker() {
	start_node_process worker node --env-file="$ENV_FILE" --import tsx scripts/worker.ts
}

stop_pidfile() {
	local pidf="$1" pid i
	[ -f "$pidf" ] || return 0
	pid="$(cat "$pidf")"
	if kill -0 "$pid" 2>/dev/null; then
		kill -TERM "$pid" 2>/dev/null
		for i in $(seq 1 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
		kill -0 "$pid" 2>/dev/null && kill -KILL "$pid" 2>/dev/null
	fi
	rm -f "$pidf"
}

stop_all() {
	# the Redis password (and the ports) come from the env file; without it the shutdown below stopped
	# the script (set -u) and left Redis and MariaDB running
	[ -z "${REDIS_PASSWORD:-}" ] && [ -f "$ENV_FILE" ] && load_env_file
	stop_pidfile "$RUN_DIR/app.pid"
	stop_pidfile "$RUN_DIR/worker.pid"
	stop_pidfile "$RUN_DIR/mailfake.pid"
	if pid_alive "$RUN_DIR/redis.pid" && [ -n "${REDIS_PASSWORD:-}" ]; then redis_cli shutdown nosave >/dev/null 2>&1 || true; fi
	stop_pidfile "$RUN_DIR/redis.pid"
	if pid_alive "$RUN_DIR/mariadb.pid"; then
		mariadb-admin --no-defaults --protocol=socket --socket="$RUN_DIR/mariadb.sock" -uroot shutdown >/dev/null 2>&1 || true
	fi
	stop_pidfile "$RUN_DIR/mariadb.pid"
}

# Write the env file the app, worker and scripts read (generated secrets kept across runs).
# The app and the worker reach the scripts' own MariaDB by its Unix socket (cheaper than loopback
# TCP). Empty, so TCP, when DB_SOCKET is exported empty (the cluster: apps go to different nodes) or the
# path is too long for a socket address (108 bytes on Linux).
db_socket_for_env() {
	local sock="${DB_SOCKET-$RUN_DIR/mariadb.sock}"
	[ "${#sock}" -le 100 ] && printf '%s' "$sock"
}

write_env_file() {
	mkdir -p "$CROSSTALLY_DATA_DIR"
	if [ -f "$ENV_FILE" ]; then
		# keep generated secrets
		DB_PASSWORD="${DB_PASSWORD:-$(sed -n 's/^DB_PASSWORD=//p' "$ENV_FILE")}"
		AUTH_SECRET="${AUTH_SECRET:-$(sed -n 's/^AUTH_SECRET=//p' "$ENV_FILE")}"
		REDIS_PASSWORD="${REDIS_PASSWORD:-$(sed -n 's/^REDIS_PASSWORD=//p' "$ENV_FILE")}"
	fi
	: "${DB_PASSWORD:=$(node -e "console.log(require('crypto').randomBytes(18).toString('base64url'))")}"
	: "${AUTH_SECRET:=$(node -e "console.log(require('crypto').randomBytes(32).toString('base64url'))")}"
	: "${REDIS_PASSWORD:=$(node -e "console.log(require('crypto').randomBytes(24).toString('base64url'))")}"
	export DB_PASSWORD AUTH_SECRET REDIS_PASSWORD
	secure_dirs
	umask 077
	cat >"$ENV_FILE" <<ENV
# Generated by Crosstally's scripts; never commit. Secrets are kept across runs.
CROSSTALLY_MODE=$CROSSTALLY_MODE
CROSSTALLY_DATA_DIR=$CROSSTALLY_DATA_DIR
DB_HOST=127.0.0.1
DB_PORT=$DB_PORT
DB_SOCKET=$(db_socket_for_env)
DB_NAME=$DB_NAME
DB_USER=$DB_USER
DB_PASSWORD=$DB_PASSWORD
REDIS_PASSWORD=$REDIS_PASSWORD
REDIS_URL=redis://:$REDIS_PASSWORD@127.0.0.1:$REDIS_PORT
SMTP_URL=${SMTP_URL:-smtp://127.0.0.1:$SMTP_PORT}
MAILFAKE_URL=${MAILFAKE_URL:-http://127.0.0.1:$MAILFAKE_PORT}
SMTP_PORT=$SMTP_PORT
MAILFAKE_PORT=$MAILFAKE_PORT
AUTH_SECRET=$AUTH_SECRET
ORIGIN=$ORIGIN
HOST=$HOST
PORT=$PORT
SESSION_IDLE_MINUTES=${SESSION_IDLE_MINUTES:-30}
REMINDER_INTERVAL_MINUTES=${REMINDER_INTERVAL_MINUTES:-$([ "$CROSSTALLY_MODE" = production ] && echo 1440 || echo 3)}
ESCALATE_AFTER_REMINDERS=${ESCALATE_AFTER_REMINDERS:-3}
BODY_SIZE_LIMIT=${BODY_SIZE_LIMIT:-25M}
SIGNIN_MAX_PER_PAIR=${SIGNIN_MAX_PER_PAIR:-5}
SIGNIN_MAX_PER_ACCOUNT=${SIGNIN_MAX_PER_ACCOUNT:-100}
SIGNIN_MAX_PER_ADDRESS=${SIGNIN_MAX_PER_ADDRESS:-30}
CLINIC_TIME_ZONE=${CLINIC_TIME_ZONE:-}
ENV
	umask 022
}

load_env_file() { set -a; # shellcheck disable=SC1090
	. "$ENV_FILE"; set +a; }
