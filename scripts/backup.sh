#!/usr/bin/env bash
# npm run backup: a consistent dump of the database (one transaction, so no table is caught
# half-way through a change), gzipped, with a SHA-256 checksum file next to it:
#   $CROSSTALLY_DATA_DIR/backups/crosstally-<db>-<UTC time>.sql.gz (+ .sha256)
# Connects as MariaDB's root over the socket npm start / npm test started. Prints the dump's path.
# BACKUP_DIR overrides the folder, BACKUP_DB_NAME the database. Attachments (the uploads folder) are files, not in the dump.
set -euo pipefail
. "$(dirname "$0")/lib/env.sh"
# the env file the start script wrote names the database
if [ -f "$ENV_FILE" ]; then DB_NAME="${BACKUP_DB_NAME:-$(sed -n 's/^DB_NAME=//p' "$ENV_FILE")}"; fi
: "${BACKUP_DIR:=$CROSSTALLY_DATA_DIR/backups}"
sock="$RUN_DIR/mariadb.sock"
[ -S "$sock" ] || die "MariaDB is not running (no socket at $sock): start it with npm start or scripts/services.sh up"
mkdir -p "$BACKUP_DIR"
chmod 700 "$BACKUP_DIR"
stamp="$(date -u +%Y%m%dT%H%M%SZ)"
file="$BACKUP_DIR/crosstally-$DB_NAME-$stamp.sql.gz"
tmp="$file.part"
umask 077
trap 'rm -f "$tmp"' EXIT
mariadb-dump --no-defaults --protocol=socket --socket="$sock" -uroot \
	--single-transaction --quick --routines --triggers --events --hex-blob \
	--default-character-set=utf8mb4 --skip-lock-tables --no-tablespaces "$DB_NAME" | gzip -6 >"$tmp"
# a dump that stopped half-way has no completion line
gunzip -c "$tmp" | tail -n 1 | grep -q '^-- Dump completed' || die "mariadb-dump did not finish; no backup written"
mv "$tmp" "$file"
trap - EXIT
(cd "$BACKUP_DIR" && sha256sum "$(basename "$file")" >"$(basename "$file").sha256")
log "backup of $DB_NAME written: $file ($(du -h "$file" | cut -f1), sha256 $(cut -c1-12 "$file.sha256")…)"
echo "$file"
