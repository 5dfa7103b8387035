"""convert-csv reads its file a block of lines at a time, each block one
text, while every line is one row: a block is then cheap to hand to a
helper process (:mod:`.parallel`), whoever converts it reads its rows with
csv.reader, and one process reads a block and its rows a little faster
than csv.reader reads them from the file (49 against 58 ms per 50,000
lines). A line that ends inside a quoted cell (one holding a line break)
is not a row of its own: from its block on, the caller reads the rows with
csv.reader from the file. (Splitting each line at its commas where nothing is quoted
was tried: 62 ms, slower than csv.reader's 43.)
"""
from __future__ import annotations

import csv
import io
import time
from itertools import islice

#: Helpers are kept while this process's own chunk takes at least this many
#: times as long to convert as a block of lines takes to read: 20-26 on a
#: file of all-different readings, 8-11 where readings repeat and each
#: distinct one is converted once, which one process does faster.
HELPERS_PAY = 15

#: A line csv.reader reads as no row (skipped, and not counted).
_BLANK = frozenset(("\n", "\r\n", "\r"))


def put_line_blocks(src, in_order, shape: tuple, chunk_rows: int) -> tuple[int, list | None]:
    """Put the file's lines (``src``, after its header) into ``in_order``
    a block at a time, as text with ``shape`` (the input columns, their
    positions, the output columns) and the block's first line, while every
    line is one row. Returns (rows put, None) at the end of the file, or
    (rows put, the lines of the block where a line is not a row of its own)
    where csv.reader must go on. Helpers are stopped where they do not pay
    (:data:`HELPERS_PAY`)."""
    total = 0
    while True:
        started = time.perf_counter()
        try:
            lines = list(islice(src, chunk_rows))
        except Exception:               # not UTF-8...: the chunks before it are written first,
            in_order.finish()           # as on one core (a bad row among them comes first)
            raise
        if not lines:
            return total, None
        text = "".join(lines)
        if '"' in text and not _one_row_each([line for line in lines if '"' in line]):
            return total, lines
        n = len(lines) - sum(map(_BLANK.__contains__, lines))
        read_s = time.perf_counter() - started
        if n:
            in_order.put(text, *shape, 2 + total)
        total += n
        if in_order.jobs > 1 and in_order.own_s is not None \
                and in_order.own_s < HELPERS_PAY * read_s:
            in_order.alone()            # repeated readings: one process is faster


def _one_row_each(lines: list[str]) -> bool:
    """Whether each of these lines (those with a quote) is one whole row:
    read by csv.reader in its strict mode, a line that ends inside a quoted
    cell (which the next line would continue) raises or takes the next line
    in, so fewer rows than lines come out; a line it reads alone is read
    the same within the file."""
    try:
        return sum(1 for _ in csv.reader(lines, strict=True)) == len(lines)
    except csv.Error:
        return False


def rows_of_text(text: str) -> list[list[str]]:
    """The rows of a block of lines as csv.reader reads them, blank lines
    left out."""
    return [row for row in csv.reader(io.StringIO(text, newline="")) if row]
