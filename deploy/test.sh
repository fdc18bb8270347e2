#!/usr/bin/env bash
# Run the whole test suite twice: on SQLite, then on PostgreSQL + PostGIS.
#
#   bash deploy/test.sh [pytest arguments...]      e.g. bash deploy/test.sh -x -k screening
#
# What it does (idempotent; a second run reuses everything the first one set up):
#   1. .venv with requirements-dev.txt (creates it with Python 3.11 if missing).
#   2. System packages when root (or with password-less sudo): PostgreSQL and the PostGIS
#      package matching the server's major version, proj-data (EGM96 grid), chromium (browser
#      tests), fonts-dejavu-core (PDF fonts), poppler-utils (PDF checks), gdal-bin (ogrinfo reads
#      the GeoPackage and GeoJSON exports back), nginx (the site
#      configuration is checked with nginx -t and served in a test). One apt-get update,
#      and only when something is missing.
#   3. PostgreSQL: uses $DATABASE_URL if set, else postgres://registry@127.0.0.1:5432/registry.
#      For a local server it starts the cluster if it is down (pg_ctlcluster) and, with
#      superuser access, provisions the role `registry` (LOGIN CREATEDB CREATEROLE: the tests make a
#      runtime role to check its rights on the audit trail), its owner role, the database
#      `registry` and PostGIS in template1 (so that test databases get it). It never drops a
#      database; pytest-django creates and drops test_<name> itself.
#   4. The type check (mypy, configured in pyproject.toml: registry/geodesy); a failure stops the run.
#      Then pytest without DATABASE_URL (SQLite), then with it (PostgreSQL + PostGIS).
#   5. The point-in-time recovery drill (deploy/restore_drill.sh --self-test: a throwaway source
#      cluster with WAL archiving, a base backup, a restore to a chosen time into a fresh cluster,
#      counts, audit chain and signed documents checked). Only on a full run (no pytest arguments)
#      or with REGISTRY_DRILL=1; REGISTRY_DRILL=0 skips it. Its clusters live in a temporary folder
#      on their own ports; the server above is not touched.
#   6. A summary with both counts and the elapsed time. Exit status 0 only if both halves (and the
#      drill, when it runs) passed; "no tests collected" (pytest exit 5) and a PostgreSQL half that
#      could not run are failures.
set -Eeuo pipefail

# shellcheck source=deploy/common.sh
source "$(dirname "${BASH_SOURCE[0]}")/common.sh"
cd "$REPO_DIR"

DEFAULT_PG_URL="postgres://registry@127.0.0.1:5432/registry"
if [ -n "${DATABASE_URL:-}" ]; then
  PG_URL="$DATABASE_URL"
  PG_URL_GIVEN=1
else
  PG_URL="$DEFAULT_PG_URL"
  PG_URL_GIVEN=0
fi
unset DATABASE_URL # each half sets (or clears) it explicitly
PG_PROBLEM=""      # why the PostgreSQL half cannot run; empty when it can
PG_SUPER=()        # a psql command line with superuser rights on the local server, if we have one
PG_VERSION=""      # major version of the local server
LOG_DIR="$REPO_DIR/var/test-logs"
mkdir -p "$LOG_DIR"
T_START=$SECONDS

masked_url() { printf '%s' "$1" | sed -E 's#(://[^:/@]+):[^@]*@#\1:***@#'; }

printf '%sControl-mark registry: test suite on SQLite and on PostgreSQL + PostGIS%s\n' "$_B" "$_N"
info "repository: $REPO_DIR"
info "PostgreSQL URL: $(masked_url "$PG_URL")$([ "$PG_URL_GIVEN" = 1 ] && echo ' (from DATABASE_URL)')"
[ "$#" -gt 0 ] && info "extra pytest arguments: $*"

# ---------------------------------------------------------------------------------------------
step "[1/6] Python environment (.venv, requirements-dev.txt)"
ensure_venv requirements-dev.txt

# Split the URL once (host, port, user) with the venv's Python.
read -r PG_SCHEME PG_HOST PG_PORT PG_USER < <(
  "$VPY" - "$PG_URL" <<'PY'
import getpass, sys
from urllib.parse import urlsplit
u = urlsplit(sys.argv[1])
print(u.scheme or "-", u.hostname or "-", u.port or 5432, u.username or getpass.getuser())
PY
)
case "$PG_SCHEME" in
  postgres | postgresql | postgis | pgsql) ;;
  *) PG_PROBLEM="DATABASE_URL is not a PostgreSQL URL (scheme '$PG_SCHEME')" ;;
