#!/usr/bin/env bash
# Nightly backup of the registry: the database and the media folder (photos, RINEX, documents).
#
#   deploy/backup.sh            (run by registry-backup.timer; see deploy/README.md)
#
# Each run writes one folder  $REGISTRY_BACKUP_DIR/<UTC stamp>/  with
#   database.dump     pg_dump custom format (-Fc) when DATABASE_URL is set (PostgreSQL), or
#   registry.sqlite3  an online SQLite backup when it is not (demo / small installs)
#   media.tar.gz      the media folder ($REGISTRY_MEDIA_ROOT, default $REGISTRY_DATA_DIR/media)
#   base/             with REGISTRY_WAL_ARCHIVE_DIR set (point-in-time recovery): a base backup
#                     (pg_basebackup -Ft -z: base.tar.gz, pg_wal.tar.gz, backup_manifest) and
#                     START_WAL, the first WAL segment it needs from the archive
#   SHA256SUMS        checksums of the above
# The folder appears only when everything succeeded (written as .partial-*, then renamed).
# Retention: folders older than REGISTRY_BACKUP_KEEP_DAYS (default 14) are removed, but the
# newest REGISTRY_BACKUP_KEEP_MIN (default 3) are always kept. With point-in-time recovery, WAL
# segments older than the oldest kept base backup are then removed from the archive
# (pg_archivecleanup): any moment since the oldest kept base backup can be restored
# (deploy/restore_drill.sh; deploy/README.md "Point-in-time recovery"). A copy somewhere else (another
# machine, off-site) is still needed: a backup on the same disk does not survive the disk.
set -Eeuo pipefail
umask 077

APP_DIR="${REGISTRY_APP_DIR:-$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)}"
DATA_DIR="${REGISTRY_DATA_DIR:-$APP_DIR/var}"
MEDIA_DIR="${REGISTRY_MEDIA_ROOT:-$DATA_DIR/media}"
BACKUP_DIR="${REGISTRY_BACKUP_DIR:-$DATA_DIR/backups}"
KEEP_DAYS="${REGISTRY_BACKUP_KEEP_DAYS:-14}"
KEEP_MIN="${REGISTRY_BACKUP_KEEP_MIN:-3}"
WAL_ARCHIVE_DIR="${REGISTRY_WAL_ARCHIVE_DIR:-}"
# pg_basebackup needs a role with the REPLICATION attribute; default: the DATABASE_URL role.
BASEBACKUP_URL="${REGISTRY_BASEBACKUP_URL:-${DATABASE_URL:-}}"

log() { printf '%s backup: %s\n' "$(date -u +%Y-%m-%dT%H:%M:%SZ)" "$*"; }
fail() {
  log "FAILED: $*" >&2
  exit 1
}

case "$KEEP_DAYS$KEEP_MIN" in *[!0-9]*) fail "REGISTRY_BACKUP_KEEP_DAYS and _KEEP_MIN must be whole numbers" ;; esac

mkdir -p "$BACKUP_DIR"
exec 9>"$BACKUP_DIR/.lock"
flock -n 9 || fail "another backup is running (lock $BACKUP_DIR/.lock)"

STAMP="$(date -u +%Y%m%dT%H%M%SZ)"
PARTIAL="$BACKUP_DIR/.partial-$STAMP"
FINAL="$BACKUP_DIR/$STAMP"
[ -e "$FINAL" ] && fail "$FINAL already exists"
trap 'rm -rf "$PARTIAL"' EXIT
mkdir "$PARTIAL"

# --- database ----------------------------------------------------------------------------------
if [ -n "${DATABASE_URL:-}" ]; then
  url="$DATABASE_URL"
  case "$url" in
    postgis://*) url="postgresql://${url#postgis://}" ;;
    pgsql://*) url="postgresql://${url#pgsql://}" ;;
    postgres://* | postgresql://*) ;;
    *) fail "DATABASE_URL is not a PostgreSQL URL; this script backs up PostgreSQL or the default SQLite file" ;;
  esac
  log "pg_dump -Fc of $(printf '%s' "$url" | sed -E 's#(://[^:/@]+):[^@]*@#\1:***@#')"
  # --no-owner/--no-acl: the dump restores into a database owned by whichever role restores it.
  pg_dump --format=custom --no-owner --no-acl --dbname="$url" --file="$PARTIAL/database.dump" ||
    fail "pg_dump failed"
  pg_restore --list "$PARTIAL/database.dump" >/dev/null || fail "the dump does not read back (pg_restore --list)"
  if [ -n "$WAL_ARCHIVE_DIR" ]; then
    [ -d "$WAL_ARCHIVE_DIR" ] || fail "REGISTRY_WAL_ARCHIVE_DIR=$WAL_ARCHIVE_DIR is not a folder"
    burl="$BASEBACKUP_URL"
    case "$burl" in postgis://*) burl="postgresql://${burl#postgis://}" ;; pgsql://*) burl="postgresql://${burl#pgsql://}" ;; esac
    log "base backup for point-in-time recovery (pg_basebackup)"
    mkdir "$PARTIAL/base"
    pg_basebackup --dbname="$burl" --pgdata="$PARTIAL/base" --format=tar --gzip --wal-method=fetch \
      --checkpoint=fast --label="registry $STAMP" || fail "pg_basebackup failed (does the role have REPLICATION? see deploy/README.md)"
    tar -xzOf "$PARTIAL/base/base.tar.gz" backup_label |
      sed -n -E 's/^START WAL LOCATION: .*\(file ([0-9A-F]{24})\)$/\1/p' >"$PARTIAL/base/START_WAL"
    [ -s "$PARTIAL/base/START_WAL" ] || fail "could not read the start WAL segment from the base backup's backup_label"
  fi
