"""Shared fixtures: a Flask app on a temporary log, its test client, a real
server process (waitress) for browser tests, and headless Chromium.

Both backends: a test module that sets ``BOTH_BACKENDS = True`` runs each of
its tests that use ``app``, ``client`` or ``db`` twice, on a SQLite file and
on a fresh PostgreSQL database (cloned from a migrated template: a real
server, never a mock). ``FIELDAPP_TEST_PG`` names the server (a
``postgresql://`` URL of a user that may create databases; tests/run.sh starts
a throwaway cluster and sets it); without it the PostgreSQL half is skipped.
``@pytest.mark.sqlite_only`` keeps a test that checks the SQLite file itself
(PRAGMAs, a damaged page, a read-only folder) on SQLite."""
from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CHROMIUM = os.environ.get("FIELDAPP_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]


PG_SERVER = os.environ.get("FIELDAPP_TEST_PG", "")
PG_HOW = ("PostgreSQL half skipped: FIELDAPP_TEST_PG is not set. Run bash tests/run.sh as root "
          "(it installs Debian's postgresql and starts a throwaway cluster), or point "
          "FIELDAPP_TEST_PG at a server: postgresql://USER@127.0.0.1:PORT/postgres")


def pytest_generate_tests(metafunc):
    if "backend" in metafunc.fixturenames and getattr(metafunc.module, "BOTH_BACKENDS", False):
        both = metafunc.definition.get_closest_marker("sqlite_only") is None
        metafunc.parametrize("backend", ["sqlite", "postgresql"] if both else ["sqlite"],
                             indirect=True)


def pytest_report_header(config):
    return (f"PostgreSQL for the two-backend tests: {_redact(PG_SERVER)}" if PG_SERVER
            else PG_HOW)


def _redact(url: str) -> str:
    import re
    return re.sub(r"(://[^:/@]+):[^@]*@", r"\1:***@", url)


def _pg_url(dbname: str) -> str:
    from urllib.parse import urlsplit, urlunsplit
    parts = urlsplit(PG_SERVER)
    return urlunsplit(parts._replace(path="/" + dbname))


@pytest.fixture
def backend(request):
    """"sqlite" or "postgresql": the log's backend for this test."""
    return getattr(request, "param", "sqlite")


@pytest.fixture(scope="session")
def pg_admin():
    """A connection to the test server, and a template database migrated once."""
    if not PG_SERVER:
        pytest.skip(PG_HOW)
    import psycopg

    from fieldapp import store
    admin = psycopg.connect(PG_SERVER, autocommit=True)
    template = f"fieldapp_tpl_{os.getpid()}"
    admin.execute(f"DROP DATABASE IF EXISTS {template} WITH (FORCE)")
    admin.execute(f"CREATE DATABASE {template}")
    store.connect(_pg_url(template)).close()           # every migration, once
    yield admin, template
    admin.execute(f"DROP DATABASE IF EXISTS {template} WITH (FORCE)")
    admin.close()


@pytest.fixture
def pg_db(pg_admin):
    """A fresh, migrated PostgreSQL database for one test (a clone of the
    template, about 50 ms), dropped afterwards."""
    import uuid
    admin, template = pg_admin
    name = f"fieldapp_t_{uuid.uuid4().hex[:12]}"
    admin.execute(f"CREATE DATABASE {name} TEMPLATE {template} STRATEGY FILE_COPY")
    yield _pg_url(name)
    admin.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")


@pytest.fixture
def log_target(tmp_path, backend, request):
    """What ``store.connect`` opens for a store test without an app: a SQLite
    file in a fresh folder, or a fresh PostgreSQL database's URL."""
    if backend == "postgresql":
        return request.getfixturevalue("pg_db")
    (tmp_path / "log").mkdir()
    return tmp_path / "log" / "fieldapp.sqlite3"


def lock_wait(conn, ms: int) -> None:
    """How long a writer waits for another one before giving up, on either backend."""
    from fieldapp import store
    if store.dialect(conn) == "postgresql":
        conn.execute(f"SET lock_timeout = '{int(ms)}ms'")
    else:
        conn.execute(f"PRAGMA busy_timeout = {int(ms)}")


def make_app(data_dir, backend, request):
    """An application for a test: its log in ``data_dir`` (SQLite) or a fresh
    PostgreSQL database; a generator, so the pool closes after the test."""
    from fieldapp import create_app
    from fieldapp.web.db import close_pool
    config = {"TESTING": True, "DATA_DIR": str(data_dir)}
    if backend == "postgresql":
        config["DB"] = request.getfixturevalue("pg_db")
    a = create_app(config)
    yield a
    close_pool(a)


@pytest.fixture
def app(tmp_path, backend, request):
    yield from make_app(tmp_path / "data", backend, request)


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def db(app):
    from fieldapp import store
    conn = store.connect(app.config["DATABASE"])
    yield conn
    conn.close()


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class ServerProcess:
    """`python -m fieldapp serve` in a child process, as a user starts it."""

    def __init__(self, data_dir: Path, port: int | None = None, extra=()):
        self.data_dir = data_dir
        self.port = port or free_port()
        self.extra = list(extra)
        self.proc = None

    @property
    def url(self):
        return f"http://127.0.0.1:{self.port}"

    def start(self, timeout=20):
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "fieldapp", "serve", "--port", str(self.port),
             "--data", str(self.data_dir), *self.extra],
            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, env=env, cwd=ROOT)
        deadline = time.time() + timeout
        while time.time() < deadline:
            try:
                urllib.request.urlopen(self.url + "/api/sites", timeout=1).read()
                return self
            except OSError:
                if self.proc.poll() is not None:
                    raise RuntimeError(self.proc.stdout.read().decode())
                time.sleep(0.1)
        raise RuntimeError("server did not start")

    def stop(self):
        if self.proc and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()


@pytest.fixture
def server(tmp_path):
    s = ServerProcess(tmp_path / "live").start()
    yield s
    s.stop()


@pytest.fixture(scope="session")
def browser():
    if not os.path.exists(CHROMIUM):
        pytest.skip(f"no Chromium at {CHROMIUM} (tests/run.sh installs Debian's chromium as root)")
    from playwright.sync_api import sync_playwright
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
        yield b
        b.close()


PHONE = {"width": 360, "height": 740}
TABLET = {"width": 800, "height": 1280}


@pytest.fixture
def small_disk(tmp_path):
    """A 4 MB file system of its own (tmpfs): needs root, as CI and tests/run.sh are."""
    mnt = tmp_path / "small"
    mnt.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=4m", "tmpfs", str(mnt)],
                       capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a small file system here: {r.stderr.strip()}")
    try:
        yield mnt
    finally:
        subprocess.run(["mount", "-o", "remount,rw", str(mnt)], capture_output=True)
        subprocess.run(["umount", "-l", str(mnt)], capture_output=True)


def fill(folder: Path) -> Path:
    """Fill a (small) file system until the disk is full; returns the filler file."""
    filler = folder / "filler"
    with open(filler, "wb") as f:
        try:
            while True:
                f.write(b"\0" * 65536)
                f.flush()
        except OSError:
            pass
    return filler