esac
PG_LOCAL=0
case "$PG_HOST" in - | localhost | 127.0.0.1 | ::1 | /*) PG_LOCAL=1 ;; esac
[ "$PG_HOST" = "-" ] && PG_HOST="/var/run/postgresql"

installed_pg_versions() {
  local d
  for d in /usr/lib/postgresql/*/bin/postgres; do
    [ -x "$d" ] && basename "$(dirname "$(dirname "$d")")"
  done | sort -n
}

# Major version of the local cluster on our port, else the newest installed server.
local_pg_version() {
  local v=""
  if command -v pg_lsclusters >/dev/null 2>&1; then
    v="$(pg_lsclusters -h 2>/dev/null | awk -v p="$PG_PORT" '$3 == p { print $1; exit }')"
  fi
  [ -n "$v" ] || v="$(installed_pg_versions | tail -n 1)"
  printf '%s' "$v"
}

postgis_package_for() {
  if pkg_known "postgresql-$1-postgis-3" || pkg_installed "postgresql-$1-postgis-3"; then
    printf 'postgresql-%s-postgis-3' "$1"
  else
    printf 'postgis'
  fi
}

# ---------------------------------------------------------------------------------------------
step "[2/6] System packages"
WANTED=(proj-data chromium fonts-dejavu-core poppler-utils nginx gdal-bin)
if [ "$PG_LOCAL" = 1 ]; then
  PG_VERSION="$(local_pg_version)"
  if [ -z "$PG_VERSION" ]; then
    WANTED+=(postgresql postgresql-client)
  else
    WANTED+=("$(postgis_package_for "$PG_VERSION")")
  fi
fi
MISSING=()
for p in "${WANTED[@]}"; do pkg_installed "$p" || MISSING+=("$p"); done
if ! command -v dpkg-query >/dev/null 2>&1; then
  warn "not a Debian/Ubuntu system: install PostgreSQL + PostGIS, PROJ data, chromium and poppler yourself"
elif [ "${#MISSING[@]}" -eq 0 ]; then
  ok "already installed: ${WANTED[*]}"
elif can_apt; then
  apt_install "${MISSING[@]}" || warn "some packages could not be installed; tests that need them will skip or fail"
  [ "$PG_LOCAL" = 1 ] && PG_VERSION="$(local_pg_version)"
  ok "installed what was missing"
else
  warn "missing system packages (run as root to install them): ${MISSING[*]}"
fi

# ---------------------------------------------------------------------------------------------
step "[3/6] PostgreSQL + PostGIS"

pg_ready() {
  if command -v pg_isready >/dev/null 2>&1; then
    pg_isready -q -h "$PG_HOST" -p "$PG_PORT" -t 3 >/dev/null 2>&1
  else
    "$VPY" -c 'import socket, sys; socket.create_connection((sys.argv[1], int(sys.argv[2])), 3)' \
      "$PG_HOST" "$PG_PORT" >/dev/null 2>&1
  fi
}

wait_ready() {
  local i
  for i in $(seq 1 30); do
    pg_ready && return 0
    sleep 1
  done
  return 1
}