else
  db="$DATA_DIR/registry.sqlite3"
  [ -f "$db" ] || fail "no DATABASE_URL and no SQLite file at $db"
  py="$APP_DIR/.venv/bin/python"
  [ -x "$py" ] || py="$(command -v python3)"
  log "SQLite online backup of $db"
  "$py" - "$db" "$PARTIAL/registry.sqlite3" <<'PY' || fail "SQLite backup failed"
import sqlite3, sys
src = sqlite3.connect(f"file:{sys.argv[1]}?mode=ro", uri=True)
dst = sqlite3.connect(sys.argv[2])
with dst:
    src.backup(dst)
ok = dst.execute("PRAGMA integrity_check").fetchone()[0]
dst.close()
src.close()
sys.exit(0 if ok == "ok" else 1)
PY
fi

# --- media -------------------------------------------------------------------------------------
if [ -d "$MEDIA_DIR" ]; then
  log "media folder $MEDIA_DIR"
  tar -C "$(dirname "$MEDIA_DIR")" -czf "$PARTIAL/media.tar.gz" "$(basename "$MEDIA_DIR")" ||
    fail "tar of the media folder failed"
else
  log "no media folder at $MEDIA_DIR (nothing uploaded yet); writing an empty archive"
  tar -czf "$PARTIAL/media.tar.gz" --files-from /dev/null
fi

(cd "$PARTIAL" && find . -type f ! -name SHA256SUMS -printf '%P\n' | sort | xargs -d '\n' sha256sum -- >SHA256SUMS)
mv "$PARTIAL" "$FINAL"
trap - EXIT
log "written $FINAL ($(du -sh "$FINAL" | cut -f1))"

# --- retention ---------------------------------------------------------------------------------
mapfile -t ALL < <(find "$BACKUP_DIR" -mindepth 1 -maxdepth 1 -type d -name '20[0-9][0-9][0-1][0-9][0-3][0-9]T[0-9][0-9][0-9][0-9][0-9][0-9]Z' | sort -r)
removed=0
for i in "${!ALL[@]}"; do
  [ "$i" -lt "$KEEP_MIN" ] && continue
  if [ -n "$(find "${ALL[$i]}" -maxdepth 0 -mtime +"$KEEP_DAYS")" ]; then
    rm -rf -- "${ALL[$i]}"
    removed=$((removed + 1))
  fi
done
log "retention: kept $((${#ALL[@]} - removed)), removed $removed (older than $KEEP_DAYS days, newest $KEEP_MIN always kept)"

# --- WAL archive: keep what the oldest kept base backup needs ------------------------------------
if [ -n "$WAL_ARCHIVE_DIR" ]; then
  oldest=""
  mapfile -t KEPT < <(find "$BACKUP_DIR" -mindepth 1 -maxdepth 1 -type d -name '20[0-9][0-9][0-1][0-9][0-3][0-9]T[0-9][0-9][0-9][0-9][0-9][0-9]Z' | sort)
  for d in "${KEPT[@]}"; do
    if [ -s "$d/base/START_WAL" ]; then oldest="$(cat "$d/base/START_WAL")"; break; fi
  done
  if [ -n "$oldest" ]; then
    pg_archivecleanup "$WAL_ARCHIVE_DIR" "$oldest" || log "warning: pg_archivecleanup could not prune $WAL_ARCHIVE_DIR"
    log "WAL archive: kept from $oldest on ($(find "$WAL_ARCHIVE_DIR" -maxdepth 1 -type f -name '[0-9A-F]*' | wc -l) segments)"
  fi
fi
