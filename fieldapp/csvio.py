"""CSV export and import of the log.

Export: RFC 4180 (comma, double quotes, CRLF), UTF-8 with a byte-order mark
so spreadsheets show µ correctly, one row per reading version, numbers in
plain decimal notation. Rows are streamed from the database, never collected.
Text cells that a spreadsheet would run as a formula are prefixed with an
apostrophe (OWASP CSV injection guidance); numeric columns stay numbers.

Import: a file made by export (the header must match); rows whose uuid is
already in the log are skipped, so logs from several tablets merge without
doubles. The whole file is checked first and imported in one transaction:
either every new row lands or none does.
"""
from __future__ import annotations

import csv
import io
import json
import math
import unicodedata
from typing import IO, Iterator

from . import __version__, store
from .science import InputError

BOM = "\ufeff"

COLUMNS = ("site", "taken_at", "sample", "depth_cm", "value", "unit", "temp_c", "compensated",
           "ratio", "sp_pct", "texture", "tds_factor", "theta_g_pct", "matric_MPa", "meter",
           "replicate_group", "note", "ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa",
           "psi_s_method", "flags", "status", "void_reason", "voided_at", "supersedes_uuid",
           "uuid", "visited_by", "recorded_at", "app_version", "flag_acks")
NUMERIC = {"depth_cm", "value", "temp_c", "sp_pct", "tds_factor", "theta_g_pct", "matric_MPa",
           "ec25_dS_m", "ece_dS_m", "psi_s_MPa"}
#: Characters that make a spreadsheet read a cell as a formula (OWASP CSV
#: injection guidance), with their full-width and small forms, which some
#: spreadsheets fold to the ASCII ones.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r",
                  "\uff1d", "\uff0b", "\uff0d", "\uff20",      # full width ＝＋－＠
                  "\ufe66", "\ufe62", "\ufe63", "\ufe6b")      # small ﹦﹢﹣﹫


def plain_number(x) -> str:
    """A float in plain decimal notation, shortest exact repr (never 1e-05)."""
    if x is None:
        return ""
    x = float(x)
    if math.isnan(x) or math.isinf(x):
        return ""
    s = repr(x)
    if "e" in s or "E" in s:
        s = f"{x:.20f}".rstrip("0").rstrip(".")
        if float(s) != x:  # very small numbers: keep every significant digit
            s = format(x, ".40f").rstrip("0").rstrip(".")
    if s.endswith(".0"):
        s = s[:-2]
    return "0" if s == "-0" else s


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


def neutralize(text) -> str:
    """Prefix with an apostrophe text a spreadsheet would treat as a formula
    (also behind invisible leading characters), and text that starts with an
    apostrophe itself, so that :func:`unneutralize` gives back exactly what
    was typed: ``'=1+1`` exports as ``''=1+1`` and imports as ``'=1+1``."""
    if text is None:
        return ""
    s = str(text)
    return "'" + s if s[:1] == "'" or _formula_like(s) else s


def unneutralize(text: str) -> str:
    """The inverse of :func:`neutralize` on every text it produced."""
    if text.startswith("'"):
        rest = text[1:]
        if rest[:1] == "'" or _formula_like(rest):
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


def _yes_no(v) -> str:
    return "yes" if v else "no"