# Start (or create, then start) the local cluster that listens on our port.
start_local_cluster() {
  if [ -z "$(installed_pg_versions)" ]; then
    PG_PROBLEM="PostgreSQL is not installed and could not be installed here (run as root, or install postgresql and postgresql-<version>-postgis-3)"
    return 1
  fi
  if ! command -v pg_lsclusters >/dev/null 2>&1; then
    PG_PROBLEM="no PostgreSQL answers on $PG_HOST:$PG_PORT and pg_lsclusters is missing; start your server"
    return 1
  fi
  local line ver name port status
  line="$(pg_lsclusters -h | awk -v p="$PG_PORT" '$3 == p { print; exit }')"
  if [ -z "$line" ]; then
    if [ -z "$(pg_lsclusters -h)" ] && { is_root || [ -n "$SUDO" ]; }; then
      ver="$(installed_pg_versions | tail -n 1)"
      info "no cluster yet: pg_createcluster $ver main --port $PG_PORT"
      $SUDO pg_createcluster "$ver" main --port "$PG_PORT" >/dev/null ||
        { PG_PROBLEM="pg_createcluster $ver main failed"; return 1; }
      line="$(pg_lsclusters -h | awk -v p="$PG_PORT" '$3 == p { print; exit }')"
    else
      PG_PROBLEM="no PostgreSQL cluster is configured on port $PG_PORT (there are: $(pg_lsclusters -h | awk '{printf "%s%s/%s on %s", sep, $1, $2, $3; sep = ", "}'))"
      return 1
    fi
  fi
  read -r ver name port status _ <<<"$line"
  PG_VERSION="$ver"
  if [ "$status" != "online" ]; then
    if is_root || [ -n "$SUDO" ]; then
      info "starting cluster $ver/$name: pg_ctlcluster --skip-systemctl-redirect $ver $name start"
      $SUDO pg_ctlcluster --skip-systemctl-redirect "$ver" "$name" start ||
        { PG_PROBLEM="pg_ctlcluster could not start $ver/$name (see /var/log/postgresql/postgresql-$ver-$name.log)"; return 1; }
    else
      PG_PROBLEM="cluster $ver/$name is down and this is not root; start it: sudo pg_ctlcluster $ver $name start"
      return 1
    fi
  fi
  wait_ready || { PG_PROBLEM="cluster $ver/$name started but does not answer on $PG_HOST:$PG_PORT within 30 s"; return 1; }
}

# Find a way to run psql as a superuser on the local server (peer auth as postgres, or trust).
find_pg_super() {
  local -a cand
  if is_root && id -u postgres >/dev/null 2>&1; then
    cand=(runuser -u postgres -- psql -X -q -p "$PG_PORT")
    if (cd / && "${cand[@]}" -Atc "SELECT rolsuper FROM pg_roles WHERE rolname = current_user" 2>/dev/null) | grep -qx t; then
      PG_SUPER=("${cand[@]}")
      return 0
    fi
  fi
  if [ -n "$SUDO" ]; then
    cand=(sudo -n -u postgres psql -X -q -p "$PG_PORT")
    if (cd / && "${cand[@]}" -Atc "SELECT rolsuper FROM pg_roles WHERE rolname = current_user" 2>/dev/null) | grep -qx t; then
      PG_SUPER=("${cand[@]}")
      return 0
    fi
  fi
  cand=(psql -X -q -h "$PG_HOST" -p "$PG_PORT" -U postgres)
  if PGCONNECT_TIMEOUT=5 "${cand[@]}" -Atc "SELECT rolsuper FROM pg_roles WHERE rolname = current_user" </dev/null 2>/dev/null | grep -qx t; then
    PG_SUPER=("${cand[@]}")
    return 0
  fi
  return 1
}

pg_super_sql() { (cd / && PGOPTIONS='-c client_min_messages=warning' "${PG_SUPER[@]}" -v ON_ERROR_STOP=1 "$@"); }

