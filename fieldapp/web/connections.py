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