def export_lines(conn, site_id: int | None = None, rows_per_piece: int = 500) -> Iterator[str]:
    """Yield the CSV text piece by piece: BOM + header, then a few hundred rows
    at a time. Each column's formatter is chosen once, not per cell."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(COLUMNS)
    yield BOM + buf.getvalue()
    acked = store.acked_reading_ids(conn)
    formatters = [plain_number if c in NUMERIC else _yes_no if c == "compensated" else neutralize
                  for c in COLUMNS[:-1]]          # the last column, flag_acks, is built apart
    idx = None
    pending = 0
    buf.seek(0)
    buf.truncate()
    for row in store.iter_readings(conn, site_id=site_id):
        if idx is None:
            keys = row.keys()
            idx = [keys.index(c) for c in COLUMNS[:-1]]
            id_pos = keys.index("id")
        cells = [f(row[i]) for f, i in zip(formatters, idx)]
        rid = row[id_pos]
        cells.append(neutralize(_acks_cell(store.acks_for_readings(conn, [rid])[rid]))
                     if rid in acked else "")
        w.writerow(cells)
        pending += 1
        if pending >= rows_per_piece:
            yield buf.getvalue()
            buf.seek(0)
            buf.truncate()
            pending = 0
    if pending:
        yield buf.getvalue()


def export(conn, out: IO[str], site_id: int | None = None) -> None:
    for piece in export_lines(conn, site_id):
        out.write(piece)


class ImportError_(InputError):
    pass


def _num(cell: str, line: int, col: str):
    if cell == "":
        return None
    try:
        x = float(cell)
    except ValueError:
        raise ImportError_(f"line {line}: {col} {cell!r} is not a number.", col) from None
    if not math.isfinite(x):
        raise ImportError_(f"line {line}: {col} must be a finite number.", col)
    return x


def read_export(src: IO[str]) -> list[dict]:
    """Parse and check a whole export file; raise ImportError_ on the first bad line."""
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
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise ImportError_("This is not a fieldapp log export: missing columns "
                           + ", ".join(missing[:6]) + (" …" if len(missing) > 6 else "")
                           + ". Nothing was imported.", "file")
    idx = {c: header.index(c) for c in COLUMNS}
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
                cell = cells[idx[c]]
                r[c] = _num(cell, line, c) if c in NUMERIC else unneutralize(cell)
            if r["value"] is None or not r["unit"] or not r["uuid"] or not r["site"]:
                raise ImportError_(f"line {line}: site, value, unit and uuid are required.",
                                   "file")
            if r["compensated"] not in ("yes", "no"):
                raise ImportError_(f"line {line}: compensated must be yes or no.", "file")
            if r["status"] not in ("current", "corrected", "void"):
                raise ImportError_(f"line {line}: unknown status {r['status']!r}.", "file")
            r["_line"] = line
            rows.append(r)
    except csv.Error as e:
        raise ImportError_(f"The file is not valid CSV ({e}). Nothing was imported.",
                           "file") from None
    return rows


IMPORT_CHUNK = 2000


def _payload(r: dict) -> dict:
    return {"uuid": r["uuid"], "site": r["site"], "sample": r["sample"],
            "value": r["value"], "unit": r["unit"], "temp_c": r["temp_c"],
            "compensated": r["compensated"] == "yes", "ratio": r["ratio"],
            "sp": r["sp_pct"], "texture": r["texture"],
            "tds_factor": r["tds_factor"], "theta_g_pct": r["theta_g_pct"],
            "matric_MPa": r["matric_MPa"], "depth_cm": r["depth_cm"],
            "meter": r["meter"], "replicate_group": r["replicate_group"],
            "note": r["note"], "taken_at": r["taken_at"],
            "visited_by": r["visited_by"]}


def import_rows(conn, rows: list[dict]) -> dict:
    """Merge rows into the log in one transaction. Returns counts.

    New rows are converted in chunks by the vectorized core (the result shown
    for each reading); the numbers computed where the reading was taken are
    kept as exported, so a merged log shows the same figures as its source."""
    from .records import build_record
    from .science.convert import RowInputError, convert_readings
    added = skipped = voids = 0
    with store.transaction(conn):
        for k in range(0, len(rows), IMPORT_CHUNK):
            chunk = rows[k:k + IMPORT_CHUNK]
            known = store.existing_uuids(conn, [r["uuid"] for r in chunk])
            fresh = [r for r in chunk if r["uuid"] not in known]
            payloads = [_payload(r) for r in fresh]
            try:
                results = convert_readings(payloads)
            except RowInputError as e:
                raise ImportError_(f"line {fresh[e.index]['_line']}: {e.message} Nothing was "
                                   "imported.", e.field) from None
            result_of = {r["uuid"]: (p, res) for r, p, res in zip(fresh, payloads, results)}
            recs = []
            for r in chunk:
                if r["uuid"] in result_of and r["uuid"] not in known:
                    payload, result = result_of[r["uuid"]]
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
                    rec["supersedes_uuid"] = r["supersedes_uuid"] or None
                    recs.append(rec)
                    known.add(r["uuid"])
                    added += 1
                else:
                    skipped += 1
            wanted = {rec["supersedes_uuid"] for rec in recs if rec["supersedes_uuid"]}
            missing = wanted - known - store.existing_uuids(conn, wanted - known)
            if missing:
                raise ImportError_(f"The file corrects readings that are not in it nor in the "
                                   f"log ({', '.join(sorted(missing)[:3])}). Nothing was "
                                   "imported.", "file")
            try:
                store.insert_readings_bulk(conn, recs)
            except store.StoreError as e:
                raise ImportError_(f"{e.message} Nothing was imported.", e.field) from None
            for r in chunk:
                if r["flag_acks"] or r["status"] == "void":
                    row = store.get_reading(conn, r["uuid"])
                    if r["flag_acks"]:
                        have = {a["code"] for a in
                                store.acks_for_readings(conn, [row["id"]])[row["id"]]}
                        for code, note in _parse_acks(r["flag_acks"]):
                            if code not in have:
                                store.insert_ack(conn, row["id"], code, note)
                    if r["status"] == "void" and row["status"] == "current":
                        store.insert_void(conn, row["id"], r["void_reason"] or "void",
                                          r["voided_at"] or None)
                        voids += 1
    return {"added": added, "skipped": skipped, "voided": voids}


def import_csv(conn, src: IO[str]) -> dict:
    return import_rows(conn, read_export(src))
