#!/usr/bin/env bash
# Point-in-time recovery drill: restore a base backup plus archived WAL into a fresh, private
# PostgreSQL cluster, up to a chosen time, and check what came back.
#
#   deploy/restore_drill.sh --base DIR --wal DIR [--target TIME] [--db NAME] [--expect FILE] [--keep]
#   deploy/restore_drill.sh --self-test [--keep]        (what CI runs: deploy/test.sh)
#
# --base DIR     a base backup made by deploy/base_backup.sh (pg_basebackup -Ft -z: base.tar.gz and
#                pg_wal.tar.gz), or a plain copy of a data directory
# --wal DIR      the WAL archive filled by deploy/wal_archive.sh (archive_command)
# --target TIME  recover up to this moment (e.g. '2026-12-04 14:05:00+00'); without it, replay
#                every archived segment (the latest state the archive holds)
# --db NAME      the registry's database in that cluster (default: registry)
# --expect FILE  lines "table count" that the restored database must match (the self-test writes one)
# --media DIR    the media folder to check signed documents' files against (default: do not check files)
# --keep         leave the restored cluster's folder in place (it is stopped either way)
#
# The restored cluster gets its own data folder under a new temporary folder, its own port and a Unix
# socket in that folder only (no TCP, nobody else can connect); the running server, its data and its
# archive are only read. Checks, each printed with its outcome:
#   1. recovery ended at the target (the server left recovery and was promoted);
#   2. row counts of the main tables (compared with --expect when given);
#   3. the audit trail's hash chain (manage.py verify_audit);
#   4. the checksums of every signed and superseded document (manage.py verify_signed_documents [--files]).
# Exit status 0 when every check passed.
#
# --self-test builds its own source cluster first (initdb, WAL archiving on, the invented demo
# district and signed sheets), takes a base backup, writes more, notes the time, writes what must
# NOT come back, then runs the drill above against it. It needs the PostgreSQL server binaries
# (/usr/lib/postgresql/<version>/bin) and PostGIS, and is run as root (the clusters then run as the
# postgres user) or as an ordinary user.
set -Eeuo pipefail

REPO_DIR="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
VPY="${REGISTRY_PYTHON:-$REPO_DIR/.venv/bin/python}"
[ -x "$VPY" ] || VPY="$(command -v python3)"

BASE="" WAL="" TARGET="" DBNAME="registry" EXPECT="" MEDIA="" KEEP=0 SELFTEST=0
while [ "$#" -gt 0 ]; do
  case "$1" in
    --base) BASE="$2"; shift 2 ;;
    --wal) WAL="$2"; shift 2 ;;
    --target) TARGET="$2"; shift 2 ;;
    --db) DBNAME="$2"; shift 2 ;;
    --expect) EXPECT="$2"; shift 2 ;;
    --media) MEDIA="$2"; shift 2 ;;
    --keep) KEEP=1; shift ;;
    --self-test) SELFTEST=1; shift ;;
    -h | --help) sed -n '2,30p' "$0"; exit 0 ;;
    *) echo "restore_drill: unknown argument $1 (see --help)" >&2; exit 2 ;;
  esac
done

T0=$(date +%s.%N)
log() { printf '%s drill: %s\n' "$(date -u +%H:%M:%S)" "$*"; }
fail() {
  log "FAILED: $*" >&2
  exit 1
}
elapsed() { "$VPY" -c "import sys; print(f'{float(sys.argv[2]) - float(sys.argv[1]):.1f} s')" "$1" "$(date +%s.%N)"; }

# --- PostgreSQL binaries --------------------------------------------------------------------------
PGBIN="${REGISTRY_PGBIN:-}"
if [ -z "$PGBIN" ]; then
  for d in $(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V -r); do
    [ -x "$d/initdb" ] && [ -x "$d/pg_ctl" ] && { PGBIN="$d"; break; }
  done
fi
[ -n "$PGBIN" ] && [ -x "$PGBIN/pg_ctl" ] || fail "PostgreSQL server binaries not found (set REGISTRY_PGBIN=/usr/lib/postgresql/15/bin)"

# Clusters refuse to run as root: as root, run them as the postgres user.
AS_PG=()
if [ "$(id -u)" -eq 0 ]; then
  id -u postgres >/dev/null 2>&1 || fail "running as root but there is no postgres user to run the clusters"
  AS_PG=(runuser -u postgres --)
fi
pg() { (cd / && "${AS_PG[@]}" "$@"); }

WORK="$(mktemp -d "${TMPDIR:-/tmp}/registry-drill.XXXXXX")"
chmod 0755 "$WORK"
SOCK="$WORK/sock"
LOGS="$WORK/logs"
mkdir -m 0700 "$SOCK" "$LOGS"
[ "${#AS_PG[@]}" -gt 0 ] && chown postgres "$SOCK" "$LOGS"
RUNNING=()  # data folders of clusters we started

