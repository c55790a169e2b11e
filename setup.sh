#!/usr/bin/env bash
# Set up xcheck in ./.venv and run one job: `bash setup.sh demo` or `bash setup.sh test`.
#
# Installs by itself what it needs on a fresh Debian machine: ngspice's shared library
# (libngspice0-dev, which provides libngspice.so for PySpice) and python3-venv when
# running as root with apt-get; everything else goes into a virtual environment.
# Without root or apt it says what to install and carries on: everything that does not
# need ngspice still runs (ngspice tests are then skipped, with the reason shown).
set -euo pipefail

job="${1:-}"
shift || true
case "$job" in
  demo|test) ;;
  *) echo "usage: bash setup.sh demo|test [extra arguments]" >&2; exit 2 ;;
esac

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
cd "$here"
venv="$here/.venv"
python="${PYTHON:-python3}"

say() { echo "setup.sh: $*" >&2; }

have_ngspice() {
  if [[ -n "${NGSPICE_LIBRARY_PATH:-}" && -e "${NGSPICE_LIBRARY_PATH}" ]]; then return 0; fi
  ldconfig -p 2>/dev/null | grep -q 'libngspice\.so ' && return 0
  return 1
}

apt_install() {
  if [[ $(id -u) -eq 0 ]] && command -v apt-get >/dev/null; then
    if [[ -z "${XCHECK_APT_UPDATED:-}" ]]; then
      DEBIAN_FRONTEND=noninteractive apt-get update -qq
      export XCHECK_APT_UPDATED=1
    fi
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "$@" >/dev/null
    return 0
  fi
  return 1
}

if ! have_ngspice; then
  say "installing ngspice's shared library (Debian package libngspice0-dev) ..."
  if ! apt_install libngspice0-dev || ! have_ngspice; then
    say "could not install ngspice's shared library. Install it yourself:"
    say "  Debian/Ubuntu: sudo apt-get install libngspice0-dev"
    say "  macOS (Homebrew): brew install libngspice"
    say "  conda: conda install -c conda-forge ngspice-lib"
    say "or point NGSPICE_LIBRARY_PATH at libngspice.so. Continuing without ngspice."
  fi
fi

if [[ ! -x "$venv/bin/python" ]]; then
  if ! "$python" -m venv "$venv" 2>/dev/null; then
    say "python venv module missing; installing python3-venv ..."
    rm -rf "$venv"
    apt_install python3-venv || { say "install python3-venv (Debian) and run again"; exit 2; }
    "$python" -m venv "$venv"
  fi
fi
"$venv/bin/python" - <<'PY' || { echo "setup.sh: xcheck needs Python >= 3.11" >&2; exit 2; }
import sys
sys.exit(0 if sys.version_info >= (3, 11) else 1)
PY
say "installing xcheck and its Python dependencies into .venv ..."
"$venv/bin/python" -m pip install --quiet --disable-pip-version-check --upgrade pip >/dev/null
"$venv/bin/python" -m pip install --quiet --disable-pip-version-check -e ".[test]"

export MPLBACKEND=Agg
case "$job" in
  demo) exec "$venv/bin/xcheck" demo "$@" ;;
  test) exec "$venv/bin/python" -m pytest "$@" ;;
esac
