"""Export: the log as CSV text, streamed piece by piece."""
from __future__ import annotations

import csv
import io
import sqlite3
from typing import IO, Iterator

from .. import store
from .cells import (ReadableCells, _acks_cell, _version_cell, _yes_no, neutralize,
                    plain_number)
from .columns import BOM, COLUMNS, EXPORT_COLUMNS, NUMERIC


def export_lines(conn, site_id: int | None = None, rows_per_piece: int = 500,
                 report: dict | None = None) -> Iterator[str]:
    """Yield the CSV text piece by piece: BOM + header, then a few hundred rows
    at a time. Each column's formatter is chosen once, not per cell. Rows are
    read in keyset batches; on a damaged log every readable row comes out and
    ``report["skipped"]`` counts the ids that could not be read."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(EXPORT_COLUMNS)
    yield BOM + buf.getvalue()
    try:
        acked = store.acked_reading_ids(conn)
    except sqlite3.DatabaseError:           # a damaged log: export the readings anyway
        acked = set()
    formatters = [plain_number if c in NUMERIC else _yes_no if c == "compensated"
                  else _version_cell if c == "app_version" else neutralize
                  for c in COLUMNS[:-1]]          # the last column, flag_acks, is built apart
    idx = None
    pending = 0
    readable = ReadableCells()
    buf.seek(0)
    buf.truncate()
    for row in store.iter_readings_keyset(conn, site_id=site_id, report=report):
        if idx is None:
            keys = row.keys()
            idx = [keys.index(c) for c in COLUMNS[:-1]]
            id_pos = keys.index("id")
        cells = [f(row[i]) for f, i in zip(formatters, idx)]
        rid = row[id_pos]
        cells.append(neutralize(_acks_cell(_acks_or_none(conn, rid))) if rid in acked else "")
        cells.extend(readable(row))
        w.writerow(cells)
        pending += 1
        if pending >= rows_per_piece:
            yield buf.getvalue()
            buf.seek(0)
            buf.truncate()
            pending = 0
    if pending:
        yield buf.getvalue()


def _acks_or_none(conn, rid: int) -> list[dict]:
    try:
        return store.acks_for_readings(conn, [rid])[rid]
    except sqlite3.DatabaseError:
        return []


def export(conn, out: IO[str], site_id: int | None = None,
           report: dict | None = None) -> None:
    for piece in export_lines(conn, site_id, report=report):
        out.write(piece)
