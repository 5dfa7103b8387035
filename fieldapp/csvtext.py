"""CSV cells as csv.writer writes them (QUOTE_MINIMAL, excel dialect, CRLF
lines), a column at a time: the CSV export and convert-csv make each line by
joining its cells, and quote a column's cells here first, so the text is the
same as csv.writer's without a second look at every character of every row."""
from __future__ import annotations

import re

#: A cell csv.writer quotes: one holding a comma, a double quote or a line break.
NEEDS_QUOTES_RE = re.compile(r'[,"\r\n]')
#: A quote or a line break: a joined column without one, and with exactly one
#: comma between cells, holds no cell that needs quotes.
QUOTE_OR_BREAK_RE = re.compile(r'["\r\n]')


def csv_quoted(col) -> list[str]:
    """A column of text cells as csv.writer writes each: None as empty, a
    cell with a comma, quote or line break in quotes with its quotes doubled.
    The usual column needs none, which one search of the joined column shows.

    >>> csv_quoted(["a", 'say "hi" now', "1,5", None])
    ['a', '"say ""hi"" now"', '"1,5"', '']
    """
    try:
        joined = ",".join(col)
    except TypeError:
        col = ["" if c is None else str(c) for c in col]
        joined = ",".join(col)
    if joined.count(",") == len(col) - 1 and not QUOTE_OR_BREAK_RE.search(joined):
        return col if isinstance(col, list) else list(col)
    return ['"' + c.replace('"', '""') + '"' if NEEDS_QUOTES_RE.search(c) else c for c in col]