setup_postgres() {
  [ -z "$PG_PROBLEM" ] || return 1
  if pg_ready; then
    ok "a server answers on $PG_HOST:$PG_PORT"
  elif [ "$PG_LOCAL" = 1 ]; then
    info "no server answers on $PG_HOST:$PG_PORT; trying to start the local one"
    start_local_cluster || return 1
    ok "local cluster $PG_VERSION started"
  else
    PG_PROBLEM="no PostgreSQL server answers at $PG_HOST:$PG_PORT (from DATABASE_URL); start it or fix DATABASE_URL"
    return 1
  fi

  if [ "$PG_LOCAL" = 1 ] && find_pg_super; then
    ok "superuser access: ${PG_SUPER[*]:0:4}"
    local have_postgis
    have_postgis="$(pg_super_sql -d postgres -Atc "SELECT count(*) FROM pg_available_extensions WHERE name = 'postgis'")"
    if [ "$have_postgis" = 0 ]; then
      local ver
      ver="$(pg_super_sql -d postgres -Atc "SHOW server_version_num")"
      ver=$((ver / 10000))
      info "PostGIS is not available on PostgreSQL $ver; installing $(postgis_package_for "$ver")"
      apt_install "$(postgis_package_for "$ver")" ||
        { PG_PROBLEM="PostGIS is not available on PostgreSQL $ver and could not be installed ($(postgis_package_for "$ver"))"; return 1; }
    fi
    if [ "$PG_URL_GIVEN" = 0 ]; then
      info "provisioning role 'registry' (LOGIN CREATEDB CREATEROLE), database 'registry', PostGIS in template1"
      pg_super_sql -d postgres -v db_user=registry -v db_name=registry -v createdb=true -v createrole=true \
        -v template_postgis=true \
        <deploy/postgres/provision.sql >/dev/null ||
        { PG_PROBLEM="provisioning failed (deploy/postgres/provision.sql; see the messages above)"; return 1; }
      ok "provisioned (deploy/postgres/provision.sql)"
    else
      info "DATABASE_URL given: not creating roles or databases; making sure template1 has PostGIS"
      pg_super_sql -d template1 -c "CREATE EXTENSION IF NOT EXISTS postgis" >/dev/null ||
        warn "could not create PostGIS in template1"
    fi
  elif [ "$PG_LOCAL" = 1 ]; then
    warn "no superuser access to the local server: skipping provisioning; checking what is there"
  fi

  local msg rc=0
  msg="$("$VPY" deploy/pg_preflight.py "$PG_URL" 2>&1)" || rc=$?
  if [ "$rc" = 2 ] && [ "$PG_URL_GIVEN" = 0 ] && [ "${#PG_SUPER[@]}" -gt 0 ]; then
    # Password authentication on 127.0.0.1 (the Debian default): give the test role a fresh
    # random password for this run and hand it to libpq through PGPASSWORD (never printed).
    info "the server wants a password for 'registry' over TCP; setting a random one for this run"
    PGPASSWORD="$("$VPY" -c 'import secrets; print(secrets.token_urlsafe(24))')"
    export PGPASSWORD
    printf "ALTER ROLE registry PASSWORD '%s';\n" "$PGPASSWORD" | pg_super_sql -d postgres >/dev/null
    rc=0
    msg="$("$VPY" deploy/pg_preflight.py "$PG_URL" 2>&1)" || rc=$?
  fi
  if [ "$rc" != 0 ]; then
    PG_PROBLEM="$msg"
    return 1
  fi
  ok "$msg"
}

setup_postgres || true
if [ -n "$PG_PROBLEM" ]; then
  warn "the PostgreSQL half cannot run: $PG_PROBLEM"
fi
T_SETUP=$((SECONDS - T_START))

# ---------------------------------------------------------------------------------------------
COLOR=no
[ -t 1 ] && COLOR=yes

# run_half LABEL LOGFILE ENV... : run pytest with the given environment, tee the output.
run_half() {
  local logfile="$2" rc
  shift 2
  set +e
  env "$@" "$VENV_DIR/bin/pytest" --color="$COLOR" "${PYTEST_ARGS[@]}" </dev/null 2>&1 | tee "$logfile"
  rc="${PIPESTATUS[0]}"
  set -e
  return "$rc"
}

# The last pytest summary line of a log ("12 passed, 1 skipped in 3.40s").
summary_line() {
  sed -E 's/\x1b\[[0-9;]*m//g' "$1" 2>/dev/null |
    grep -E '(passed|failed|error|errors|skipped|xfailed|xpassed|deselected|no tests ran).* in [0-9.]+s' |
    tail -n 1 | sed -E 's/^=+ //; s/ =+$//'
}

meaning_of() {
  case "$1" in
    0) echo "PASSED" ;;
    1) echo "FAILED (tests failed)" ;;
    2) echo "FAILED (interrupted)" ;;
    3) echo "FAILED (pytest internal error)" ;;
    4) echo "FAILED (pytest usage error)" ;;
    5) echo "FAILED (no tests collected)" ;;
    *) echo "FAILED (exit $1)" ;;
  esac
}

PYTEST_ARGS=("$@")

step "[4/6] Type check (mypy), then tests on SQLite"
T0=$SECONDS
if "$VENV_DIR/bin/mypy" 2>&1 | tee "$LOG_DIR/mypy.log"; then
  ok "mypy: no issues ($(fmt_duration $((SECONDS - T0))))"
else
  printf '\n%sThe type check failed (mypy, log in var/test-logs/mypy.log): the tests were not run.%s\n' "$_R" "$_N"
  exit 1
