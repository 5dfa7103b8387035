"""What a spreadsheet does to a log export when it opens and saves it again.

An office opens the CSV in a spreadsheet, sorts or filters it, and saves it
as CSV. On the way the spreadsheet drops the byte-order mark, may write
numbers with thousands separators, pads or trims empty cells, and turns text
it takes for a time or a date into one (a ratio ``1:5`` exported by an older
version becomes ``01:05:00 AM``; a time without its offset cannot be placed
on the clock any more). :func:`restore` runs on the header and the rows
before the import reads them (``csvio.read_export``): what can be undone
without doubt is undone, the columns the import does not read (the readable
ones the export adds, anything a user added) are left alone, and a file whose
cells can no longer be trusted is refused with one message naming every such
column and its first line. It never guesses: a ratio is restored only from
the same row's ``ratio_water_parts``.
"""
from __future__ import annotations

import datetime as dt
import re

#: A number cell written with thousands separators: 1,413 or 12,345.6
#: (the export writes plain numbers; a comma-separated file written by a
#: spreadsheet with a decimal comma would use ';' between cells instead).
_GROUPED_RE = re.compile(r"\s*([+-]?)(\d{1,3}(?:,\d{3})+)(\.\d+)?\s*")
#: A ratio cell a spreadsheet made into a time, a date or a day fraction:
#: 01:05:00 AM, 01:05, 1:05:00, 00:01:02.50, 01/05/26, 2026-01-05, 0.0451388889.
_TIME_RE = re.compile(r"\s*\d{1,2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?\s*(?:[AaPp]\.?[Mm]\.?)?\s*")
_DATE_RE = re.compile(r"\s*(?:\d{1,4}[/.-]\d{1,2}[/.-]\d{1,4})(?:[ T].*)?\s*")
_DAY_FRACTION_RE = re.compile(r"\s*0?\.\d{3,}\s*")
#: Columns holding a time with its UTC offset (ISO 8601).
TIME_COLUMNS = ("taken_at", "voided_at", "recorded_at")


class Untrusted(Exception):
    """Cells a spreadsheet changed beyond repair: {column: (line, cell, why)}."""

    def __init__(self, problems: dict[str, tuple[int, str, str]]):
        self.problems = problems
        cols = ", ".join(problems)
        detail = "; ".join(f"{c} (line {ln}: {cell[:30]!r} {why})"
                           for c, (ln, cell, why) in problems.items())
        super().__init__(
            f"A spreadsheet changed this file and these columns can no longer be trusted: "
            f"{cols}. {detail}. Export the log from fieldapp again, or open the CSV in the "
            "spreadsheet with those columns set to Text before saving.")
        self.columns = list(problems)


def _clean_header(header: list[str]) -> list[str]:
    out = []
    for i, h in enumerate(header):
        h = h.replace("\ufeff", "")
        if i == 0 and h.startswith("\u00ef\u00bb\u00bf"):    # a BOM read as Latin-1
            h = h[3:]
        out.append(h.strip())
    return out


def _lost_offset(cell: str) -> bool:
    """A date-time without its UTC offset (ISO or a spreadsheet's own form,
    e.g. 08/03/2026 09:00). Text that is no time at all is left to the
    import's own check."""
    try:
        t = dt.datetime.fromisoformat(cell.strip())
    except ValueError:
        return bool(_DATE_RE.fullmatch(cell))
    return t.tzinfo is None


def _looks_spreadsheet_made(cell: str) -> str | None:
    """Why a ratio cell looks like a spreadsheet's time, date or day fraction."""
    if _TIME_RE.fullmatch(cell) and (cell.count(":") > 1 or re.search(r"[AaPp]\.?[Mm]", cell)
                                     or re.match(r"\s*0\d:", cell)):
        return "looks like a time the spreadsheet made of the ratio"
    if _DATE_RE.fullmatch(cell):
        return "looks like a date the spreadsheet made of the ratio"
    if _DAY_FRACTION_RE.fullmatch(cell):
        return "looks like a time stored as a fraction of a day"
    return None


def _fit_width(cells: list[str], width: int) -> bool:
    """Trim empty cells past the header or pad a short row, in place; whether
    the row now has the header's width (if not, the import names the line)."""
    if len(cells) > width and not any(c.strip() for c in cells[width:]):
        del cells[width:]
    elif len(cells) < width:
        cells.extend([""] * (width - len(cells)))
    return len(cells) == width


