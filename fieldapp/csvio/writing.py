"""Export: the log as CSV text, streamed piece by piece."""
from __future__ import annotations

import csv
import io
import sqlite3
from typing import IO, Iterator

from .. import store
from ..csvtext import csv_quoted
from .cells import (ReadableCells, _acks_cell, _version_cell, _yes_no, neutralize,
                    neutralize_all, plain_number, plain_numbers)
from .columns import BOM, COLUMNS, EXPORT_COLUMNS, NUMERIC


def export_lines(conn, site_id: int | None = None, rows_per_piece: int = 1000,
                 report: dict | None = None) -> Iterator[str]:
    """Yield the CSV text piece by piece: BOM + header, then a batch of rows
    at a time. The cells are made a column at a time, each distinct value of a
    column once (:class:`_Memo`), and quoted as csv.writer would quote them
    (:func:`fieldapp.csvtext.csv_quoted`), so a line is its cells joined: the same text
    csv.writer writes, without a second look at every character. Rows are
    read in keyset batches of plain tuples; on a damaged log every readable
    row comes out and ``report["skipped"]`` counts the ids that could not be
    read."""
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\r\n").writerow(EXPORT_COLUMNS)
    yield BOM + buf.getvalue()
    try:
        acked = store.acked_reading_ids(conn)
    except sqlite3.DatabaseError:           # a damaged log: export the readings anyway
        acked = set()
    select = store.export_select()
    shape = conn.execute(select + " LIMIT 0")
    names = getattr(shape, "names", None) or [d[0] for d in shape.description]
    columns = _Columns(conn, acked, names)
    for piece in store.iter_reading_batches(conn, site_id=site_id, report=report,
                                            batch=rows_per_piece, select=select, tuples=True):
        yield "\r\n".join(map(",".join, zip(*columns(piece)))) + "\r\n"


class _Memo:
    """``f`` once per distinct value of a column, remembering at most
    ``limit`` values (a column of unique texts keeps memory flat); a column
    whose values are mostly new (uuids, times) is just mapped."""

    def __init__(self, f, limit: int = 4096, text_only: bool = False, bulk=None):
        self.f, self.limit, self.text_only = f, limit, text_only
        self.bulk = bulk or (lambda col: list(map(f, col)))     # f of a whole column
        self.seen: dict = {}
        self.direct = False

    def __call__(self, col) -> list:
        if self.direct:
            return self.bulk(col)
        seen = self.seen
        out = list(map(seen.get, col))
        if None not in out:             # every value met before (f never gives None)
            return out
        new = set(col).difference(seen)
        if len(new) * 2 > len(col) > 100:
            self.direct, self.seen = True, {}
            return self.bulk(col)
        if self.text_only and any(v is not None and type(v) is not str for v in new):
            return self.bulk(col)           # 1 and 1.0 would share a key
        if len(seen) + len(new) > self.limit:
            seen.clear()
            new = set(col)
        for v in new:
            seen[v] = self.f(v)
        return list(map(seen.__getitem__, col))


class _Columns:
    """The export's columns, in :data:`EXPORT_COLUMNS` order, for a piece of
    stored rows (tuples of ``store.export_select``'s columns, named by
    ``names``), each cell as CSV text (quoted where csv.writer would)."""

    def __init__(self, conn, acked: set, names: list[str]):
        self.conn, self.acked = conn, acked
        self.pos = {k: i for i, k in enumerate(names)}
        self.readable = ReadableCells()
        # Numbers, yes/no and versions never hold a comma, quote or line
        # break; the text columns are quoted a column at a time.
        self.cells = {c: _Memo(plain_number, bulk=plain_numbers) if c in NUMERIC else
                      _Memo(_yes_no) if c == "compensated" else
                      _Memo(_version_cell, text_only=True) if c == "app_version" else
                      _Memo(neutralize, text_only=True, bulk=neutralize_all)
                      for c in COLUMNS if c != "flag_acks"}     # built from its own rows
        self.text = {c for c in COLUMNS if c not in NUMERIC and c != "compensated"}
        r = self.readable
        self.ratio = _Memo(r.ratio)
        self.local = r.local_texts                  # a time is seldom repeated
        # A label is quoted once, when first made.
        self.labels = {k: _Memo(lambda v, k=k: csv_quoted([neutralize(r.label(k, v))])[0])
                       for k in ("flags", "method_label", "route_label", "sample_label")}

    def _acks(self, ids) -> list[str]:
        return [neutralize(_acks_cell(_acks_or_none(self.conn, rid))) if rid in self.acked
                else "" for rid in ids]

    def __call__(self, piece) -> list[list[str]]:
        by_pos = list(zip(*piece))
        col = {k: by_pos[i] for k, i in self.pos.items()}
        out = [csv_quoted(self._acks(col["id"])) if c == "flag_acks" else
               csv_quoted(self.cells[c](col[c])) if c in self.text else self.cells[c](col[c])
               for c in COLUMNS]          # salt_type: worked out by store.export_select
        ratios = self.ratio(col["ratio"])
        out.append([plain_number(n) for n, _ in ratios])
        out.append(csv_quoted([text for _, text in ratios]))
        out.append(self.local(col["taken_at"]))
        out.append(self.labels["flags"](col["flags"]))
        out.append(self.labels["method_label"](col["ece_method"]))
        out.append(self.labels["route_label"](col["psi_s_method"]))
        out.append(self.labels["sample_label"](col["sample"]))
        return out


def _acks_or_none(conn, rid: int) -> list[dict]:
    try:
        return store.acks_for_readings(conn, [rid])[rid]
    except sqlite3.DatabaseError:
        return []


def export(conn, out: IO[str], site_id: int | None = None,
           report: dict | None = None) -> None:
    for piece in export_lines(conn, site_id, report=report):
        out.write(piece)
