"""convert-csv on more than one core: chunks converted side by side, written
in the file's order.

Each chunk of rows is converted on its own (its lines depend on nothing
else in the file). With ``jobs`` of 2 the program converts the first chunk
itself, hands the second to a helper process, converts the third while the
helper works, and so on; the chunks' lines are written in order, each once
it and every chunk before it are done. The program reads the file; a
helper is handed a block of its lines as one text (cheap to pass) and reads
them as CSV itself. At most ``jobs`` chunks are in hand at once, so memory
stays flat with the file. A bad row ends the run as it does on one core:
the lines of every chunk before its own are written, then its error is
raised (naming its line), whichever process read it.

Helpers are forked processes, so this runs only on Linux, where ``fork``
is the system's own way of starting one; elsewhere, and for a file of one
chunk, everything is converted in the one process (no helper is started).
A helper that dies is not waited for: its chunk is converted here instead.
"""
from __future__ import annotations

import os
import signal
import sys
import time
from collections import deque
from typing import Callable


def helpers_possible() -> bool:
    """Whether helper processes can be forked here (Linux)."""
    return sys.platform.startswith("linux") and hasattr(os, "fork")


def default_jobs() -> int:
    """2 where a second core and forked helpers are there, else 1."""
    return 2 if helpers_possible() and (os.cpu_count() or 1) >= 2 else 1


def _broken_pool() -> type:
    from concurrent.futures.process import BrokenProcessPool
    return BrokenProcessPool


def _quiet_helper() -> None:
    """A helper leaves Ctrl-C to the program, which stops it."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


class InOrder:
    """Chunks converted by ``convert(*args)`` (a function of a module, so a
    helper can be handed it), here or in helpers, their lines handed to
    ``write`` in the order the chunks were put. :meth:`put` each chunk,
    :meth:`finish` at the end, :meth:`close` in a ``finally``."""

    def __init__(self, convert: Callable[..., bytes], write: Callable[[bytes], object],
                 jobs: int = 1):
        self._convert = convert
        self._write = write
        self._jobs = max(1, int(jobs)) if helpers_possible() else 1
        self._pool = None               # a ProcessPoolExecutor, from the first helper
        self._pending: deque = deque()  # [future or None, args, bytes or exception]
        self._mine: list | None = None  # this round's chunk for this process, held
        self._round = 0                 # chunks put in this round
        self.own_s: float | None = None  # how long this process took for its last chunk

    @property
    def jobs(self) -> int:
        """How many processes convert (1: this one alone)."""
        return self._jobs

    def put(self, *args) -> None:
        """Take a chunk; write the lines of the chunks now done, in order.
        Chunks go in rounds of ``jobs``: the first of each is this process's,
        held until the others are handed to helpers (so they work while it
        converts its own), or until :meth:`finish` (a file of one chunk
        starts no helper)."""
        if self._round == 0:
            self._mine = [None, args, None]
            self._pending.append(self._mine)
        else:
            try:
                future = self._helpers().submit(self._convert, *args)
            except _broken_pool():      # a helper died between chunks: this one is done here
                self._helpers_lost()
                future = None
            self._pending.append([future, args, None])
        self._round += 1
        if self._round >= self._jobs:
            self._end_round()

    def finish(self) -> None:
        """Write the lines of every chunk still in hand, in order; the
        helpers, idle now, are ended."""
        if self._round:
            self._end_round()
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None

    def alone(self) -> None:
        """Convert every chunk from now on in this process (the ones in
        hand are written first): where a chunk converts about as fast as it
        is read, handing it over costs more than it saves."""
        self.finish()
        self._jobs = 1

    def _end_round(self) -> None:
        """Convert this process's chunk of the round, then write the round."""
        mine, self._mine, self._round = self._mine, None, 0
        started = time.perf_counter()
        try:
            mine[2] = self._convert(*mine[1])
        except Exception as e:          # raised once the chunks before it are written
            mine[2] = e
        self.own_s = time.perf_counter() - started
        self._drain()

    def close(self) -> None:
        """Stop the helpers without waiting for a chunk nobody will write."""
        if self._pool is not None:
            self._pool.shutdown(wait=False, cancel_futures=True)
            self._pool = None

    def _helpers_lost(self) -> None:
        """A helper died: the rest is converted in this process."""
        self.close()
        self._jobs = 1

    def _helpers(self):
        if self._pool is None:          # imported here: 15 ms a file of one chunk need not pay
            import multiprocessing
            from concurrent.futures import ProcessPoolExecutor
            self._pool = ProcessPoolExecutor(max_workers=self._jobs - 1,
                                             mp_context=multiprocessing.get_context("fork"),
                                             initializer=_quiet_helper)
        return self._pool

    def _drain(self) -> None:
        while self._pending:
            future, args, done = self._pending.popleft()
            if future is None and done is None:     # a helper's chunk none could take
                done = self._convert(*args)
            elif future is not None:
                try:
                    done = future.result()
                except _broken_pool():      # the helper died: convert its chunk here
                    self._helpers_lost()
                    done = self._convert(*args)
            if isinstance(done, Exception):
                raise done
            self._write(done)