def _ungrouped(m: re.Match) -> str:
    return m.group(1) + m.group(2).replace(",", "") + (m.group(3) or "")


def _ungroup_numbers(cells: list[str], num_idx: list[int]) -> None:
    for i in num_idx:
        m = _GROUPED_RE.fullmatch(cells[i])
        if m:
            cells[i] = _ungrouped(m)


def _water_parts(cells: list[str], parts_i: int | None) -> tuple[str, float | None]:
    """The row's ratio_water_parts as text and as N (None unless 0 < N <= 1000)."""
    parts = cells[parts_i].strip() if parts_i is not None else ""
    if not parts:
        return parts, None
    m = _GROUPED_RE.fullmatch(parts)
    try:
        n = float(_ungrouped(m) if m else parts)
    except ValueError:
        return parts, None
    return parts, (n if 0 < n <= 1000 else None)


def _restore_ratio(cells: list[str], ratio_i: int, parts_i: int | None, line: int,
                   problem) -> None:
    """Undo a ratio a spreadsheet made into a time or date (from the row's
    ratio_water_parts), or report it; report a ratio that disagrees with it."""
    from .science import InputError
    from .forms import parse_ratio
    cell = cells[ratio_i]
    why = _looks_spreadsheet_made(cell)
    parts, n = _water_parts(cells, parts_i)
    if why:
        if n is None:
            problem("ratio", line, cell, why + " (no ratio_water_parts to restore it)")
        else:
            from .csvio import plain_number
            cells[ratio_i] = "1:" + plain_number(n)
    elif n is not None:
        text = cell[1:] if cell.startswith("'") else cell
        try:
            agrees = abs(parse_ratio(text) - n) <= 1e-9 * max(1.0, n)
        except InputError:
            agrees = True           # the import refuses it with the parser's words
        if not agrees:
            problem("ratio", line, cell, f"disagrees with ratio_water_parts {parts!r}")


def _check_times(cells: list[str], time_idx: list[tuple[str, int]], line: int,
                 problem) -> None:
    for col, i in time_idx:
        cell = cells[i]
        if cell.strip() and _lost_offset(cell):
            problem(col, line, cell, "has lost its UTC offset (a spreadsheet rewrote "
                    "the time)")


def restore(header: list[str], rows: list[list[str]], numeric: set[str],
            first_line: int = 2) -> tuple[list[str], list[list[str]]]:
    """Undo what a spreadsheet did to an export on open and save, or raise
    :class:`Untrusted` naming the columns that cannot be trusted.

    ``rows`` are the file's rows after the header (line ``first_line`` on);
    cells are changed in place only where the original is certain:

    - the header loses a byte-order mark (kept or mangled) and spaces;
    - a row longer than the header loses empty cells at its end, a shorter
      one is padded with empty cells (spreadsheets trim either way);
    - a number cell ``1,413.5`` in a column the import reads as a number
      becomes ``1413.5``;
    - a ``ratio`` that became a time, a date or a day fraction is restored
      from the row's ``ratio_water_parts`` when the file has it
      (``1:N``), else refused; a ratio that disagrees with
      ``ratio_water_parts`` is refused;
    - ``taken_at``, ``voided_at`` and ``recorded_at`` must keep their UTC
      offset: a time rewritten as ``2026-08-03 09:00`` is refused (the
      import would otherwise read it in this machine's offset).
    """
    header = _clean_header(header)
    width = len(header)
    pos = {h: i for i, h in enumerate(header)}
    problems: dict[str, tuple[int, str, str]] = {}

    def problem(col, line, cell, why):
        problems.setdefault(col, (line, cell, why))

    num_idx = [pos[c] for c in numeric if c in pos]
    ratio_i = pos.get("ratio")
    parts_i = pos.get("ratio_water_parts")
    time_idx = [(c, pos[c]) for c in TIME_COLUMNS if c in pos]
    for k, cells in enumerate(rows):
        line = first_line + k
        if not cells or cells == [""] or not _fit_width(cells, width):
            continue
        _ungroup_numbers(cells, num_idx)
        if ratio_i is not None and cells[ratio_i].strip():
            _restore_ratio(cells, ratio_i, parts_i, line, problem)
        _check_times(cells, time_idx, line, problem)
    if problems:
        raise Untrusted(problems)
    return header, rows
