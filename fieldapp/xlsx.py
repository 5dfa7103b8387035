"""The log as an .xlsx workbook for the office (openpyxl, write-only mode).

Three sheets:

- **Readings**: one row per reading version, typed cells: times as dates
  (the wall-clock time at the reading's own UTC offset, the offset in its own
  column and the ISO 8601 text beside it), numbers as numbers with the unit
  in the header, text as text (a text that starts with ``=`` stays text: it
  is written as a string cell, never as a formula), labels beside the codes.
- **Sites**: each site's settings and its latest current reading
  (``store.list_sites``).
- **Sources**: every method key and data table the exported readings and
  sites use, with its readable source (``labels.readable_source``: a value
  nobody has checked against its published table says "unverified"), and
  the usual cautions (``results.CAUTIONS``).

The workbook is streamed: rows go from the keyset read of the log straight
to openpyxl's write-only sheets (which keep rows in temporary files), so
memory stays flat however long the log is (``tests/benchmarks/bench_xlsx.py``).
"""
from __future__ import annotations

import csv
import datetime as dt
import re
import sqlite3
from functools import lru_cache
from importlib import resources
from typing import IO

from . import labels, store
from .csvio import ReadableCells, _acks_cell, _acks_or_none

#: Characters an .xlsx cell cannot hold (XML 1.0 controls); shown as U+FFFD.
_ILLEGAL_RE = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")
_TEMP_METHOD_RE = re.compile(r'"temp_method":\s*"([a-z0-9_:]{1,80})"')

#: Readings sheet: header (units in brackets) and the kind of each cell.
READING_COLUMNS = (
    ("Site", "text"), ("Taken (local time)", "date"), ("UTC offset", "text"),
    ("taken_at (ISO 8601)", "text"), ("Sample", "text"), ("Sample code", "text"),
    ("Depth (cm)", "number"), ("Value as displayed", "number"), ("Unit as displayed", "text"),
    ("Temperature (°C)", "number"), ("Compensated by the meter", "bool"),
    ("Ratio soil:water", "text"), ("Water parts N of 1:N", "number"),
    ("Saturation percentage SP (%)", "number"), ("Texture", "text"),
    ("Water type (sea_salt: like diluted seawater)", "text"),
    ("TDS factor", "number"), ("Water content θg (%)", "number"),
    ("Matric potential (MPa)", "number"), ("Meter", "text"), ("Replicate group", "text"),
    ("Note", "text"), ("EC at 25 °C (dS/m)", "number"), ("ECe (dS/m)", "number"),
    ("ECe method", "text"), ("ECe method code", "text"),
    ("Solute potential (MPa)", "number"), ("Solute potential route", "text"),
    ("Solute potential route code", "text"), ("Flags", "text"), ("Flag codes", "text"),
    ("Status", "text"), ("Void reason", "text"), ("Voided at (local time)", "date"),
    ("Corrects reading (uuid)", "text"), ("uuid", "text"), ("Visited by", "text"),
    ("Recorded at (local time)", "date"), ("App version", "text"),
    ("Acknowledged flags", "text"),
)
SITE_COLUMNS = (
    ("Site", "text"), ("Kind", "text"), ("Crop", "text"), ("Texture", "text"),
    ("Saturation percentage SP (%)", "number"), ("Latitude (°)", "number"),
    ("Longitude (°)", "number"), ("Notes", "text"), ("Created (local time)", "date"),
    ("Reading versions", "number"), ("Latest reading taken (local time)", "date"),
    ("Latest sample", "text"), ("Latest value as displayed", "number"),
    ("Latest unit", "text"), ("Latest EC at 25 °C (dS/m)", "number"),
    ("Latest ECe (dS/m)", "number"), ("Latest flags", "text"),
)
SOURCE_COLUMNS = (("What", "text"), ("Name", "text"), ("Plain label", "text"),
                  ("Source", "text"), ("Checked", "text"))


def _local(text) -> dt.datetime | None:
    """An ISO 8601 time as its wall-clock time at its own offset (a spreadsheet
    date has no offset; the offset is its own column)."""
    if not text:
        return None
    try:
        return dt.datetime.fromisoformat(str(text)).replace(tzinfo=None)
    except ValueError:
        return None


