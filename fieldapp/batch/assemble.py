"""convert-csv's lines made as bytes, a chunk at a time, without a Python
string per cell.

Each computed column becomes a matrix of bytes, a row per reading and the
cell's characters left-aligned in it, the rest NUL; the columns side by side
with their commas and the line end are each row's tail. The tails' NULs are
dropped and every row's input text (its head, already one string per row)
placed before its tail in one flat array: the text csv.writer would write,
made by a few numpy calls over the chunk instead of a format and a join per
cell.

The number cells are the one formatter's (:func:`fieldapp.fmt.number`, six
significant digits, empty for missing): ``"%.6g"`` where that is plain
decimals, which :func:`_plain_g6` makes for the whole column from its six
rounded digits; the rest (zero, very small or large numbers, and a number so
near a rounding tie that one multiplication might round it the other way)
are formatted one by one.
"""
from __future__ import annotations

import numpy as np

from ..csvtext import csv_quoted
from ..fmt import number
from ..science import groups

#: A plain cell is 9 pairs of bytes, NUL where a character is not written
#: (NULs are dropped when the lines are made, so a cell need not be
#: left-aligned): the sign and "0.000" of a number below 1, then each of the
#: six rounded digits with the place of a point after it. Pairs are
#: little-endian 16-bit numbers, each made for the whole column at once.
_PAIRS = 9
_WIDTH = 2 * _PAIRS
_PAIR = np.dtype("<u2")
_ZERO, _POINT, _MINUS = ord("0"), ord("."), ord("-")
#: How many zeros end each three digits 000..999 (three for 000).
_TRAILING_ZEROS = np.array([3 if k == 0 else len(f"{k:03d}") - len(f"{k:03d}".rstrip("0"))
                            for k in range(1000)], dtype=np.int32)


