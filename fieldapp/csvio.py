"""CSV export and import of the log.

Export: RFC 4180 (comma, double quotes, CRLF), UTF-8 with a byte-order mark
so spreadsheets show µ correctly, one row per reading version, numbers in
plain decimal notation. Rows are streamed from the database, never collected.
Text cells that a spreadsheet would run as a formula are prefixed with an
apostrophe (OWASP CSV injection guidance); numeric columns stay numbers.

Import: a file made by export (the header must match); rows whose uuid is
already in the log are skipped, so logs from several tablets merge without
doubles. The whole file is checked first; its new rows are converted and
staged in short chunks and then land in one short final transaction: either
every new row lands or none does (see :func:`import_rows`).
"""
from __future__ import annotations

import csv
import io
import json
import re
import sqlite3
import unicodedata
from typing import IO, Iterator

from . import __version__, store
from .fmt import number
from .science import InputError

BOM = "\ufeff"

COLUMNS = ("site", "taken_at", "sample", "depth_cm", "value", "unit", "temp_c", "compensated",
           "ratio", "sp_pct", "texture", "salt_type", "tds_factor", "theta_g_pct", "matric_MPa",
           "meter", "replicate_group", "note", "ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa",
           "psi_s_method", "flags", "status", "void_reason", "voided_at", "supersedes_uuid",
           "uuid", "visited_by", "recorded_at", "app_version", "flag_acks")
SALT_POS = COLUMNS.index("salt_type")
#: Machine columns an export made before they existed lacks; such a file
#: still imports, the column read as empty (salt_type: schema 016).
OPTIONAL_COLUMNS = frozenset(("salt_type",))
#: Columns for a person reading the file in a spreadsheet, after the machine
#: columns above (which import reads back; these it ignores): the ratio as a
#: number and as text no spreadsheet reads as a time, the local date-time a
#: spreadsheet reads as a date (the offset stays in taken_at), and plain words
#: beside the codes (fieldapp/labels.py).
READABLE_COLUMNS = ("ratio_water_parts", "ratio_text", "taken_local", "flag_labels",
                    "ece_method_label", "psi_s_method_label", "sample_label")
#: The export's header: the machine columns, then the readable ones.
EXPORT_COLUMNS = COLUMNS + READABLE_COLUMNS
NUMERIC = {"depth_cm", "value", "temp_c", "sp_pct", "tds_factor", "theta_g_pct", "matric_MPa",
           "ec25_dS_m", "ece_dS_m", "psi_s_MPa"}
#: Characters that make a spreadsheet read a cell as a formula (OWASP CSV
#: injection guidance), with their full-width and small forms, which some
#: spreadsheets fold to the ASCII ones.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r",
                  "\uff1d", "\uff0b", "\uff0d", "\uff20",      # full width ＝＋－＠
                  "\ufe66", "\ufe62", "\ufe63", "\ufe6b")      # small ﹦﹢﹣﹫


def plain_number(x) -> str:
    """A CSV cell: the one formatter with every digit (shortest exact text,
    never 1e-05), empty for missing."""
    return number(x, None, missing="")


_FORMULA_FIRST = frozenset(_FORMULA_START)


def _invisible(c: str) -> bool:
    """A character that shows nothing before a formula sign: spaces, controls,
    format characters (zero-width space, joiners, direction marks, BOM)."""
    return c.isspace() or unicodedata.category(c) in ("Cc", "Cf", "Zs", "Zl", "Zp")


def _formula_like(s: str) -> bool:
    for c in s:                     # stops at the first visible character
        if c in _FORMULA_FIRST:
            return True
        if not _invisible(c):
            return False
    return False


