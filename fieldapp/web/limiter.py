"""Wrong pairing codes, counted so that guessing a code takes longer than its
lifetime: a sliding window per address and overall, kept in the log."""
from __future__ import annotations

import threading
import time

from .. import store

#: Wrong pairing codes allowed within FAIL_WINDOW_S, per address and overall.
FAILS_PER_ADDRESS = 5
FAILS_OVERALL = 20
FAIL_WINDOW_S = 600


class FailureLimiter:
    """Counts wrong pairing codes in a sliding window, per address and overall,
    in the log itself (``pairing_failures``), so a restart does not clear it.

    Throttle by address first: an address with ``per_address`` wrong codes in
    the window waits. Past the ``overall`` limit every address that has typed
    a wrong code at all waits too, but an address with no wrong code of its
    own is still heard: the tablet with the right code pairs, whatever others
    on the network send. Checks and counts run under one lock, so a parallel
    burst is counted one by one (waitress is one process with threads)."""

    def __init__(self, per_address=FAILS_PER_ADDRESS, overall=FAILS_OVERALL,
                 window_s=FAIL_WINDOW_S, clock=time.time):
        self.per_address, self.overall, self.window_s = per_address, overall, window_s
        self.clock = clock
        self.lock = threading.Lock()

    def retry_after(self, conn, addr: str) -> int:
        """Seconds this address must wait before a code is even looked at (0: now).
        Call with ``self.lock`` held."""
        now = self.clock()
        c = store.pairing_failure_counts(conn, addr, now - self.window_s)
        if c["address"] >= self.per_address or (c["overall"] >= self.overall
                                                and c["address"] > 0):
            oldest = c["address_oldest"] if c["address"] >= self.per_address \
                else max(c["address_oldest"], c["overall_oldest"])
            return max(1, int(oldest + self.window_s - now) + 1)
        return 0

    def fail(self, conn, addr: str) -> None:
        now = self.clock()
        store.add_pairing_failure(conn, addr, now, now - self.window_s)
