"""Shared fixtures: a Flask app on a temporary log, its test client, a real
server process (waitress) for browser tests, and headless Chromium."""
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


@pytest.fixture
def app(tmp_path):
    from fieldapp import create_app
    return create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data")})


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
