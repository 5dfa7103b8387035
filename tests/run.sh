#!/usr/bin/env bash
# Install everything the tests need, then run the whole suite.
#   bash tests/run.sh            # all tests
#   bash tests/run.sh -k units   # extra arguments go to pytest
# Makes a virtual environment in .venv, installs fieldapp with its test extras
# (pytest, playwright, hypothesis and the reference libraries used as oracles),
# and, when run as root on Debian/Ubuntu, Debian's chromium for browser tests and
# libreoffice-calc for the spreadsheet tests.
set -euo pipefail
cd "$(dirname "$0")/.."
PY=${PYTHON:-python3}

if [ ! -x .venv/bin/python ]; then
  if ! "$PY" -m venv .venv 2>/dev/null; then
    rm -rf .venv
    if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
      apt-get update -qq && apt-get install -y -qq python3-venv >/dev/null
      "$PY" -m venv .venv
    else
      echo "tests/run.sh: cannot make a virtual environment; install python3-venv (sudo apt-get install python3-venv) and run again." >&2
      exit 1
    fi
  fi
fi
.venv/bin/python -m pip install -q --disable-pip-version-check -e '.[test]'

CHROMIUM=${FIELDAPP_CHROMIUM:-/usr/bin/chromium}
if [ ! -x "$CHROMIUM" ]; then
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
    echo "tests/run.sh: installing Debian's chromium for the browser tests" >&2
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null
  else
    echo "tests/run.sh: no Chromium at $CHROMIUM. The browser tests will be skipped." >&2
    echo "  Install it with 'sudo apt-get install chromium' (Debian) or point FIELDAPP_CHROMIUM at a Chromium binary." >&2
  fi
fi

if ! command -v soffice >/dev/null; then
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
    echo "tests/run.sh: installing Debian's libreoffice-calc for the spreadsheet tests" >&2
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
      --no-install-recommends libreoffice-calc >/dev/null
  else
    echo "tests/run.sh: no LibreOffice (soffice). The spreadsheet round-trip tests will be skipped." >&2
    echo "  Install it with 'sudo apt-get install --no-install-recommends libreoffice-calc' (Debian)." >&2
  fi
fi

# certutil (Debian's libnss3-tools) builds the NSS database through which the
# https browser test makes Chromium trust the log folder's certificate authority.
if ! command -v certutil >/dev/null; then
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
    echo "tests/run.sh: installing Debian's libnss3-tools (certutil) for the https browser test" >&2
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq libnss3-tools >/dev/null
  else
    echo "tests/run.sh: no certutil; the https browser test will be skipped (sudo apt-get install libnss3-tools)." >&2
  fi
fi

exec .venv/bin/python -m pytest -q "$@"
