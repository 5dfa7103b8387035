"""Keyset paging: every list is paged with ``limit`` and ``after``."""
from __future__ import annotations

import json
import sqlite3
from typing import Iterator

from .core import StoreError, dialect
from .readings import _READING_SELECT, _reading_filters
from .sites import list_sites


def iter_readings_keyset(conn, site_id: int | None = None, batch: int = 500,
                         skip_damaged: bool = True, report: dict | None = None,
                         select: str = _READING_SELECT) -> Iterator[sqlite3.Row]:
    """Every reading version in id order, fetched in keyset batches (``id > last``),
    each batch its own short read: a long export never holds one read open.

    With ``skip_damaged`` a batch that SQLite cannot read (a damaged page) is
    stepped over one id at a time, so an export of a damaged log rescues every
    row that can still be read; ``report["skipped"]`` counts the ids passed over.
    ``select``: the reading query, or a narrower one of the same joins
    (``export_select``)."""
    for rows in iter_reading_batches(conn, site_id, batch, skip_damaged, report, select):
        yield from rows


def iter_reading_batches(conn, site_id: int | None = None, batch: int = 500,
                         skip_damaged: bool = True, report: dict | None = None,
                         select: str = _READING_SELECT, tuples: bool = False) -> Iterator[list]:
    """:func:`iter_readings_keyset` a batch at a time, each a list of rows;
    with ``tuples`` plain tuples in the order of ``select``'s columns (whose
    first is ``r.id``), which a bulk reader (the CSV export) takes a column
    at a time without making a Row of each."""
    where = " AND r.site_id = ?" if site_id is not None else ""
    sql = select + " WHERE r.id > ?" + where + " ORDER BY r.id LIMIT ?"
    one = select + " WHERE r.id = ?" + where
    last, skipped, top = 0, 0, None
    cur = conn                          # PostgreSQL's rows are tuples already
    if tuples and isinstance(conn, sqlite3.Connection):
        cur = conn.cursor()
        cur.row_factory = None
    while True:
        args = [last] + ([site_id] if site_id is not None else []) + [batch]
        try:
            rows = cur.execute(sql, args).fetchall()
        except sqlite3.DatabaseError:
            if not skip_damaged or dialect(conn) == "postgresql":
                raise          # PostgreSQL has no damaged pages to step over: report it
            if top is None:
                try:
                    top = conn.execute("SELECT max(id) FROM readings").fetchone()[0] or 0
                except sqlite3.DatabaseError:
                    top = last + 1_000_000
            rows = []
            while not rows and last < top:
                last += 1
                try:
                    rows = cur.execute(one, [last] + ([site_id] if site_id is not None
                                                      else [])).fetchall()
                except sqlite3.DatabaseError:
                    skipped += 1
            if report is not None:
                report["skipped"] = skipped
            if not rows:
                return
        if not rows:
            return
        yield rows
        last = rows[-1][0] if tuples else rows[-1]["id"]


# ---- keyset paging (every list is paged: ``limit`` and ``after``)

#: Page size when the caller names none, and the most one page may hold.
PAGE_DEFAULT = 50
PAGE_MAX = 100


class PageError(StoreError):
    """A ``limit`` or ``after`` that cannot be used (400 naming the field)."""


def page_limit(value, default: int = PAGE_DEFAULT, most: int = PAGE_MAX) -> int:
    """``limit`` from a query string: a whole number 1..``most``."""
    if value is None or value == "":
        return default
    text = str(value).strip()
    if not (text.isascii() and text.isdigit()) or len(text) > 6 or not 1 <= int(text) <= most:
        raise PageError(f"limit must be a whole number from 1 to {most}.", "limit")
    return int(text)


def encode_cursor(*parts) -> str:
    """A page cursor: the sort key of the last row shown, as URL-safe text."""
    import base64
    raw = json.dumps(list(parts), separators=(",", ":"), ensure_ascii=False)
    return base64.urlsafe_b64encode(raw.encode("utf-8")).decode("ascii").rstrip("=")


def decode_cursor(text, shape: tuple) -> list:
    """The sort key in a cursor; ``shape`` gives the type of each part
    (str or int). Anything else answers 400 (field ``after``)."""
    import base64
    bad = PageError("after is not a cursor this server gave (take it from the 'next' link).",
                    "after")
    if not isinstance(text, str) or not text or len(text) > 1000:
        raise bad
    try:
        raw = base64.urlsafe_b64decode(text + "=" * (-len(text) % 4))
        parts = json.loads(raw.decode("utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise bad from None
    if not isinstance(parts, list) or len(parts) != len(shape) or not all(
            type(p) is t for p, t in zip(parts, shape)):
        raise bad
    return parts




def readings_page(conn, site_id: int | None = None, sample: str | None = None,
                  date_from: str | None = None, date_to: str | None = None,
                  limit: int = PAGE_DEFAULT, after: str | None = None
                  ) -> tuple[list[sqlite3.Row], str | None]:
    """One page of readings (every version), newest first by (taken_at, id),
    and the cursor of the next page (None on the last one).

    Keyset paging: the next page starts strictly after the last row's
    (taken_at, id), so pages never repeat or skip a row, however many
    readings are saved between two pages (rows are never updated or deleted,
    so a row's key never moves). A reading saved meanwhile with a later time
    shows on a fresh first page."""
    where, args = _reading_filters(site_id, sample, date_from, date_to)
    if after is not None:
        taken, rid = decode_cursor(after, (str, int))
        where.append("(r.taken_at, r.id) < (?, ?)")
        args += [taken, rid]
    # Pick the page's ids through the index first, then join for those only.
    ids = [r[0] for r in conn.execute(
        "SELECT r.id FROM readings r" + (" WHERE " + " AND ".join(where) if where else "")
        + " ORDER BY r.taken_at DESC, r.id DESC LIMIT ?", args + [limit + 1])]
    more = len(ids) > limit
    ids = ids[:limit]
    if not ids:
        return [], None
    rows = conn.execute(_READING_SELECT + f" WHERE r.id IN ({','.join('?' * len(ids))})"
                        " ORDER BY r.taken_at DESC, r.id DESC", ids).fetchall()
    nxt = encode_cursor(rows[-1]["taken_at"], rows[-1]["id"]) if more else None
    return rows, nxt


def sites_page(conn, limit: int = PAGE_DEFAULT, after: str | None = None,
               counts: bool = True) -> tuple[list[sqlite3.Row], str | None]:
    """One page of :func:`list_sites` (by name, case ignored, then id; its
    ``counts``) and the next page's cursor."""
    where, args = "", []
    if after is not None:
        name, sid = decode_cursor(after, (str, int))
        where, args = "WHERE (s.name COLLATE NOCASE, s.id) > (?, ?)", [name, sid]
    rows = list_sites(conn, where=where, args=args, limit=limit + 1, counts=counts)
    more = len(rows) > limit
    rows = rows[:limit]
    nxt = encode_cursor(rows[-1]["name"], rows[-1]["id"]) if more and rows else None
    return rows, nxt