#: Text a spreadsheet opening the CSV with default settings turns into a number,
#: a date or a time and writes back changed: 1:5 -> 01:05:00 AM, 3/4 -> 03/04/26,
#: 007 -> 7, 1e5 -> 1.00E+05, 2026-08-03 -> a date. Checked with LibreOffice
#: Calc 7 (en-US import); only digits, separators and an am/pm or exponent.
_CONVERTIBLE_RE = re.compile(r"[\s\d:/.,%-]*\d[\s\d:/.,%-]*(?:[eE][+-]?\d+)?\s*(?:[aApP]\.?[mM]\.?)?\s*")
#: Number text a spreadsheet keeps as it was typed.
_PLAIN_DECIMAL_RE = re.compile(r"(?:0|[1-9]\d{0,14})(?:\.\d*[1-9])?")


def _spreadsheet_converts(s: str) -> bool:
    """True for text a spreadsheet would read as a number, date or time and so
    write back in another form (the ratio 1:5 becoming the time 01:05)."""
    if len(s) > 60 or not _CONVERTIBLE_RE.fullmatch(s):
        return False
    return not _PLAIN_DECIMAL_RE.fullmatch(s)


def _needs_prefix(s: str) -> bool:
    return s[:1] == "'" or _formula_like(s) or _spreadsheet_converts(s)


def neutralize(text) -> str:
    """Prefix with an apostrophe text a spreadsheet would treat as a formula
    (also behind invisible leading characters), text it would turn into a
    number, date or time (a ratio ``1:5`` exports as ``'1:5``, kept as text
    by a spreadsheet, where ``1:5`` becomes the time 01:05), and text that
    starts with an apostrophe itself, so that :func:`unneutralize` gives back
    exactly what was typed: ``'=1+1`` exports as ``''=1+1`` and imports as
    ``'=1+1``."""
    if text is None:
        return ""
    s = str(text)
    return "'" + s if _needs_prefix(s) else s


def unneutralize(text: str) -> str:
    """The inverse of :func:`neutralize` on every text it produced (and on
    files of earlier versions, which prefixed formulas only)."""
    if text.startswith("'"):
        rest = text[1:]
        if _needs_prefix(rest):
            return rest
    return text


def _acks_cell(acks: list[dict]) -> str:
    """'code=note' pairs joined by ' | ' (a note's own '|' becomes '/')."""
    return " | ".join(f"{a['code']}={a['note'].replace('|', '/')}" for a in acks)


def _parse_acks(cell: str) -> list[tuple[str, str]]:
    out = []
    for part in cell.split(" | "):
        if "=" in part:
            code, note = part.split("=", 1)
            if code.strip() and note.strip():
                out.append((code.strip(), note.strip()))
    return out


def _version_cell(v) -> str:
    """app_version: a spreadsheet keeps 0.1.0 as text; only a formula is prefixed."""
    s = "" if v is None else str(v)
    return "'" + s if s[:1] == "'" or _formula_like(s) else s


def _yes_no(v) -> str:
    return "yes" if v else "no"


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
        if not cells[SALT_POS]:             # stored before schema 016: in its result JSON
            cells[SALT_POS] = store.stored_salt_type(row) or ""
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


class ReadableCells:
    """The cells of :data:`READABLE_COLUMNS` for one stored row. Labels and
    ratios repeat across a log, so each distinct text is worked out once."""

    def __init__(self):
        self._ratio: dict[str, tuple[str, str]] = {}
        self._labels: dict[tuple[str, str], str] = {}

    def ratio(self, text) -> tuple[float | None, str]:
        """(water parts N, "1 to N") of a stored ratio text; (None, "") if none."""
        if not text:
            return None, ""
        got = self._ratio.get(text)
        if got is None:
            from .forms import parse_ratio
            try:
                n = parse_ratio(text)
                got = (n, "1 to " + plain_number(n))
            except InputError:
                got = (None, "")
            self._ratio[text] = got
        return got

    def label(self, kind: str, key) -> str:
        if not key:
            return ""
        k = (kind, str(key))
        got = self._labels.get(k)
        if got is None:
            from . import labels
            if kind == "flags":
                got = "; ".join(labels.flag_label(c) for c in str(key).split(";") if c)
            else:
                got = getattr(labels, kind)(key)
            self._labels[k] = got
        return got

    @staticmethod
    def local_time(taken_at):
        """taken_at's wall-clock time at its own offset, as a datetime (None if
        unreadable)."""
        import datetime as dt
        try:
            return dt.datetime.fromisoformat(str(taken_at)).replace(tzinfo=None)
        except (TypeError, ValueError):
            return None

    def __call__(self, row) -> list[str]:
        n, text = self.ratio(row["ratio"])
        t = self.local_time(row["taken_at"])
        return [plain_number(n), text, t.strftime("%Y-%m-%d %H:%M:%S") if t else "",
                neutralize(self.label("flags", row["flags"])),
                neutralize(self.label("method_label", row["ece_method"])),
                neutralize(self.label("route_label", row["psi_s_method"])),
                neutralize(self.label("sample_label", row["sample"]))]


