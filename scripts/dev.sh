#!/usr/bin/env bash
# stimplan developer entry point: sets up everything it needs, then runs one task.
#
#   scripts/dev.sh demo [DIR]   install (if needed) and run the built-in demo
#   scripts/dev.sh test         install (if needed), lint with ruff, run the test suite
#   scripts/dev.sh bench        install (if needed) and run the benchmarks
#   scripts/dev.sh setup        only install
#
# On a fresh Debian machine it installs the system packages it needs with
# apt-get (as root, or through sudo), creates .venv/ in the checkout and
# installs stimplan into it in editable mode.
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
VENV="$ROOT/.venv"
PY="$VENV/bin/python"

# Debian packages: Python with venv, and Xvfb + Mesa + the X/Qt libraries that
# napari needs for a real OpenGL context in the GUI tests.
SYSTEM_PACKAGES_BASE=(python3 python3-venv python3-pip)
SYSTEM_PACKAGES_GUI=(xvfb xauth libgl1-mesa-dri libglx-mesa0 libegl1 libxkbcommon-x11-0
  libxcb-icccm4 libxcb-image0 libxcb-keysyms1 libxcb-randr0 libxcb-render-util0
  libxcb-xinerama0 libxcb-xfixes0 libxcb-shape0 libxcb-cursor0 libdbus-1-3 libfontconfig1
  libglib2.0-0 libx11-xcb1)  # Qt6 links GLib and X11-xcb; nothing above pulls GLib in

log() { printf '[stimplan] %s\n' "$*" >&2; }

apt_install() {
  local missing=()
  for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  [ ${#missing[@]} -eq 0 ] && return 0
  if ! command -v apt-get >/dev/null 2>&1; then
    log "please install these system packages: ${missing[*]}"
    return 1
  fi
  local SUDO=""
  [ "$(id -u)" -ne 0 ] && SUDO="sudo"
  log "installing system packages: ${missing[*]}"
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}"
}

python_ok() {
  "$1" -c 'import sys, venv, ensurepip; sys.exit(0 if sys.version_info >= (3, 11) else 1)' 2>/dev/null
}

find_python() {
  for cand in python3.11 python3 python; do
    if command -v "$cand" >/dev/null 2>&1 && python_ok "$(command -v "$cand")"; then
      command -v "$cand"
      return 0
    fi
  done
  return 1
}

setup() {
  local extras="$1"   # "" or "test"
  local base_py
  if ! base_py="$(find_python)"; then
    apt_install "${SYSTEM_PACKAGES_BASE[@]}"
    base_py="$(find_python)" || { log "Python >= 3.11 with venv is required"; exit 1; }
  fi
  if [ "$extras" = "test" ]; then
    apt_install "${SYSTEM_PACKAGES_GUI[@]}"
  fi
  if [ ! -x "$PY" ]; then
    log "creating $VENV with $base_py"
    "$base_py" -m venv "$VENV"
  fi
  local spec="$ROOT"
  [ -n "$extras" ] && spec="$ROOT[$extras]"
  local stamp="$VENV/.stimplan-installed-${extras:-base}"
  local want
  want="$(cat "$ROOT/pyproject.toml" | sha256sum | cut -c1-16)"
  if [ ! -f "$stamp" ] || [ "$(cat "$stamp")" != "$want" ]; then
    log "installing stimplan${extras:+[$extras]} into $VENV"
    "$PY" -m pip install -q --upgrade pip
    "$PY" -m pip install -q -e "$spec"
    echo "$want" > "$stamp"
  fi
}

cmd="${1:-}"
shift || true
case "$cmd" in
  setup)
    setup test
    ;;
  demo)
    setup ""
    out="${1:-stimplan-demo}"
    shift || true
    exec "$VENV/bin/stimplan" demo -o "$out" "$@"
    ;;
  test)
    setup test
    cd "$ROOT"
    log "ruff check"
    "$VENV/bin/ruff" check stimplan plugins tests benchmarks
    "$VENV/bin/ruff" format --check stimplan plugins tests benchmarks
    log "npe2 validate (the napari plugin manifest)"
    "$VENV/bin/npe2" validate stimplan --imports
    log "pytest (under Xvfb)"
    export QT_API="${QT_API:-pyqt6}"
    exec xvfb-run -a -s "-screen 0 1280x1024x24" "$PY" -m pytest "$@"
    ;;
  bench)
    setup test
    cd "$ROOT"
    for b in benchmarks/*.py; do
      log "$b"
      "$PY" "$b"
    done
    ;;
  *)
    echo "usage: scripts/dev.sh {demo [DIR]|test|bench|setup}" >&2
    exit 64
    ;;
esac