def _offset(text) -> str:
    try:
        t = dt.datetime.fromisoformat(str(text))
    except (TypeError, ValueError):
        return ""
    if t.tzinfo is None:
        return ""
    off = t.utcoffset()
    mins = int(off.total_seconds() // 60)
    sign = "-" if mins < 0 else "+"
    mins = abs(mins)
    return f"UTC{sign}{mins // 60:02d}:{mins % 60:02d}"


def _num(v):
    if v is None or isinstance(v, bool):
        return None
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return None if x != x or x in (float("inf"), float("-inf")) else x


class _Writer:
    """Typed cells for one write-only sheet, with the header in bold."""

    def __init__(self, wb, title: str, columns):
        from openpyxl.cell import WriteOnlyCell
        from openpyxl.styles import Font
        self._cell = WriteOnlyCell
        self.ws = wb.create_sheet(title)
        self.kinds = [k for _, k in columns]
        self.ws.freeze_panes = "A2"
        bold = Font(bold=True)
        head = []
        for name, _ in columns:
            c = WriteOnlyCell(self.ws, value=name)
            c.font = bold
            head.append(c)
        self.ws.append(head)

    def text_cell(self, v):
        c = self._cell(self.ws, value=None)
        c.value = _ILLEGAL_RE.sub("\ufffd", str(v))
        c.data_type = "s"           # never a formula, whatever the text starts with
        return c

    def append(self, values):
        out = []
        for kind, v in zip(self.kinds, values):
            if v is None or v == "":
                out.append(None)
            elif kind == "text":
                out.append(self.text_cell(v))
            elif kind == "number":
                out.append(_num(v))
            elif kind == "bool":
                out.append(bool(v))
            else:
                out.append(v)       # a datetime: openpyxl gives it a date format
        self.ws.append(out)


@lru_cache(maxsize=1)
def _method_sources() -> dict[str, tuple[str, str]]:
    path = resources.files("fieldapp").joinpath("data", "method_labels.csv")
    with path.open(encoding="utf-8", newline="") as f:
        return {r["key"].strip(): (r["label"].strip(), r["source"].strip())
                for r in csv.DictReader(f) if r.get("key")}


def _method_source(key: str) -> str:
    table = _method_sources()
    if key in table:
        return table[key][1]
    for pattern, (_, source) in table.items():
        if "<" in pattern and key.startswith(pattern[:pattern.index("<")]):
            return source
    head = key.partition(":")[0]
    if head in table:
        return table[head][1]
    return "unverified"


def _checked(source: str, check: str | None = None) -> str:
    """A Sources row's status: from ``check`` where the table states one
    (:attr:`Texture.check`), else from the words of its source."""
    if check is not None:
        return {"yes": "checked against the published table",
                "derived": "derived from a published table by a stated rule; not read in a "
                           "published table of its own, so unverified"}.get(check, "unverified")
    low = source.lower()
    if "from memory" in low or "unverified" in low:
        return "unverified"
    if "common practice" in low:
        return "common practice"
    return "as cited"


def _reading_row(row, readable: ReadableCells, acks: str) -> list:
    n, _ = readable.ratio(row["ratio"])
    return [row["site"], _local(row["taken_at"]), _offset(row["taken_at"]), row["taken_at"],
            readable.label("sample_label", row["sample"]), row["sample"], row["depth_cm"],
            row["value"], row["unit"], row["temp_c"], bool(row["compensated"]),
            row["ratio"], n, row["sp_pct"], row["texture"], store.stored_salt_type(row),
            row["tds_factor"],
            row["theta_g_pct"], row["matric_MPa"], row["meter"], row["replicate_group"],
            row["note"], row["ec25_dS_m"], row["ece_dS_m"],
            readable.label("method_label", row["ece_method"]), row["ece_method"],
            row["psi_s_MPa"], readable.label("route_label", row["psi_s_method"]),
            row["psi_s_method"], readable.label("flags", row["flags"]),
            (row["flags"] or "").replace(";", "; "), row["status"], row["void_reason"],
            _local(row["voided_at"]), row["supersedes_uuid"], row["uuid"], row["visited_by"],
            _local(row["recorded_at"]), row["app_version"], acks]


def _write_readings(conn, sheet: _Writer, readable: ReadableCells, site_id: int | None,
                    report: dict | None) -> tuple[int, dict[str, str], set[str]]:
    """The Readings sheet, streamed from the keyset read. Returns the count,
    the method keys met (key -> what it is) and the textures met."""
    try:
        acked = store.acked_reading_ids(conn)
    except sqlite3.DatabaseError:
        acked = set()
    methods: dict[str, str] = {}            # key -> what it is
    textures: set[str] = set()
    n = 0
    for row in store.iter_readings_keyset(conn, site_id=site_id, report=report):
        acks = _acks_cell(_acks_or_none(conn, row["id"])) if row["id"] in acked else ""
        sheet.append(_reading_row(row, readable, acks))
        n += 1
        if row["ece_method"]:
            methods.setdefault(row["ece_method"], "ECe method")
        if row["psi_s_method"]:
            methods.setdefault(row["psi_s_method"], "Solute potential route")
        m = _TEMP_METHOD_RE.search(row["result_json"] or "")
        if m:
            methods.setdefault(m.group(1), "Temperature method")
        if row["texture"]:
            textures.add(row["texture"])
    return n, methods, textures


def _write_sites(conn, sheet: _Writer, readable: ReadableCells, site_id: int | None,
                 textures: set[str]) -> tuple[int, set[str]]:
    """The Sites sheet; adds the sites' textures to ``textures``. Returns the
    count and the crops met."""
    from .sites import kind_label
    crops: set[str] = set()
    n_sites = 0
    for s in store.list_sites(conn):
        if site_id is not None and s["id"] != site_id:
            continue
        n_sites += 1
        sheet.append([s["name"], kind_label(s["kind"]), s["crop"], s["texture"], s["sp_pct"],
                      s["latitude"], s["longitude"], s["notes"], _local(s["created_at"]),
                      s["n_readings"], _local(s["last_taken_at"]),
                      readable.label("sample_label", s["last_sample"]), s["last_value"],
                      s["last_unit"], s["last_ec25_dS_m"], s["last_ece_dS_m"],
                      readable.label("flags", s["last_flags"])])
        if s["crop"]:
            crops.add(s["crop"])
        if s["texture"]:
            textures.add(s["texture"])
    return n_sites, crops


def _crop_row(name: str) -> list:
    from .science import tolerance
    try:
        c = tolerance.find_crop(name)
    except Exception:           # a crop name no table row has: say so
        return ["Crop salt tolerance (Maas-Hoffman)", name, name,
                "no row in the crop table", "unverified"]
    return ["Crop salt tolerance (Maas-Hoffman)", c.name,
            f"threshold {c.threshold_dS_m:g} dS/m, slope "
            f"{c.slope_pct_per_dS_m:g} %/(dS/m), class {c.tolerance_class}",
            labels.readable_source(c.source),
            "checked against the published table" if c.verified else "unverified"]


def _write_sources(sheet: _Writer, methods: dict[str, str], crops: set[str],
                   textures: set[str]) -> None:
    """The Sources sheet: each method, crop and texture met, then the cautions."""
    from .results import CAUTIONS
    from .science import extracts
    for key in sorted(methods, key=lambda k: (methods[k], k)):
        src = _method_source(key)
        label = labels.route_label(key) if methods[key] == "Solute potential route" \
            else labels.method_label(key)
        sheet.append([methods[key], key, label, labels.readable_source(src), _checked(src)])
    for name in sorted(crops):
        sheet.append(_crop_row(name))
    for name in sorted(textures):
        try:
            t = extracts.find_texture(name)
        except Exception:
            continue
        sheet.append(["Texture: typical saturation percentage", t.name,
                      f"SP {t.sp_pct:g} % (range {t.sp_low_pct:g}-{t.sp_high_pct:g} %)",
                      labels.readable_source(t.source), _checked(t.source, t.check)])
    sheet.append(["", "", "", "", ""])
    for text in CAUTIONS:
        sheet.append(["Caution", "", text, "", ""])


def export_xlsx(conn, out: IO[bytes] | str, site_id: int | None = None,
                report: dict | None = None) -> dict:
    """Write the workbook to ``out`` (a path or a binary file). Returns counts
    {"readings": n, "sites": n}. On a damaged log every readable row is
    written and ``report["skipped"]`` counts the rest (as the CSV export)."""
    from openpyxl import Workbook
    wb = Workbook(write_only=True)
    readings = _Writer(wb, "Readings", READING_COLUMNS)
    sites_ws = _Writer(wb, "Sites", SITE_COLUMNS)
    sources = _Writer(wb, "Sources", SOURCE_COLUMNS)
    readable = ReadableCells()
    n, methods, textures = _write_readings(conn, readings, readable, site_id, report)
    n_sites, crops = _write_sites(conn, sites_ws, readable, site_id, textures)
    _write_sources(sources, methods, crops, textures)
    wb.save(out)
    return {"readings": n, "sites": n_sites}
