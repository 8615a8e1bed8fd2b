#!/usr/bin/env bash
# npm run restore -- FILE [--force] [--database NAME]
# Verifies FILE against FILE.sha256, restores it into an EMPTY database (the configured one, or
# NAME), then re-applies the app user's grants (scripts/migrate.ts: append-only audit table).
# A database that already holds tables is refused unless --force, which drops and recreates it.
set -euo pipefail
. "$(dirname "$0")/lib/env.sh"
if [ -f "$ENV_FILE" ]; then DB_NAME="$(sed -n 's/^DB_NAME=//p' "$ENV_FILE")"; fi
file="" force=0 target="$DB_NAME"
while [ $# -gt 0 ]; do
	case "$1" in
		--force) force=1 ;;
		--database) shift; target="${1:?--database needs a name}" ;;
		-*) die "unknown option $1 (usage: npm run restore -- FILE [--force] [--database NAME])" ;;
		*) file="$1" ;;
	esac
	shift
done
[ -n "$file" ] || die "usage: npm run restore -- FILE [--force] [--database NAME]"
[ -f "$file" ] || die "no such backup: $file"
[[ "$target" =~ ^[A-Za-z0-9_]+$ ]] || die "database name must be letters, digits and _: $target"
sum="$file.sha256"
[ -f "$sum" ] || die "no checksum file $sum: refusing to restore an unverified backup"
expected="$(cut -d' ' -f1 "$sum")"
actual="$(sha256sum "$file" | cut -d' ' -f1)"
[ "$expected" = "$actual" ] || die "checksum mismatch for $file (expected $expected, got $actual): the file is damaged; nothing restored"
sock="$RUN_DIR/mariadb.sock"
[ -S "$sock" ] || die "MariaDB is not running (no socket at $sock)"
root() { mariadb --no-defaults --protocol=socket --socket="$sock" -uroot "$@"; }
tables="$(root -N -e "SELECT COUNT(*) FROM information_schema.tables WHERE table_schema = '$target'")"
if [ "$tables" != 0 ]; then
	[ "$force" = 1 ] || die "database $target is not empty ($tables tables): refusing to restore over it (use --force to drop it first)"
	log "--force: dropping database $target ($tables tables)"
	root -e "DROP DATABASE \`$target\`"
fi
root -e "CREATE DATABASE IF NOT EXISTS \`$target\` CHARACTER SET utf8mb4 COLLATE utf8mb4_unicode_ci"
gunzip -c "$file" | root "$target" || die "restore into $target failed"
DB_NAME="$target" MIGRATE_SOCKET="$sock" "$ROOT_DIR/node_modules/.bin/tsx" "$ROOT_DIR/scripts/migrate.ts" || die "restored, but re-applying the grants failed"
log "restored $(basename "$file") into $target ($(root -N -e "SELECT COUNT(*) FROM information_schema.tables WHERE table_schema = '$target'") tables); grants re-applied"