fi

T0=$SECONDS
RC_SQLITE=0
run_half sqlite "$LOG_DIR/sqlite.log" -u DATABASE_URL || RC_SQLITE=$?
T_SQLITE=$((SECONDS - T0))

step "[5/6] Tests on PostgreSQL + PostGIS ($(masked_url "$PG_URL"))"
T0=$SECONDS
RC_PG=0
if [ -z "$PG_PROBLEM" ]; then
  run_half postgresql "$LOG_DIR/postgresql.log" DATABASE_URL="$PG_URL" || RC_PG=$?
else
  RC_PG=99
  printf '    %snot run:%s %s\n' "$_R" "$_N" "$PG_PROBLEM"
  : >"$LOG_DIR/postgresql.log"
fi
T_PG=$((SECONDS - T0))

RUN_DRILL="${REGISTRY_DRILL:-}"
if [ -z "$RUN_DRILL" ]; then
  if [ "${#PYTEST_ARGS[@]}" -eq 0 ]; then RUN_DRILL=1; else RUN_DRILL=0; fi
fi
RC_DRILL=0
T_DRILL=0
if [ "$RUN_DRILL" = 1 ]; then
  step "[6/6] Point-in-time recovery drill (deploy/restore_drill.sh --self-test)"
  T0=$SECONDS
  if [ -n "$PG_PROBLEM" ]; then
    RC_DRILL=99
    printf '    %snot run:%s %s\n' "$_R" "$_N" "$PG_PROBLEM"
    : >"$LOG_DIR/restore-drill.log"
  else
    set +e
    bash "$REPO_DIR/deploy/restore_drill.sh" --self-test </dev/null 2>&1 | tee "$LOG_DIR/restore-drill.log"
    RC_DRILL="${PIPESTATUS[0]}"
    set -e
  fi
  T_DRILL=$((SECONDS - T0))
fi

# ---------------------------------------------------------------------------------------------
step "Summary"
paint() { if [ "$1" = 0 ]; then printf '%s%s%s' "$_G" "$2" "$_N"; else printf '%s%s%s' "$_R" "$2" "$_N"; fi; }
printf '    %-24s %s  %s  (%s)\n' "SQLite" "$(paint "$RC_SQLITE" "$(meaning_of "$RC_SQLITE")")" \
  "$(summary_line "$LOG_DIR/sqlite.log")" "$(fmt_duration "$T_SQLITE")"
if [ "$RC_PG" = 99 ]; then
  printf '    %-24s %s  %s\n' "PostgreSQL + PostGIS" "$(paint 1 "NOT RUN")" "$PG_PROBLEM"
else
  printf '    %-24s %s  %s  (%s)\n' "PostgreSQL + PostGIS" "$(paint "$RC_PG" "$(meaning_of "$RC_PG")")" \
    "$(summary_line "$LOG_DIR/postgresql.log")" "$(fmt_duration "$T_PG")"
fi
if [ "$RUN_DRILL" = 1 ]; then
  if [ "$RC_DRILL" = 0 ]; then
    printf '    %-24s %s  %s  (%s)\n' "Restore drill" "$(paint 0 PASSED)" "base backup + WAL to a chosen time" "$(fmt_duration "$T_DRILL")"
  elif [ "$RC_DRILL" = 99 ]; then
    printf '    %-24s %s  %s\n' "Restore drill" "$(paint 1 "NOT RUN")" "$PG_PROBLEM"
  else
    printf '    %-24s %s  %s\n' "Restore drill" "$(paint 1 FAILED)" "see var/test-logs/restore-drill.log"
  fi
fi
printf '    %-24s %s (setup %s)\n' "Elapsed" "$(fmt_duration $((SECONDS - T_START)))" "$(fmt_duration "$T_SETUP")"
printf '    %-24s %s\n' "Logs" "var/test-logs/sqlite.log, var/test-logs/postgresql.log"

if [ "$RC_SQLITE" = 0 ] && [ "$RC_PG" = 0 ] && [ "$RC_DRILL" = 0 ]; then
  printf '\n%sAll tests passed on both databases.%s\n' "$_G" "$_N"
  exit 0
fi
printf '\n%sThe test suite did not pass on both databases.%s\n' "$_R" "$_N"
exit 1
