# Shared settings for scripts/start.sh, scripts/test.sh and scripts/services.sh.
# Every value can be overridden from the environment; see README "Configuration".
# shellcheck shell=bash
ROOT_DIR="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
export ROOT_DIR
: "${CROSSTALLY_MODE:=demo}"                    # demo | test | production
if [ "$CROSSTALLY_MODE" = test ]; then
	: "${CROSSTALLY_DATA_DIR:=$ROOT_DIR/.data/test}"
	: "${DB_PORT:=3317}"; : "${REDIS_PORT:=6390}"; : "${SMTP_PORT:=2535}"; : "${MAILFAKE_PORT:=2536}"; : "${PORT:=3010}"
	: "${DB_NAME:=crosstally_test}"
else
	: "${CROSSTALLY_DATA_DIR:=$ROOT_DIR/.data/demo}"
	: "${DB_PORT:=3307}"; : "${REDIS_PORT:=6380}"; : "${SMTP_PORT:=2525}"; : "${MAILFAKE_PORT:=2526}"; : "${PORT:=3000}"
	: "${DB_NAME:=crosstally}"
fi
: "${HOST:=127.0.0.1}"
: "${DB_USER:=crosstally}"
: "${ORIGIN:=http://localhost:$PORT}"
export CROSSTALLY_MODE CROSSTALLY_DATA_DIR DB_PORT REDIS_PORT SMTP_PORT MAILFAKE_PORT PORT DB_NAME DB_USER HOST ORIGIN
RUN_DIR="$CROSSTALLY_DATA_DIR/run"
: "${CROSSTALLY_BUILD_DIR:=build}"
export CROSSTALLY_BUILD_DIR
ENV_FILE="$CROSSTALLY_DATA_DIR/crosstally.env"
export RUN_DIR ENV_FILE

log() { printf '\033[1m[crosstally]\033[0m %s\n' "$*" >&2; }
die() { printf '\033[1;31m[crosstally]\033[0m %s\n' "$*" >&2; exit 1; }
