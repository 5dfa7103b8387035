"""Idle connections cannot lock the laptop out (issue 11, point 2).

The server is `serve --lan --host 127.0.0.1` in a child process; tablets are
client sockets bound to other loopback addresses (127.0.0.2 ...), which the
connection guard counts like any device on the hotspot. Bounded: at most
1,000 sockets, each held a few seconds."""
from __future__ import annotations

import socket
import time
import urllib.request

import pytest

from conftest import ServerProcess
from fieldapp.web import connections


def idle_sockets(port: int, n: int, per_host: int) -> list[socket.socket]:
    out = []
    for k in range(n):
        s = socket.socket()
        s.bind((f"127.0.0.{2 + k // per_host}", 0))
        s.settimeout(5)
        try:
            s.connect(("127.0.0.1", port))
        except OSError:
            s.close()
            continue
        out.append(s)
    return out


def closed_by_server(s: socket.socket, wait_s: float) -> bool:
    s.settimeout(wait_s)
    try:
        return s.recv(1) == b""
    except socket.timeout:
        return False
    except OSError:
        return True


@pytest.fixture
def lan_server(tmp_path):
    srv = ServerProcess(tmp_path / "lan", extra=["--lan", "--host", "127.0.0.1",
                                                 "--idle-timeout", "4"]).start()
    yield srv
    srv.stop()


def test_a_thousand_idle_tablet_connections_leave_the_laptop_a_slot(lan_server):
    socks = idle_sockets(lan_server.port, 1000, per_host=10)
    try:
        time.sleep(0.5)                        # the server has accepted or closed each
        page = urllib.request.urlopen(lan_server.url + "/", timeout=5)
        assert page.status == 200
        # over the caps the server closed the extra connections at once
        kept = [s for s in socks if not closed_by_server(s, 0.01)]
        assert len(kept) <= connections.OTHERS_TOTAL
    finally:
        for s in socks:
            s.close()


def test_one_address_holds_at_most_its_share(lan_server):
    socks = idle_sockets(lan_server.port, connections.PER_ADDRESS + 10, per_host=10_000)
    try:
        time.sleep(0.3)
        open_ = [s for s in socks if not closed_by_server(s, 0.01)]
        assert len(open_) == connections.PER_ADDRESS
    finally:
        for s in socks:
            s.close()


def test_idle_connections_time_out(lan_server):
    socks = idle_sockets(lan_server.port, 3, per_host=10)
    try:
        deadline = time.time() + 20
        assert all(closed_by_server(s, max(0.1, deadline - time.time())) for s in socks)
    finally:
        for s in socks:
            s.close()


class _Task:
    """The two things waitress's dispatcher asks of a task: its request's
    method and ``service()``."""

    def __init__(self, method: str, log: list, gate=None):
        import types
        self.request = types.SimpleNamespace(command=method)
        self.log, self.gate, self.method = log, gate, method

    def service(self):
        if self.gate is not None:
            self.gate.wait(5)
        self.log.append(self.method)


def test_a_write_runs_while_every_read_thread_is_held():
    """Three threads, one kept for writes: two reads that hang hold the read
    slots, more reads wait, and a POST added last still runs at once."""
    import threading
    gate, log = threading.Event(), []
    d = connections.writes_first_dispatcher(3, reserve=1)
    try:
        for _ in range(4):
            d.add_task(_Task("GET", log, gate))
        d.add_task(_Task("POST", log))
        deadline = time.monotonic() + 5
        while "POST" not in log and time.monotonic() < deadline:
            time.sleep(0.01)
        assert log == ["POST"], log          # no read finished, the write did
        gate.set()
        while len(log) < 5 and time.monotonic() < deadline + 5:
            time.sleep(0.01)
        assert sorted(log) == ["GET"] * 4 + ["POST"]
    finally:
        gate.set()
        d.shutdown(timeout=2)