def _acks_or_none(conn, rid: int) -> list[dict]:
    try:
        return store.acks_for_readings(conn, [rid])[rid]
    except sqlite3.DatabaseError:
        return []


def export(conn, out: IO[str], site_id: int | None = None,
           report: dict | None = None) -> None:
    for piece in export_lines(conn, site_id, report=report):
        out.write(piece)


class ImportError_(InputError):
    pass


_CODE_RE = re.compile(r"^[a-z][a-z0-9_]{0,59}$")
_VERSION_RE = re.compile(r"^[0-9A-Za-z.+_-]{1,40}$")
#: Text cells the reading itself does not validate, with their longest length.
_TEXT_MAX = {"void_reason": 2000, "ece_method": 200, "psi_s_method": 200}


def _num(cell: str, line: int, col: str):
    """A number cell, read by the API's own rule (ASCII digits, a decimal comma
    only when unambiguous, no 1_000, nothing that underflows to 0)."""
    if cell == "":
        return None
    from .records import FIELD_TEXT_MAX, check_number_text
    from .forms import parse_number
    if len(cell) > FIELD_TEXT_MAX:
        raise ImportError_(f"line {line}: {col} is {len(cell)} characters long; that is "
                           "not a number.", col)
    try:
        check_number_text(cell, col)
        return parse_number(cell, col)
    except InputError as e:
        raise ImportError_(f"line {line}: {col}: {e.message}", col) from None


def _timestamp(cell: str, line: int, col: str) -> str | None:
    """voided_at, recorded_at: an ISO 8601 time with its UTC offset, or empty."""
    if cell == "":
        return None
    import datetime as dt
    try:
        t = dt.datetime.fromisoformat(cell.strip().replace("Z", "+00:00"))
    except ValueError:
        t = None
    if t is None or t.tzinfo is None or not (1990 <= t.year <= 2200) or len(cell) > 40:
        raise ImportError_(f"line {line}: {col} {cell[:40]!r} is not a time like "
                           "2026-05-14T09:30:00+00:00.", col)
    return t.isoformat(timespec="seconds")


