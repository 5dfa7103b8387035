"""One cell of the export: numbers in plain decimals, text a spreadsheet would
run as a formula or turn into a date or time prefixed with an apostrophe
(OWASP CSV injection guidance), and the readable columns beside the codes."""
from __future__ import annotations

import re
import unicodedata

from ..fmt import number
from ..science import InputError

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
    if s[:1].isalnum() and s[:1].isascii():     # the usual first character: visible
        return False
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
#: A character _CONVERTIBLE_RE never matches: text holding one (a uuid's
#: letters, the T of a timestamp) is not scanned by it at all.
_NOT_CONVERTIBLE_RE = re.compile(r"[^\s\d:/.,%\-+eEaApPmM]")
#: The ASCII characters _CONVERTIBLE_RE can match (those _NOT_CONVERTIBLE_RE
#: does not): an ASCII text with one character outside them is left whole by
#: ``str.strip`` of these, a quicker test than the search on a uuid or a time.
_ASCII_CONVERTIBLE = "".join(c for c in map(chr, range(128)) if not _NOT_CONVERTIBLE_RE.match(c))
#: Number text a spreadsheet keeps as it was typed.
_PLAIN_DECIMAL_RE = re.compile(r"(?:0|[1-9]\d{0,14})(?:\.\d*[1-9])?")


def _spreadsheet_converts(s: str) -> bool:
    """True for text a spreadsheet would read as a number, date or time and so
    write back in another form (the ratio 1:5 becoming the time 01:05)."""
    if len(s) > 60 or _NOT_CONVERTIBLE_RE.search(s) or not _CONVERTIBLE_RE.fullmatch(s):
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
    c = s[:1]
    if c.isalnum() and c.isascii() and (s.strip(_ASCII_CONVERTIBLE) if s.isascii()
                                        else _NOT_CONVERTIBLE_RE.search(s)):
        return s        # a visible first character, and a text no spreadsheet converts
    return "'" + s if _needs_prefix(s) else s


def neutralize_all(col) -> list[str]:
    """:func:`neutralize` of every value of a column; the usual cell (ASCII,
    a letter or digit first, a character no spreadsheet converts) is tested
    inline. A column of such cells only (uuids, stored times) is seen to be
    one in a single search of the column joined by NULs (:data:`_SOME_CELL_TO_TEST`)."""
    if col and set(map(type, col)) == _STR_ONLY:
        joined = "\0".join(col)
        if joined.isascii() and not _SOME_CELL_TO_TEST.search(joined):
            return list(col)
    keep = _ASCII_CONVERTIBLE
    return [s if type(s) is str and s.isascii() and s[:1].isalnum() and s.strip(keep)
            else neutralize(s) for s in col]


_STR_ONLY = frozenset((str,))
#: In a column joined by NULs, the start of a cell :func:`neutralize` must
#: look at: one whose first character is not a letter or digit, or one made
#: only of characters a spreadsheet may read as a number, date or time (an
#: empty cell too). A NUL inside a cell only splits it into more such tests,
#: so a cell that needs a prefix is never passed over.
_SOME_CELL_TO_TEST = re.compile(
    r"(?:^|\0)(?:[^A-Za-z0-9\0]|[" + re.escape(_ASCII_CONVERTIBLE) + r"]*(?:\0|$))")


def plain_numbers(col) -> list[str]:
    """:func:`plain_number` of every value of a column. A column of floats and
    empties is written by ``repr`` in one join (``fmt.number``'s own rule for
    a float that needs no exponent: drop a trailing ``.0``, ``-0`` is ``0``);
    anything else (an exponent, NaN, another type) takes the one formatter."""
    if not col or not set(map(type, col)) <= _FLOAT_OR_NONE:
        return list(map(plain_number, col))
    text = "\n" + "\n".join(map(repr, col)) + "\n"
    bare = text.replace("None", "")
    if "e" in bare or "n" in bare:
        return list(map(plain_number, col))           # 1e-05, nan, inf
    for old, new in (("\nNone\n", "\n\n"), (".0\n", "\n"), ("\n-0\n", "\n0\n")):
        text = text.replace(old, new).replace(old, new)   # twice: neighbours share a \n
    return text[1:-1].split("\n")


_FLOAT_OR_NONE = frozenset((float, type(None)))


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
            from ..forms import parse_ratio
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
            from .. import labels
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

    def local_text(self, taken_at) -> str:
        """taken_at's wall-clock time as a spreadsheet reads a date-time
        (2026-05-14 09:30:00), empty if unreadable."""
        t = self.local_time(taken_at)
        if t is None:
            return ""
        s = str(taken_at)
        if len(s) == 25 and s[10] == "T" and s[19] in "+-" and s[0] != "0":   # as stored
            return s[:10] + " " + s[11:19]
        return t.strftime("%Y-%m-%d %H:%M:%S")

    def local_texts(self, col) -> list[str]:
        """:meth:`local_text` of every value of a column; a time as stored
        (2026-05-14T09:30:00+02:00, read by ``fromisoformat``) is cut inline."""
        import datetime as dt
        read = dt.datetime.fromisoformat
        out = []
        for s in col:
            if type(s) is str and len(s) == 25 and s[10] == "T" and s[19] in "+-" \
                    and s[0] != "0":
                try:
                    read(s)
                except ValueError:
                    out.append("")
                else:
                    out.append(s[:10] + " " + s[11:19])
            else:
                out.append(self.local_text(s))
        return out

    def __call__(self, row) -> list[str]:
        n, text = self.ratio(row["ratio"])
        return [plain_number(n), text, self.local_text(row["taken_at"]),
                neutralize(self.label("flags", row["flags"])),
                neutralize(self.label("method_label", row["ece_method"])),
                neutralize(self.label("route_label", row["psi_s_method"])),
                neutralize(self.label("sample_label", row["sample"]))]
