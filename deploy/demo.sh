#!/usr/bin/env bash
# Bring up the demo registry on this machine: .venv, SQLite database, the invented demo
# district, and Django's development server on 127.0.0.1.
#
#   bash deploy/demo.sh             serve on http://127.0.0.1:8000/ (Ctrl-C stops it)
#   PORT=8010 bash deploy/demo.sh   another port
#   bash deploy/demo.sh --reset     throw the demo database away and load the district again
#
# Idempotent: a second run reuses .venv and the database and only starts the server. The demo
# runs on SQLite (REGISTRY_DATA_DIR, default var/); DATABASE_URL and REGISTRY_PRODUCTION are
# ignored here. Like production where it matters: no debug pages (friendly 404/403/500), static
# files served by WhiteNoise, the API docs from local files, EGM96 from Debian's proj-data.
# It is not a production setup: see deploy/README.md.
set -Eeuo pipefail

# shellcheck source=deploy/common.sh
source "$(dirname "${BASH_SOURCE[0]}")/common.sh"
cd "$REPO_DIR"

usage() { sed -n '2,13p' "${BASH_SOURCE[0]}" | sed 's/^# \{0,1\}//'; }

RESET=0
for arg in "$@"; do
  case "$arg" in
    --reset) RESET=1 ;;
    -h | --help) usage; exit 0 ;;
    *) die "unknown option '$arg' (try --help)" ;;
  esac
done

PORT="${PORT:-8000}"
case "$PORT" in '' | *[!0-9]*) die "PORT must be a number, got '$PORT'" ;; esac
{ [ "$PORT" -ge 1 ] && [ "$PORT" -le 65535 ]; } || die "PORT must be between 1 and 65535, got $PORT"

if [ -n "${DATABASE_URL:-}" ]; then
  warn "DATABASE_URL is set; the demo ignores it and uses its own SQLite file"
  unset DATABASE_URL
fi
if [ -n "${REGISTRY_PRODUCTION:-}" ] && [ "${REGISTRY_PRODUCTION}" != 0 ]; then
  warn "REGISTRY_PRODUCTION is set; the demo runs in development mode regardless"
fi
export REGISTRY_PRODUCTION=0 REGISTRY_DEBUG="${REGISTRY_DEBUG:-0}" REGISTRY_MEDIA_BY_DJANGO=1

DATA_DIR="${REGISTRY_DATA_DIR:-$REPO_DIR/var}"
DB="$DATA_DIR/registry.sqlite3"
USERS_FILE="$DATA_DIR/demo-users.txt" # what load_demo printed (users, passwords), shown on every start
T_START=$SECONDS

printf '%sControl-mark registry: demo%s\n' "$_B" "$_N"

step "[1/4] Python environment (.venv, requirements.txt) and PROJ data"
ensure_venv requirements.txt
# EGM96 (the labelled approximate geoid fallback) comes with Debian's proj-data, as in deploy/test.sh.
if ! command -v dpkg-query >/dev/null 2>&1; then
  warn "not a Debian/Ubuntu system: install PROJ's data files yourself for geoid heights"
elif pkg_installed proj-data; then
  ok "proj-data installed"
elif can_apt; then
  apt_install proj-data && ok "proj-data installed" || warn "proj-data could not be installed: no geoid heights"
else
  warn "proj-data is missing (run as root to install it): the demo has no geoid heights"
fi

step "[2/4] SQLite database ($DB)"
mkdir -p "$DATA_DIR"
if [ "$RESET" = 1 ]; then
  info "--reset: removing the demo database and its saved user list"
  rm -f -- "$DB" "$DB-wal" "$DB-shm" "$DB-journal" "$USERS_FILE"
fi
[ -f "$DB" ] || rm -f -- "$USERS_FILE" # a new database has no demo users yet
"$VPY" manage.py migrate --noinput -v 0 || die "migrate failed (see above)"
ok "database schema up to date"

step "[3/4] Demo district"
if ! "$VPY" manage.py help load_demo >/dev/null 2>&1; then
  warn "this checkout has no load_demo command yet: the registry starts empty"
  info "create a user to sign in with: .venv/bin/python manage.py createsuperuser"
elif [ -s "$USERS_FILE" ]; then
  ok "already loaded (to start over: bash deploy/demo.sh --reset)"
else
  info "python manage.py load_demo"
  rc=0
  "$VPY" manage.py load_demo >"$USERS_FILE.part" 2>&1 || rc=$?
  if [ "$rc" = 0 ]; then
    # Show this run's whole output once (its warnings are current); keep only the user list to show
    # on later starts, so that a warning of an earlier run is never replayed as if it were current.
    sed 's/^/    /' "$USERS_FILE.part"
    sed -n '/^Demo users/,$p' "$USERS_FILE.part" >"$USERS_FILE"
    rm -f -- "$USERS_FILE.part"
    ok "demo district loaded"
  else
    sed 's/^/    /' "$USERS_FILE.part" >&2
    rm -f -- "$USERS_FILE.part"
    die "load_demo failed (exit $rc; its messages are above). To start over: bash deploy/demo.sh --reset"
  fi
fi

step "[4/4] Server"
"$VPY" - "$PORT" <<'PY' || die "port $PORT on 127.0.0.1 is in use; choose another: PORT=8010 bash deploy/demo.sh"
import socket, sys
with socket.socket() as s:
    s.bind(("127.0.0.1", int(sys.argv[1])))
PY
ADDRESS="http://127.0.0.1:$PORT/"
printf '\n%sThe registry is starting at %s%s   (took %s to prepare)\n' "$_B" "$ADDRESS" "$_N" "$(fmt_duration $((SECONDS - T_START)))"
if [ -s "$USERS_FILE" ]; then
  printf '\nDemo sign-in (from load_demo):\n'
  sed 's/^/    /' "$USERS_FILE"
fi
cat <<EOF

    Demo data: an invented district with invented marks, people and jobs. Nothing here is a
    real control mark; never stake or survey from it.
    Stop the server with Ctrl-C. Start again: bash deploy/demo.sh (keeps the data).

EOF
# Documents: the demo office's name on every sheet, QR codes that open this server's verification page,
# and a background worker (report builds) beside the server, stopped with it.
export REGISTRY_OFFICE_NAME="${REGISTRY_OFFICE_NAME:-Corvid County Survey Office (DEMO, invented)}"
export REGISTRY_PUBLIC_URL="${REGISTRY_PUBLIC_URL:-http://127.0.0.1:$PORT}"
"$VPY" manage.py task_worker --interval 1 --no-reload >"$DATA_DIR/worker.log" 2>&1 &
WORKER_PID=$!
trap 'kill "$WORKER_PID" 2>/dev/null || true' EXIT INT TERM
info "background worker started (pid $WORKER_PID, log $DATA_DIR/worker.log)"
"$VPY" manage.py runserver "127.0.0.1:$PORT" --noreload