def _check_text_cells(r: dict, line: int) -> None:
    for col, limit in _TEXT_MAX.items():
        if len(r[col]) > limit:
            raise ImportError_(f"line {line}: {col} is at most {limit} characters.", col)
    codes = [c for c in r["flags"].split(";") if c] if r["flags"] else []
    bad = [c for c in codes if not _CODE_RE.match(c)]
    if bad:
        raise ImportError_(f"line {line}: flags {bad[0][:40]!r} is not a flag code "
                           "(codes look like unit_slip, joined by ';').", "flags")
    r["flags"] = ";".join(codes)
    if r["app_version"] and not _VERSION_RE.match(r["app_version"]):
        raise ImportError_(f"line {line}: app_version {r['app_version'][:40]!r} is not a "
                           "version number.", "app_version")
    acks = _parse_acks(r["flag_acks"]) if r["flag_acks"] else []
    if r["flag_acks"].strip() and not acks:
        raise ImportError_(f"line {line}: flag_acks must be code=note pairs joined by ' | '.",
                           "flag_acks")
    for code, note in acks:
        if code not in codes:
            raise ImportError_(f"line {line}: flag_acks acknowledges {code[:40]!r}, which is "
                               "not one of the reading's flags.", "flag_acks")
        if len(note) > 2000:
            raise ImportError_(f"line {line}: an acknowledgement note is at most 2000 "
                               "characters.", "flag_acks")
    if r["status"] == "void" and not " ".join(r["void_reason"].split()):
        raise ImportError_(f"line {line}: a void reading needs its void_reason.",
                           "void_reason")
    if r["status"] != "void" and (r["void_reason"] or r["voided_at"]):
        raise ImportError_(f"line {line}: void_reason and voided_at belong to void "
                           "readings only.", "void_reason")


def read_export(src: IO[str]) -> list[dict]:
    """Parse and check a whole export file; raise ImportError_ on the first bad line.
    Every cell gets the API's validation (the reading's own fields are checked
    again when it is built); the links between rows are checked later, once
    every row is read, by :func:`import_rows`."""
    text = src.read()
    if text.startswith(BOM):
        text = text[1:]
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader)
    except StopIteration:
        raise ImportError_("The file is empty; choose a fieldapp log export.", "file") from None
    except csv.Error as e:
        raise ImportError_(f"This is not a CSV file ({e}).", "file") from None
    header, reader = _after_spreadsheet(header, reader)
    missing = [c for c in COLUMNS if c not in header and c not in OPTIONAL_COLUMNS]
    if missing:
        raise ImportError_("This is not a fieldapp log export: missing columns "
                           + ", ".join(missing[:6]) + (" …" if len(missing) > 6 else "")
                           + ". Nothing was imported.", "file")
    idx = {c: header.index(c) for c in COLUMNS if c in header}
    rows = []
    try:
        for line, cells in enumerate(reader, start=2):
            if not cells or cells == [""]:
                continue
            if len(cells) != len(header):
                raise ImportError_(f"line {line}: {len(cells)} cells, the header has "
                                   f"{len(header)}. Nothing was imported.", "file")
            r = {}
            for c in COLUMNS:
                if c not in idx:                # an optional column the file lacks
                    r[c] = ""
                    continue
                cell = cells[idx[c]]
                r[c] = _num(cell, line, c) if c in NUMERIC else unneutralize(cell)
            if r["value"] is None or not r["unit"] or not r["uuid"] or not r["site"]:
                raise ImportError_(f"line {line}: site, value, unit and uuid are required.",
                                   "file")
            if r["compensated"] not in ("yes", "no"):
                raise ImportError_(f"line {line}: compensated must be yes or no.", "file")
            if r["status"] not in ("current", "corrected", "void"):
                raise ImportError_(f"line {line}: unknown status {r['status'][:40]!r}.",
                                   "file")
            for c in ("voided_at", "recorded_at"):
                r[c] = _timestamp(r[c], line, c)
            _check_text_cells(r, line)
            r["_line"] = line
            rows.append(r)
    except csv.Error as e:
        raise ImportError_(f"The file is not valid CSV ({e}). Nothing was imported.",
                           "file") from None
    return rows


def _after_spreadsheet(header: list[str], reader) -> tuple[list[str], Iterator[list[str]]]:
    """The header and rows with what a spreadsheet did on open and save undone
    (:func:`fieldapp.roundtrip.restore`), or refused naming the columns that
    can no longer be trusted."""
    from . import roundtrip
    try:
        body = list(reader)
    except csv.Error as e:
        raise ImportError_(f"The file is not valid CSV ({e}). Nothing was imported.",
                           "file") from None
    try:
        header, body = roundtrip.restore(header, body, NUMERIC)
    except roundtrip.Untrusted as e:
        raise ImportError_(f"{e} Nothing was imported.", e.columns[0]) from None
    return header, iter(body)


