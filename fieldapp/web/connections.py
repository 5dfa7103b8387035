"""How many connections the server holds, and from whom.

waitress stops accepting every connection once it holds ``connection_limit``
of them (100 by default), so 101 idle sockets from any device on the hotspot
kept the laptop's own page from loading. Here, before waitress sees a new
connection:

* the laptop's own browser (127.0.0.1 or ::1) is always accepted; waitress's
  limit is set above the cap for other addresses, so a slot is always free;
* any other address may hold at most ``per_address`` connections, and all of
  them together at most ``others_total``; a connection over either cap is
  closed at once, before it costs a buffer or a thread;
* a connection that sends nothing for ``idle_timeout_s`` is closed by
  waitress (``channel_timeout``), checked every ``cleanup_interval`` seconds.

Only the two addresses a local browser uses count as the laptop: another
127.x address is counted like a tablet (the tests use them to play tablets).
"""
from __future__ import annotations

from collections import deque

from waitress.task import ThreadedTaskDispatcher

PER_ADDRESS = 16          # a browser opens about 6 per host; a service worker a few more
OTHERS_TOTAL = 128        # a crew's tablets, with room to spare
LAPTOP_RESERVE = 100      # slots above OTHERS_TOTAL that only the laptop can use
IDLE_TIMEOUT_S = 30
CLEANUP_INTERVAL_S = 5

LAPTOP_ADDRESSES = frozenset({"127.0.0.1", "::1", "::ffff:127.0.0.1"})


def waitress_options(others_total: int = OTHERS_TOTAL, idle_timeout_s: int = IDLE_TIMEOUT_S
                     ) -> dict:
    """Adjustments for waitress.create_server."""
    return {"connection_limit": others_total + LAPTOP_RESERVE,
            "channel_timeout": idle_timeout_s,
            "cleanup_interval": min(CLEANUP_INTERVAL_S, max(1, idle_timeout_s // 2))}


def _host(addr) -> str:
    return str(addr[0]) if isinstance(addr, tuple) and addr else ""


def guard(server, per_address: int = PER_ADDRESS, others_total: int = OTHERS_TOTAL):
    """Put the caps in front of a waitress server's accept (returns the server)."""

    def handle_accept():
        try:
            v = server.accept()
            if v is None:
                return
            conn, addr = v
        except OSError:
            return
        host = _host(addr)
        if host not in LAPTOP_ADDRESSES:
            mine = others = 0
            for ch in list(server._map.values()):
                if ch is server or not hasattr(ch, "adj") or not hasattr(ch, "addr"):
                    continue
                h = _host(ch.addr)
                if h not in LAPTOP_ADDRESSES:
                    others += 1
                    mine += h == host
            if mine >= per_address or others >= others_total:
                try:
                    conn.close()
                except OSError:
                    pass
                return
        try:
            server.set_socket_options(conn)
        except OSError:
            conn.close()
            return
        server.channel_class(server, conn, server.fix_addr(addr), server.adj, map=server._map)

    server.handle_accept = handle_accept
    return server


# ---------------------------------------------------------------- threads

#: Worker threads kept for saves: a reading (GET, HEAD) may use every other
#: thread, never these, so a save finds a free thread at once however many
#: site pages and exports are being served.
WRITE_RESERVE = 2
WRITE_METHODS = frozenset({"POST", "PUT", "PATCH", "DELETE"})


def _is_write(task) -> bool:
    req = getattr(task, "request", None)
    return getattr(req, "command", None) in WRITE_METHODS


class _WritesFirst(ThreadedTaskDispatcher):
    """waitress's dispatcher with a second queue: writes go before every
    waiting read, and reads hold at most ``read_slots`` threads at once."""

    def __init__(self, read_slots: int):
        super().__init__()
        self.read_slots = read_slots
        self.writes = deque()
        self.reads_busy = 0

    def _ready(self) -> bool:
        return bool(self.writes) or (bool(self.queue) and self.reads_busy < self.read_slots)

    def _next_task(self, thread_no):
        """Wait (holding ``self.lock``) for a task this thread may run; None
        when the thread is told to stop. Returns (task, is_read)."""
        while not self._ready() and self.stop_count == 0:
            self.active_count -= 1
            self.queue_cv.wait()
            self.active_count += 1
        if self.stop_count > 0:
            self.active_count -= 1
            self.stop_count -= 1
            self.threads.discard(thread_no)
            self.thread_exit_cv.notify()
            return None, False
        is_read = not self.writes
        task = self.queue.popleft() if is_read else self.writes.popleft()
        if is_read:
            self.reads_busy += 1
        return task, is_read

    def handler_thread(self, thread_no):
        while True:
            with self.lock:
                task, is_read = self._next_task(thread_no)
            if task is None:
                break
            try:
                task.service()
            except BaseException:
                self.logger.exception("Exception when servicing %r", task)
            finally:
                if is_read:
                    with self.lock:
                        self.reads_busy -= 1
                        if self.queue:
                            self.queue_cv.notify()

    def add_task(self, task):
        with self.lock:
            (self.writes if _is_write(task) else self.queue).append(task)
            self.queue_cv.notify()

    def shutdown(self, cancel_pending=True, timeout=5):
        with self.lock:
            self.queue.extendleft(reversed(self.writes))
            self.writes.clear()
        return super().shutdown(cancel_pending, timeout)


def writes_first_dispatcher(threads: int, reserve: int = WRITE_RESERVE):
    """A waitress task dispatcher where writes never queue behind reads.

    waitress serves requests first come, first served on ``threads`` worker
    threads; 16 site pages and 16 exports held every thread and a save
    waited seconds for one. Here a write (POST, PUT, PATCH, DELETE) goes
    before every waiting read, and reads may hold at most ``threads -
    reserve`` threads at once, so ``reserve`` threads are always free for
    writes. SQLite's write-ahead log already lets a write commit while reads
    are open; this keeps the threads free too."""
    reserve = max(1, min(reserve, threads - 1))
    d = _WritesFirst(read_slots=threads - reserve)
    d.set_thread_count(threads)
    return d
