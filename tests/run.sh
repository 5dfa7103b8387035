#!/usr/bin/env bash
# Install everything the tests need, then run the whole suite.
#   bash tests/run.sh            # all tests
#   bash tests/run.sh -k units   # extra arguments go to pytest
# Makes a virtual environment in .venv, installs fieldapp with its test extras
# (pytest, playwright, hypothesis and the reference libraries used as oracles),
# and, when run as root on Debian/Ubuntu, Debian's chromium for browser tests,
# libreoffice-calc for the spreadsheet tests and postgresql for the tests that
# run on both backends: a throwaway PostgreSQL cluster is started for the run
# (a temporary folder, a free port on 127.0.0.1) and removed at the end, also
# when tests fail. FIELDAPP_TEST_PG set beforehand uses that server instead.
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

# PostgreSQL: the store, API and CSV tests run on SQLite and on a real server.
PG_DIR=""
stop_pg() {
  if [ -n "$PG_DIR" ] && [ -d "$PG_DIR" ]; then
    su postgres -s /bin/sh -c "'$PG_BIN/pg_ctl' -D '$PG_DIR/data' -m immediate -w stop" \
      >/dev/null 2>&1 || true
    rm -rf "$PG_DIR"
  fi
}
start_pg() {
  PG_BIN=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
  if [ -z "$PG_BIN" ] || [ ! -x "$PG_BIN/initdb" ]; then
    if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
      echo "tests/run.sh: installing Debian's postgresql for the two-backend tests" >&2
      apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
        --no-install-recommends postgresql >/dev/null
      PG_BIN=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
    fi
  fi
  if [ -z "$PG_BIN" ] || [ ! -x "$PG_BIN/initdb" ] || [ "$(id -u)" != 0 ] \
      || ! id postgres >/dev/null 2>&1; then
    echo "tests/run.sh: no PostgreSQL cluster for the tests; the PostgreSQL half is skipped." >&2
    echo "  Run this script as root on Debian (it installs the postgresql package), or set" >&2
    echo "  FIELDAPP_TEST_PG=postgresql://USER@127.0.0.1:PORT/postgres (a user that may" >&2
    echo "  create databases)." >&2
    return 0
  fi
  # initdb refuses root: the cluster belongs to the postgres user, in a folder of its own
  PG_DIR=$(mktemp -d /tmp/fieldapp-pg.XXXXXX)
  chown postgres "$PG_DIR"
  local port
  port=$(.venv/bin/python -c "import socket; s=socket.socket(); s.bind(('127.0.0.1', 0)); print(s.getsockname()[1])")
  su postgres -s /bin/sh -c "'$PG_BIN/initdb' -D '$PG_DIR/data' -A trust -U postgres -E UTF8 \
      --locale=C.UTF-8" >"$PG_DIR/initdb.log" 2>&1 \
    || { cat "$PG_DIR/initdb.log" >&2; return 1; }
  # trust on 127.0.0.1 only, for this throwaway test cluster; fsync off: it is thrown away
  su postgres -s /bin/sh -c "'$PG_BIN/pg_ctl' -D '$PG_DIR/data' -l '$PG_DIR/server.log' -w \
      -o \"-p $port -k '$PG_DIR' -c listen_addresses=127.0.0.1 -c fsync=off \
      -c max_connections=200\" start" >/dev/null \
    || { cat "$PG_DIR/server.log" >&2; return 1; }
  export FIELDAPP_TEST_PG="postgresql://postgres@127.0.0.1:$port/postgres"
  echo "tests/run.sh: PostgreSQL $("$PG_BIN/postgres" --version | awk '{print $3}') for the" \
       "two-backend tests on 127.0.0.1:$port" >&2
}
if [ -z "${FIELDAPP_TEST_PG:-}" ]; then
  trap stop_pg EXIT
  trap 'exit 130' INT TERM
  start_pg
fi
if [ "${FIELDAPP_PG_ONLY:-}" = 1 ]; then     # tests/run.sh's own check: start, then stop
  .venv/bin/python -c "import os, psycopg; c = psycopg.connect(os.environ['FIELDAPP_TEST_PG']); print(c.execute('select version()').fetchone()[0])"
  exit 0
fi

.venv/bin/python -m pytest -q "$@"