cleanup() {
  local d
  for d in "${RUNNING[@]}"; do
    pg "$PGBIN/pg_ctl" -D "$d" -m immediate -w stop >/dev/null 2>&1 || true
  done
  if [ "$KEEP" = 1 ]; then
    log "kept $WORK"
  else
    rm -rf "$WORK"
  fi
}
trap cleanup EXIT

free_port() { "$VPY" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'; }

# psql on one of our clusters (socket in $SOCK).
q() {
  local port="$1" db="$2"
  shift 2
  "$PGBIN/psql" -X -q -v ON_ERROR_STOP=1 -h "$SOCK" -p "$port" -U postgres -d "$db" -At "$@"
}

# DATABASE_URL for Django on one of our clusters, through the socket.
db_url() { printf 'postgres://postgres@%s:%s/%s' "$("$VPY" -c 'import sys, urllib.parse; print(urllib.parse.quote(sys.argv[1], safe=""))' "$SOCK")" "$1" "$2"; }

# Counts of the main tables, one "table count" line each, sorted.
TABLES="registry_mark registry_position registry_occupation registry_visit registry_auditevent registry_document auth_user"
counts() {
  local port="$1" t
  for t in $TABLES; do
    printf '%s %s\n' "$t" "$(q "$port" "$DBNAME" -c "SELECT count(*) FROM $t")"
  done
}

wait_accepting() {
  local port="$1" i
  for i in $(seq 1 600); do
    "$PGBIN/pg_isready" -q -h "$SOCK" -p "$port" -t 1 >/dev/null 2>&1 && return 0
    sleep 0.2
  done
  return 1
}

# =====================================================================================================
if [ "$SELFTEST" = 1 ]; then
  log "self-test: a source cluster with WAL archiving, in $WORK"
  SRC="$WORK/source" ARCH="$WORK/wal-archive" BACKUP="$WORK/base-backup" SRC_MEDIA="$WORK/media"
  mkdir -p "$ARCH" "$BACKUP" "$SRC_MEDIA"
  cp "$REPO_DIR/deploy/wal_archive.sh" "$WORK/wal_archive.sh"
  chmod 0755 "$WORK/wal_archive.sh"
  mkdir -m 0700 "$SRC"
  [ "${#AS_PG[@]}" -gt 0 ] && chown postgres "$ARCH" "$SRC"
  pg "$PGBIN/initdb" -D "$SRC" -U postgres --auth=trust -E UTF8 --locale=C.UTF-8 >"$WORK/initdb.log" 2>&1 ||
    fail "initdb of the source cluster failed: $(tail -n 5 "$WORK/initdb.log")"
  SRC_PORT="$(free_port)"
  cat >>"$SRC/postgresql.conf" <<CONF
# --- registry restore drill (self-test) ---
port = $SRC_PORT
listen_addresses = ''
unix_socket_directories = '$SOCK'
wal_level = replica
archive_mode = on
archive_command = '/bin/sh $WORK/wal_archive.sh %p %f $ARCH'
max_wal_senders = 4
shared_buffers = 32MB
# a throwaway test cluster: no need to wait for the disk
fsync = off
synchronous_commit = off
full_page_writes = on
CONF
  pg "$PGBIN/pg_ctl" -D "$SRC" -l "$LOGS/source.log" -w -t 60 start >/dev/null || fail "the source cluster did not start: $(tail -n 5 "$LOGS/source.log")"
  RUNNING+=("$SRC")
  q "$SRC_PORT" postgres -c "CREATE DATABASE $DBNAME" >/dev/null
  q "$SRC_PORT" "$DBNAME" -c "CREATE EXTENSION IF NOT EXISTS postgis" >/dev/null || fail "PostGIS is not installed for PostgreSQL ($PGBIN)"
  export DATABASE_URL REGISTRY_MEDIA_ROOT="$SRC_MEDIA" REGISTRY_TASK_BACKEND=immediate
  DATABASE_URL="$(db_url "$SRC_PORT" "$DBNAME")"
  unset REGISTRY_PRODUCTION REGISTRY_DB_ROLE REGISTRY_DB_RUNTIME_ROLE
  T=$(date +%s.%N)
  (cd "$REPO_DIR" && "$VPY" manage.py migrate --noinput -v 0) || fail "migrate on the source cluster failed"
  "$VPY" "$REPO_DIR/deploy/drill_data.py" before >/dev/null || fail "loading the demo data failed"
  log "source: migrated, demo district and a signed sheet loaded ($(elapsed "$T"))"

  T=$(date +%s.%N)
  # The nightly backup as an office runs it (deploy/backup.sh): dump, media, and the base backup.
  REGISTRY_BACKUP_DIR="$BACKUP" REGISTRY_WAL_ARCHIVE_DIR="$ARCH" REGISTRY_DATA_DIR="$WORK" \
    PATH="$PGBIN:$PATH" bash "$REPO_DIR/deploy/backup.sh" >"$LOGS/backup.log" 2>&1 ||
    fail "deploy/backup.sh failed: $(tail -n 5 "$LOGS/backup.log")"
  BACKUP="$(find "$BACKUP" -mindepth 1 -maxdepth 1 -type d -name '20*Z' | sort | tail -n 1)/base"
  [ -f "$BACKUP/base.tar.gz" ] || fail "deploy/backup.sh wrote no base backup"
  log "nightly backup with a base backup taken ($(elapsed "$T"), base $(du -sh "$BACKUP" | cut -f1), starts at WAL $(cat "$BACKUP/START_WAL"))"

  "$VPY" "$REPO_DIR/deploy/drill_data.py" between >/dev/null || fail "the writes after the base backup failed"
  sleep 1.1
  TARGET="$(q "$SRC_PORT" "$DBNAME" -c "SELECT to_char(clock_timestamp() AT TIME ZONE 'UTC', 'YYYY-MM-DD HH24:MI:SS.US') || '+00'")"
  EXPECT="$WORK/expected-counts.txt"
  counts "$SRC_PORT" >"$EXPECT"
  sleep 1.1
  "$VPY" "$REPO_DIR/deploy/drill_data.py" late >/dev/null || fail "the late writes failed"
  LATE_MARKS="$(q "$SRC_PORT" "$DBNAME" -c "SELECT count(*) FROM registry_mark")"
  # Close the current WAL segment and wait until the archiver has it.
  SEG="$(q "$SRC_PORT" "$DBNAME" -c "SELECT pg_walfile_name(pg_switch_wal())")"
  for i in $(seq 1 300); do
    [ -f "$ARCH/$SEG" ] && break
    sleep 0.1
  done
  [ -f "$ARCH/$SEG" ] || fail "WAL segment $SEG did not reach the archive: $(q "$SRC_PORT" postgres -c 'SELECT * FROM pg_stat_archiver')"
  log "target time $TARGET; after it: more marks ($LATE_MARKS in all) and a superseding sheet that must not come back"
  log "archive: $(ls "$ARCH" | wc -l) WAL segments"
  pg "$PGBIN/pg_ctl" -D "$SRC" -m fast -w stop >/dev/null
  RUNNING=()
  BASE="$BACKUP" WAL="$ARCH" MEDIA="$SRC_MEDIA"
  unset DATABASE_URL
fi

# =====================================================================================================
[ -n "$BASE" ] && [ -e "$BASE" ] || fail "--base: no base backup at '${BASE}' (see --help)"
[ -n "$WAL" ] && [ -d "$WAL" ] || fail "--wal: no WAL archive folder at '${WAL}' (see --help)"
T_RESTORE=$(date +%s.%N)
DATA="$WORK/restored"
mkdir -m 0700 "$DATA"
if [ -f "$BASE/base.tar.gz" ] || [ -f "$BASE/base.tar" ]; then
  tar -xf "$BASE"/base.tar* -C "$DATA"
  if ls "$BASE"/pg_wal.tar* >/dev/null 2>&1; then tar -xf "$BASE"/pg_wal.tar* -C "$DATA/pg_wal"; fi
elif [ -f "$BASE/PG_VERSION" ]; then
  cp -a "$BASE/." "$DATA/"
else
  fail "--base: $BASE holds neither base.tar.gz (pg_basebackup -Ft) nor a data folder (PG_VERSION)"
fi
[ "$(cat "$DATA/PG_VERSION")" = "$("$PGBIN/postgres" --version | sed -E 's/.* ([0-9]+)\..*/\1/')" ] ||
  fail "the base backup is from PostgreSQL $(cat "$DATA/PG_VERSION"), these binaries are $("$PGBIN/postgres" --version)"
rm -f "$DATA/postmaster.pid" "$DATA/standby.signal"
mkdir -p "$DATA/pg_wal/archive_status"
# Debian keeps postgresql.conf outside the data folder: give the copy one of its own; in any case
# our settings come last and win. Authentication: only the private socket, no TCP.
[ -f "$DATA/postgresql.conf" ] || : >"$DATA/postgresql.conf"
: >"$DATA/postgresql.auto.conf"
printf 'local all all trust\n' >"$DATA/pg_hba.conf"
: >"$DATA/pg_ident.conf"
PORT="$(free_port)"
RESTORE_CMD="cp '$WAL/%f' '%p'"
{
  echo "# --- registry restore drill ---"
  echo "port = $PORT"
  echo "listen_addresses = ''"
  echo "unix_socket_directories = '$SOCK'"
  echo "hba_file = '$DATA/pg_hba.conf'"
  echo "ident_file = '$DATA/pg_ident.conf'"
  echo "archive_mode = off"
  echo "restore_command = '$(printf '%s' "$RESTORE_CMD" | sed "s/'/''/g")'"
  [ -n "$TARGET" ] && echo "recovery_target_time = '$TARGET'"
  echo "recovery_target_action = 'promote'"
  echo "shared_buffers = 32MB"
  echo "wal_level = replica"
  echo "ssl = off"
  echo "shared_preload_libraries = ''"
  echo "log_destination = 'stderr'"
  echo "logging_collector = off"
} >>"$DATA/postgresql.conf"
touch "$DATA/recovery.signal"
[ "${#AS_PG[@]}" -gt 0 ] && chown -R postgres "$DATA"
[ "${#AS_PG[@]}" -gt 0 ] && [ -d "$WAL" ] && { [ -r "$WAL" ] && [ -x "$WAL" ] || fail "the postgres user cannot read the WAL archive $WAL"; }
log "restoring $(basename "$BASE") + WAL from $WAL into a fresh cluster on port $PORT${TARGET:+, up to $TARGET}"
pg "$PGBIN/pg_ctl" -D "$DATA" -l "$LOGS/restored.log" -w -t 300 start >/dev/null ||
  fail "the restored cluster did not start: $(tail -n 8 "$LOGS/restored.log")"
RUNNING+=("$DATA")
wait_accepting "$PORT" || fail "the restored cluster does not accept connections: $(tail -n 8 "$LOGS/restored.log")"
for i in $(seq 1 600); do
  [ "$(q "$PORT" postgres -c 'SELECT pg_is_in_recovery()' 2>/dev/null)" = f ] && break
  sleep 0.2
done
[ "$(q "$PORT" postgres -c 'SELECT pg_is_in_recovery()')" = f ] ||
  fail "recovery did not finish: $(grep -E 'recovery|FATAL|LOG:  redo' "$LOGS/restored.log" | tail -n 5)"
STOP_LINE="$( (grep -E 'recovery stopping' "$LOGS/restored.log" || grep -E 'redo done' "$LOGS/restored.log") | tail -n 1 | sed -E 's/^.*(LOG|FATAL): +//')"
log "1. recovery finished and the cluster was promoted ($(elapsed "$T_RESTORE")): $STOP_LINE"
if [ -n "$TARGET" ] && ! grep -q "recovery stopping before commit" "$LOGS/restored.log"; then
  fail "recovery did not stop at the target time (it replayed to the end of the archive): $(tail -n 5 "$LOGS/restored.log")"
fi

FAILED=0
counts "$PORT" >"$WORK/restored-counts.txt" || fail "the restored database '$DBNAME' cannot be read"
if [ -n "$EXPECT" ]; then
  if diff -u "$EXPECT" "$WORK/restored-counts.txt" >"$WORK/counts.diff"; then
    log "2. row counts match the expected ones: $(tr '\n' ' ' <"$WORK/restored-counts.txt")"
  else
    log "2. row counts DIFFER from the expected ones:"
    cat "$WORK/counts.diff" >&2
    FAILED=1
  fi
else
  log "2. row counts: $(tr '\n' ' ' <"$WORK/restored-counts.txt")"
fi

export DATABASE_URL REGISTRY_TASK_BACKEND=immediate
DATABASE_URL="$(db_url "$PORT" "$DBNAME")"
unset REGISTRY_DB_ROLE REGISTRY_DB_RUNTIME_ROLE REGISTRY_STORAGE
if OUT="$(cd "$REPO_DIR" && "$VPY" manage.py verify_audit 2>&1)"; then
  log "3. $(printf '%s' "$OUT" | head -n 1)"
else
  log "3. the audit trail check FAILED: $OUT" >&2
  FAILED=1
fi
DOC_ARGS=()
if [ -n "$MEDIA" ]; then
  export REGISTRY_MEDIA_ROOT="$MEDIA"
  DOC_ARGS=(--files)
fi
if OUT="$(cd "$REPO_DIR" && "$VPY" manage.py verify_signed_documents "${DOC_ARGS[@]}" 2>&1)"; then
  log "4. $OUT"
else
  log "4. the signed documents check FAILED: $OUT" >&2
  FAILED=1
fi

[ "$FAILED" = 0 ] || fail "the restore drill found problems (see above)"
log "restore drill passed in $(elapsed "$T0") in all (restore and checks $(elapsed "$T_RESTORE"))"
