# Shared helpers for deploy/demo.sh and deploy/test.sh (sourced, not run).
#
# Everything here is idempotent: a second run finds what the first one made and
# moves on. System packages are installed only when running as root (or with
# password-less sudo); otherwise the scripts say what is missing.

# shellcheck shell=bash

REPO_DIR="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
VENV_DIR="${REPO_DIR}/.venv"
VPY="${VENV_DIR}/bin/python"
export PIP_DISABLE_PIP_VERSION_CHECK=1
export DEBIAN_FRONTEND=noninteractive

if [ -t 1 ]; then
  _B=$'\033[1m'; _R=$'\033[31m'; _G=$'\033[32m'; _Y=$'\033[33m'; _N=$'\033[0m'
else
  _B=""; _R=""; _G=""; _Y=""; _N=""
fi

step() { printf '\n%s==> %s%s\n' "$_B" "$*" "$_N"; }
info() { printf '    %s\n' "$*"; }
ok() { printf '    %sok%s  %s\n' "$_G" "$_N" "$*"; }
warn() { printf '    %swarning:%s %s\n' "$_Y" "$_N" "$*" >&2; }
die() {
  printf '\n%serror:%s %s\n' "$_R" "$_N" "$*" >&2
  exit 1
}

is_root() { [ "$(id -u)" -eq 0 ]; }

# "sudo -n" when we are not root but may use sudo without a password.
SUDO=""
if ! is_root && command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then
  SUDO="sudo -n"
fi

can_apt() { command -v apt-get >/dev/null 2>&1 && { is_root || [ -n "$SUDO" ]; }; }

pkg_installed() { dpkg-query -W -f='${Status}' "$1" 2>/dev/null | grep -q "install ok installed"; }

pkg_known() { apt-cache show "$1" >/dev/null 2>&1; }

APT_UPDATED=0
apt_update_once() {
  if [ "$APT_UPDATED" -eq 0 ]; then
    info "apt-get update"
    $SUDO env DEBIAN_FRONTEND=noninteractive apt-get update -q </dev/null >/dev/null ||
      warn "apt-get update failed; trying with the package lists already present"
    APT_UPDATED=1
  fi
}

# apt_install PKG... : install the packages that are missing. Returns non-zero if
# any could not be installed (each failure is reported; the others still go in).
apt_install() {
  local missing=() p failed=0
  for p in "$@"; do
    pkg_installed "$p" || missing+=("$p")
  done
  [ "${#missing[@]}" -eq 0 ] && return 0
  if ! can_apt; then
    warn "not root (and no password-less sudo): cannot install ${missing[*]}"
    return 1
  fi
  apt_update_once
  info "apt-get install ${missing[*]}"
  if $SUDO env DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends \
    "${missing[@]}" </dev/null >/dev/null; then
    return 0
  fi
  # One package may be unavailable here (e.g. chromium on some Ubuntu images):
  # install the rest one by one so that one failure does not block everything.
  for p in "${missing[@]}"; do
    pkg_installed "$p" && continue
    if ! $SUDO env DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends \
      "$p" </dev/null >/dev/null 2>&1; then
      warn "could not install $p"
      failed=1
    fi
  done
  return "$failed"
}

# A Python 3.11 interpreter (pyproject.toml requires >=3.11,<3.12).
pick_python() {
  local c
  for c in "${PYTHON:-}" python3.11 python3 /usr/bin/python3.11 /usr/bin/python3; do
    [ -n "$c" ] || continue
    command -v "$c" >/dev/null 2>&1 || continue
    if "$c" -c 'import sys; sys.exit(0 if sys.version_info[:2] == (3, 11) else 1)' 2>/dev/null; then
      command -v "$c"
      return 0
    fi
  done
  return 1
}

venv_ok() {
  [ -x "$VPY" ] && "$VPY" -c 'import sys; sys.exit(0 if sys.version_info[:2] == (3, 11) else 1)' 2>/dev/null &&
    "$VPY" -m pip --version >/dev/null 2>&1
}

# ensure_venv REQUIREMENTS_FILE : create .venv if needed and install the pinned requirements.
ensure_venv() {
  local req="$1" py
  if venv_ok; then
    ok ".venv present ($("$VPY" --version 2>&1))"
  else
    py="$(pick_python)" || {
      if can_apt; then
        apt_install python3 python3-venv || true
        py="$(pick_python)" || die "Python 3.11 is required (pyproject.toml); none found on PATH. Install python3.11."
      else
        die "Python 3.11 is required (pyproject.toml); none found on PATH. Install python3.11 (or set PYTHON=/path/to/python3.11)."
      fi
    }
    if [ -e "$VENV_DIR" ]; then
      warn ".venv exists but is not a usable Python 3.11 environment; recreating it"
      rm -rf "$VENV_DIR"
    fi
    info "creating .venv with $py"
    if ! "$py" -m venv "$VENV_DIR" >/dev/null 2>&1; then
      rm -rf "$VENV_DIR"
      # Debian and Ubuntu ship venv/ensurepip separately.
      if can_apt; then
        apt_install python3-venv || true
        local minor
        minor="$("$py" -c 'import sys; print(f"{sys.version_info[0]}.{sys.version_info[1]}")')"
        if pkg_known "python${minor}-venv"; then apt_install "python${minor}-venv" || true; fi
        "$py" -m venv "$VENV_DIR" || die "could not create .venv with $py"
      else
        die "could not create .venv: install python3-venv (as root: apt-get install python3-venv)."
      fi
    fi
    ok "created .venv ($("$VPY" --version 2>&1))"
  fi
  info "pip install -r $(basename "$req")"
  "$VPY" -m pip install -qq --no-input -r "$REPO_DIR/$req" ||
    die "pip could not install $req (see the messages above)."
  ok "Python packages installed from $(basename "$req")"
}

# fmt_duration SECONDS -> "1 min 05 s"
fmt_duration() {
  local s="$1"
  if [ "$s" -ge 60 ]; then printf '%d min %02d s' $((s / 60)) $((s % 60)); else printf '%d s' "$s"; fi
}