IMPORT_CHUNK = 2000


def _payload(r: dict) -> dict:
    return {"uuid": r["uuid"], "site": r["site"], "sample": r["sample"],
            "value": r["value"], "unit": r["unit"], "temp_c": r["temp_c"],
            "compensated": r["compensated"] == "yes", "ratio": r["ratio"],
            "sp": r["sp_pct"], "texture": r["texture"], "salt_type": r["salt_type"] or None,
            "tds_factor": r["tds_factor"], "theta_g_pct": r["theta_g_pct"],
            "matric_MPa": r["matric_MPa"], "depth_cm": r["depth_cm"],
            "meter": r["meter"], "replicate_group": r["replicate_group"],
            "note": r["note"], "taken_at": r["taken_at"],
            "visited_by": r["visited_by"], "supersedes": r["supersedes_uuid"] or None}


def _site_key(name) -> str:
    return " ".join(str(name or "").split()).casefold()


def _refuse(msg: str, field: str = "file"):
    raise ImportError_(msg + " Nothing was imported.", field)


def plan_import(conn, rows: list[dict]) -> tuple[list[dict], list[dict], dict]:
    """Check a whole file against itself and the log, before anything is written.

    Returns (new rows in an order where every reading comes before its
    correction, rows already in the log, what the log holds of each uuid the
    file names). Links are resolved over the whole file, so the rows may come
    in any order (a spreadsheet sort). Refused, naming the lines: a uuid twice
    with different content, a uuid the log holds for a different reading
    (the API's 409), a correction of itself, a circle of corrections, a
    correction onto another site, two corrections of one reading, a
    correction of a reading the log already has corrected or void, a
    correction of a reading that is nowhere, and a row whose status says the
    opposite of what the file shows."""
    by_uuid: dict[str, dict] = {}
    for r in rows:
        if not isinstance(r["uuid"], str) or not r["uuid"].strip():
            _refuse(f"line {r['_line']}: the uuid is missing.")
        r["uuid"] = r["uuid"].strip()
        r["supersedes_uuid"] = (r["supersedes_uuid"] or "").strip() or None
        first = by_uuid.get(r["uuid"])
        if first is not None:
            same = all(first[c] == r[c] for c in COLUMNS if c not in ("status",))
            if not same:
                _refuse(f"lines {first['_line']} and {r['_line']} carry the same uuid "
                        f"{r['uuid']} for different readings.")
            r["_duplicate"] = True
            continue
        by_uuid[r["uuid"]] = r
    unique = [r for r in rows if not r.get("_duplicate")]
    named = set(by_uuid) | {r["supersedes_uuid"] for r in unique if r["supersedes_uuid"]}
    stored = store.readings_brief(conn, named)
    known, fresh = [], []
    for r in unique:
        s = stored.get(r["uuid"])
        if s is None:
            fresh.append(r)
            continue
        if (_site_key(s["site"]) != _site_key(r["site"]) or s["value"] != r["value"]
                or s["unit"] != r["unit"].strip()
                or (s["supersedes_uuid"] or None) != r["supersedes_uuid"]):
            raise ImportError_(
                f"line {r['_line']}: the log already holds uuid {r['uuid']} for a different "
                f"reading ({s['site']}, {plain_number(s['value'])} {s['unit']}); the stored "
                "one is kept. Nothing was imported.", "uuid")
        known.append(r)
    fresh_uuids = {r["uuid"] for r in fresh}
    child_of: dict[str, dict] = {}      # target uuid -> the row that corrects it
    for r in unique:
        t = r["supersedes_uuid"]
        if t is None:
            continue
        if t == r["uuid"]:
            _refuse(f"line {r['_line']}: the reading {t} corrects itself.")
        if t in child_of:
            _refuse(f"lines {child_of[t]['_line']} and {r['_line']} both correct {t}; a "
                    "reading has one correction (correct the newest version).")
        child_of[t] = r
    for r in fresh:
        t = r["supersedes_uuid"]
        if t is None:
            continue
        if t in by_uuid:
            target = by_uuid[t]
            where = f"line {target['_line']}"
        elif t in stored:
            target = stored[t]
            where = "the log"
            if target["status"] != "current":
                _refuse(f"line {r['_line']} corrects {t}, which the log already has "
                        f"{target['status']}; correct the newest version instead.")
        else:
            _refuse(f"line {r['_line']} corrects {t}, which is neither in the file nor in "
                    "the log.")
        if _site_key(target["site"]) != _site_key(r["site"]):
            _refuse(f"line {r['_line']} corrects a reading of another site ({where}: "
                    f"{target['site']!r}, this line: {r['site']!r}); a correction stays on "
                    "the same site.")
    # circles: every row has at most one target and one correction, so a walk
    # from each new row either ends outside the new rows or comes back to it
    depth: dict[str, int] = {}
    for r in fresh:
        path, u = [], r["uuid"]
        while u in fresh_uuids and u not in depth:
            if u in path:
                lines = sorted(by_uuid[x]["_line"] for x in path[path.index(u):])
                _refuse("lines " + ", ".join(map(str, lines)) + " correct one another in a "
                        "circle; one of them must be the first reading.")
            path.append(u)
            u = by_uuid[u]["supersedes_uuid"]
        base = depth.get(u, -1) if u in fresh_uuids else -1
        for x in reversed(path):
            base += 1
            depth[x] = base
    for r in fresh:
        kid = child_of.get(r["uuid"])
        if r["status"] == "corrected" and kid is None and \
                not (r["uuid"] in stored and stored[r["uuid"]]["corrected_by_uuid"]):
            _refuse(f"line {r['_line']} says corrected, but no line corrects it; the "
                    "correction is missing from the file.")
        if r["status"] != "corrected" and kid is not None:
            _refuse(f"line {r['_line']} says {r['status']}, but line {kid['_line']} "
                    "corrects it.")
    order = sorted(fresh, key=lambda r: (depth[r["uuid"]], r["_line"]))
    return order, known, stored