def _plain_g6(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(``fast``, ``cells``): where ``fast``, row ``i`` of ``cells`` holds
    the bytes of ``"%.6g" % a[i]`` with NULs between them (elsewhere
    anything). A number is left out where it is not finite, is outside
    1e-4..999,999, or lies within a millionth of its sixth digit's unit from
    a rounding tie, so every row given is exactly the text ``%`` writes:
    ``%.6g`` of such a number is plain decimals of its six rounded digits,
    trailing zeros of the fraction (and a point left with none) dropped.
    Every step works on the whole column (no selection of rows, which costs
    more than the arithmetic)."""
    ax = np.abs(a)
    with np.errstate(invalid="ignore"):
        fast = (ax >= 1e-4) & (ax < 999_999)        # False for NaN
    x = np.where(fast, ax, 1.0)
    e = np.clip(np.floor(np.log10(x)), -4, 5).astype(np.int32)
    y = x * 10.0 ** (5 - e)             # an exact power of ten: one rounding
    m = np.rint(y)
    fast &= (y >= 100_000) & (m <= 999_999) & (np.abs(y - np.floor(y) - 0.5) > 1e-6)
    m = np.minimum(m, 999_999).astype(np.int32)       # above: not fast, any digits
    lead = [m // 10 ** (5 - i) for i in range(6)]   # the first i + 1 digits
    digits = [lead[0]] + [lead[i] - 10 * lead[i - 1] for i in range(1, 6)]
    low = m - lead[2] * 1000            # the last three digits: their zeros, then the first three's
    kept = 6 - _TRAILING_ZEROS[low] - (low == 0) * _TRAILING_ZEROS[lead[2]]
    out = np.empty((len(a), _PAIRS), dtype=_PAIR)
    below = e < 0
    out[:, 0] = (a < 0) * _MINUS + below * (_ZERO << 8)
    out[:, 1] = below * _POINT + (e <= -2) * (_ZERO << 8)
    out[:, 2] = (e <= -3) * _ZERO + (e <= -4) * (_ZERO << 8)
    for i, d in enumerate(digits):
        shown = (kept > i) | (e >= i)   # an integer digit is always written
        point = (e == i) & (kept > i + 1)
        out[:, 3 + i] = shown * (d + _ZERO) + point * (_POINT << 8)
    return fast, out.view(np.uint8)


def _rows_of(texts: list[str], width: int = 0) -> np.ndarray:
    """Texts as a matrix of their UTF-8 bytes, one row each, NUL-padded."""
    if not texts:
        return np.zeros((0, max(width, 1)), dtype=np.uint8)
    enc = np.array([t.encode("utf-8") for t in texts], dtype=f"S{width}" if width else None)
    return enc.view(np.uint8).reshape(len(texts), enc.dtype.itemsize)


def number_matrix(a) -> np.ndarray:
    """A float column's CSV cells (those of ``number(x, 6, missing="")``) as
    a matrix of bytes."""
    a = np.asarray(a, dtype=float)
    if np.isnan(a).all():               # a column no reading has (no crop, no sea salt)
        return np.zeros((len(a), 0), dtype=np.uint8)
    fast, cells = _plain_g6(a)
    rest = np.flatnonzero(~fast & np.isfinite(a))
    texts = []
    for x in a[rest].tolist():          # zero, tiny, huge or near a tie
        plain = 1e-4 <= abs(x) < 999_999
        texts.append("%.6g" % x if plain else number(x, 6, missing=""))
    width = max([_WIDTH] + [len(t) for t in texts])
    if width > _WIDTH:
        cells = np.pad(cells, ((0, 0), (0, width - _WIDTH)))
    cells[np.flatnonzero(~fast)] = 0    # missing: an empty cell
    if texts:
        cells[rest] = _rows_of(texts, width)
    used = cells.any(axis=0)            # places no cell writes (a sign, "0.000"): left out,
    return cells if used.all() else cells[:, used]     # a narrower line to make


def text_matrix(values, word=None) -> np.ndarray | None:
    """A column of values as text cells, as csv.writer writes them (quoted
    where they need it), as a matrix of bytes. Each distinct value is made
    into text (``word``; by default empty for None, else ``str``), quoted
    and encoded once. None where a cell holds a NUL of its own (it would be
    dropped with the padding)."""
    codes, distinct = groups.codes(np.asarray(values, dtype=object))
    make = word or (lambda v: "" if v is None else str(v))
    texts = csv_quoted([make(v) for v in distinct])
    if any("\0" in t for t in texts):
        return None
    return _rows_of(texts)[codes]


def _head_rows(heads: list[str]) -> np.ndarray | None:
    """The rows' heads as a matrix of their UTF-8 bytes, NUL-padded; None
    where a head holds a NUL of its own (it would be dropped with the
    padding) or one head is so much longer than the rest that the padding
    would cost more than the text."""
    blob = "\n".join(heads)
    if "\0" in blob:
        return None
    data = blob.encode("utf-8")
    texts = data.split(b"\n")
    if len(texts) != len(heads):        # a quoted line break inside a head
        texts = [h.encode("utf-8") for h in heads]
    widest = max(map(len, texts))
    if widest > 4 * len(data) / len(heads) + 256:
        return None
    rows = np.array(texts, dtype=f"S{max(widest, 1)}")
    return rows.view(np.uint8).reshape(len(heads), rows.dtype.itemsize)


#: The lines are made in blocks of rows about this many bytes wide in all,
#: so that each block's matrix stays in the processor's cache while every
#: column is written into it (written whole, a chunk's matrix is tens of
#: megabytes and each column's pass over it goes back to memory).
_BLOCK_BYTES = 1 << 18


def lines_bytes(heads: list[str], columns: list[np.ndarray], codes=None) -> bytes | None:
    """The chunk's lines, UTF-8: each row's head, then a comma and the cell
    of each computed column (byte matrices of the distinct readings' cells
    where ``codes[i]`` names the one row ``i`` repeats), then CRLF; made a
    block of rows at a time as a matrix of bytes whose NULs are dropped.
    None where the heads cannot be put in a matrix (:func:`_head_rows`) or
    a column is None (a cell with a NUL, :func:`text_matrix`); the caller
    joins those as text."""
    head = _head_rows(heads)
    if head is None or any(c is None for c in columns):
        return None
    n, hw = head.shape
    widths = [c.shape[1] for c in columns]
    width = hw + sum(widths) + len(widths) + 2
    if codes is not None:               # the distinct readings' tails, then each row's
        columns = [_tails(columns, widths)]
        widths = [width - hw - 1]
    rows = max(64, _BLOCK_BYTES // width)
    pieces = []
    for start in range(0, n, rows):
        stop = min(n, start + rows)
        if start == 0 or stop - start < rows:
            buf = bytearray((stop - start) * width)
            block = np.frombuffer(buf, dtype=np.uint8).reshape(stop - start, width)
            at = hw                     # the commas and line ends stay from block to block
            for w in widths:
                block[:, at] = ord(",")
                at += 1 + w
            block[:, width - 2:] = np.frombuffer(b"\r\n", dtype=np.uint8)
        block[:, :hw] = head[start:stop]
        at = hw + 1
        for col, w in zip(columns, widths):
            block[:, at:at + w] = col[start:stop] if codes is None else col[codes[start:stop]]
            at += 1 + w
        pieces.append(buf.translate(None, b"\0"))
    return b"".join(pieces)


def _tails(columns: list[np.ndarray], widths: list[int]) -> np.ndarray:
    """The computed cells of each distinct reading side by side, joined by
    commas and ended by CRLF, without the comma before the first."""
    tail = np.empty((len(columns[0]), sum(widths) + len(widths) + 1), dtype=np.uint8)
    at = 0
    for col, w in zip(columns, widths):
        if at:
            tail[:, at] = ord(",")
            at += 1
        tail[:, at:at + w] = col
        at += w
    tail[:, at:] = np.frombuffer(b"\r\n", dtype=np.uint8)
    return tail