def import_rows(conn, rows: list[dict]) -> dict:
    """Merge rows into the log, the whole file or nothing of it. Returns counts.

    The whole file is checked first (:func:`plan_import`): links between rows
    are resolved after every row is read, so any row order gives the same log.
    New rows are converted in chunks by the vectorized core (the result shown
    for each reading); the numbers computed where the reading was taken are
    kept as exported, so a merged log shows the same figures as its source.

    A long file never holds the log's write lock for long: each converted
    chunk is staged (``import_staging``) in its own short transaction, while
    saves from tablets go on between chunks, and one short final transaction
    moves the staged rows into ``readings`` (and adds the file's voids and
    acknowledgements). Staged rows are not readings: a run killed midway has
    added nothing, and running the same file again carries on from the last
    staged chunk (the job is named by a digest of the rows it adds). Called
    inside a caller's open transaction it all happens in that transaction."""
    order, known, _ = plan_import(conn, rows)
    skipped = len(rows) - len(order)
    depth = _depths(order)
    job = _import_job(conn, order)
    try:
        for k in range(job["rows_staged"], len(order), IMPORT_CHUNK):
            chunk = order[k:k + IMPORT_CHUNK]
            recs = _convert_chunk(chunk)
            with store.transaction(conn):
                store.stage_import_rows(conn, job["id"], k, [(depth[r["uuid"]], rec)
                                                             for r, rec in zip(chunk, recs)])
        with store.transaction(conn):
            clash = store.import_clashes(conn, job["id"])
            if clash is None:
                try:
                    added = store.finish_import_job(conn, job["id"])
                except store.StoreError as e:
                    raise ImportError_(f"{e.message} Nothing was imported.", e.field) from None
                voids = _merge_acks_and_voids(conn, order + known)
    except InputError:
        # a refused file leaves nothing staged (a kill leaves its chunks to resume)
        with store.transaction(conn):
            store.drop_import_job(conn, job["id"])
        raise
    if clash is not None:
        with store.transaction(conn):
            store.drop_import_job(conn, job["id"])
        raise ImportError_(f"The log changed while the file was imported ({clash}); "
                           "nothing was imported. Run the import again.", "file")
    return {"added": added, "skipped": skipped, "voided": voids}


def _depths(order: list[dict]) -> dict[str, int]:
    """How many rows of this file each new row sits above in its chain of
    corrections (0: it corrects nothing in the file); ``order`` lists every
    reading before its correction."""
    depth: dict[str, int] = {}
    for r in order:
        t = r["supersedes_uuid"]
        depth[r["uuid"]] = depth[t] + 1 if t in depth else 0
    return depth


def _import_job(conn, order: list[dict]) -> dict:
    """The staging job of these new rows: one left by a killed run of the same
    rows (to carry on), else a new one."""
    import hashlib
    h = hashlib.sha256()
    for r in order:
        h.update("\x1f".join(str(r.get(c, "")) for c in COLUMNS).encode("utf-8", "replace"))
        h.update(b"\x1e")
    with store.transaction(conn):
        return store.import_job(conn, h.hexdigest(), len(order))


def _convert_chunk(chunk: list[dict]) -> list[dict]:
    from .records import build_record, check_fields
    from .records import RowInputError, convert_readings
    payloads = [_payload(r) for r in chunk]
    for r, p in zip(chunk, payloads):
        try:
            check_fields(p)
        except InputError as e:
            raise ImportError_(f"line {r['_line']}: {e.message} Nothing was "
                               "imported.", e.field) from None
    try:
        results = convert_readings(payloads)
    except RowInputError as e:
        raise ImportError_(f"line {chunk[e.index]['_line']}: {e.message} Nothing "
                           "was imported.", e.field) from None
    recs = []
    for r, payload, result in zip(chunk, payloads, results):
        result["imported"] = True
        try:
            rec = build_record(payload, result=result)
        except (InputError, store.StoreError) as e:
            raise ImportError_(f"line {r['_line']}: {e.message} Nothing was "
                               "imported.", getattr(e, "field", None)) from None
        for c in ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa",
                  "psi_s_method", "recorded_at"):
            rec[c] = r[c] if r[c] != "" else None
        rec["flags"] = r["flags"]
        rec["app_version"] = r["app_version"] or __version__
        rec["supersedes_uuid"] = r["supersedes_uuid"]
        recs.append(rec)
    return recs


def _merge_acks_and_voids(conn, rows: list[dict]) -> int:
    """Acknowledgements and voids the file carries that the log lacks."""
    wanted = [r for r in rows if r["flag_acks"] or r["status"] == "void"]
    brief = store.readings_brief(conn, [r["uuid"] for r in wanted])
    acks = store.acks_for_readings(conn, [brief[r["uuid"]]["id"] for r in wanted])
    voids = 0
    for r in wanted:
        b = brief[r["uuid"]]
        if r["flag_acks"]:
            have = {a["code"] for a in acks[b["id"]]}
            for code, note in _parse_acks(r["flag_acks"]):
                if code not in have:
                    store.insert_ack(conn, b["id"], code, note)
                    have.add(code)
        if r["status"] == "void" and b["status"] == "current":
            store.insert_void(conn, b["id"], " ".join(r["void_reason"].split()),
                              r["voided_at"] or None)
            voids += 1
    return voids


def import_csv(conn, src: IO[str]) -> dict:
    try:
        rows = read_export(src)
    except ImportError_ as e:
        if "Nothing was imported" in e.message:
            raise
        raise ImportError_(e.message + " Nothing was imported.", e.field) from None
    return import_rows(conn, rows)
