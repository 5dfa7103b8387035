"""Convert a CSV file of readings in chunks: the engine behind `convert-csv`.

Rows are read in chunks, each chunk is converted by the same vectorized core
as a single reading (science.convert.convert_batch); cells are read by
fieldapp.forms, and written out before the next chunk is read, so memory
stays flat however long the file is.

The work is done a column at a time, not a cell at a time: the cells are
read into a Batch by :mod:`.cells`, the output lines made by :mod:`.lines`.
"""
from __future__ import annotations

import csv
import gc
import io
from itertools import chain, islice
from operator import itemgetter
from typing import Iterable, Iterator, TextIO

import numpy as np

from ..science import InputError, convert
from .cells import CONTEXT_COLUMNS, RowError, columns_to_batch, columns_to_batch_in_contexts
from . import blocks, lines, parallel
from .lines import _write_json, format_number

__all__ = ["INPUT_COLUMNS", "OUTPUT_COLUMNS", "CHUNK_ROWS", "RowError", "columns_to_batch",
           "convert_csv", "format_number"]

#: Input columns convert-csv understands; only value and unit are required.
INPUT_COLUMNS = ("value", "unit", "sample", "ratio", "temp_c", "compensated", "sp",
                 "texture", "tds_factor", "theta_g_pct", "matric_MPa", "ece_method", "crop",
                 "salt_type")

#: Output columns, in order, appended after the input columns.
OUTPUT_COLUMNS = ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method",
                  "psi_s_handbook60_MPa", "psi_s_rule_004_MPa", "psi_s_nacl_pitzer_MPa",
                  "psi_s_seawater_pss78_MPa",
                  "tds_mg_L", "relative_yield_pct", "leaching_requirement", "flags")

CHUNK_ROWS = 50_000


def chunks(reader: Iterable, size: int = CHUNK_ROWS) -> Iterator[list]:
    it = iter(reader)
    while True:
        buf = list(islice(it, size))
        if not buf:
            return
        yield buf


def _even(chunk: list, width: int) -> list:
    """The rows as lists of exactly ``width`` cells, blank lines skipped (as
    csv.DictReader reads them: a short row's missing cells are None, a long
    row's extra cells are dropped)."""
    if set(map(len, chunk)) == {width}:
        return chunk
    return [r if len(r) == width else (r + [None] * (width - len(r)))[:width]
            for r in chunk if r]


def convert_csv(src: TextIO, dst: TextIO, chunk_rows: int = CHUNK_ROWS,
                fmt: str = "csv", jobs: int = 1) -> int:
    """Read readings from ``src`` (CSV with a header), write them with the
    computed columns to ``dst``: as CSV, or with ``fmt="json"`` as one JSON
    object per line (numbers unrounded, flags as a list of codes). Returns the
    number of rows. Raises RowError naming the line of the first row that
    cannot be a reading. With ``jobs`` above 1 (CSV, on Linux), chunks are
    converted side by side by helper processes (:mod:`.parallel`); the
    output is the same."""
    paused = gc.isenabled()
    gc.disable()        # nothing here makes cycles; a million rows' lists made the
    try:                # collector walk every live chunk again and again
        return _convert(src, dst, chunk_rows, fmt, jobs)
    finally:
        if paused:
            gc.enable()


def _convert(src: TextIO, dst: TextIO, chunk_rows: int, fmt: str, jobs: int = 1) -> int:
    reader = csv.reader(src)
    header = next(reader, None)
    if not header or "value" not in header or "unit" not in header:
        raise RowError("the file needs a header row with at least the columns value and unit "
                       f"(known columns: {', '.join(INPUT_COLUMNS)}).", "file")
    in_cols = list(header)
    pos = {c: i for i, c in enumerate(in_cols)}      # a repeated name: its last cell, as before
    out_cols = [c for c in OUTPUT_COLUMNS if c not in in_cols]
    if fmt == "json":
        return _convert_json(reader, dst, in_cols, pos, out_cols, chunk_rows)
    write = _utf8_writer(dst)
    head = io.StringIO()
    csv.writer(head, lineterminator="\r\n").writerow(in_cols + out_cols)
    write(head.getvalue().encode("utf-8"))
    in_order = parallel.InOrder(_chunk_lines, write, jobs)
    try:
        total, rest = blocks.put_line_blocks(src, in_order, (in_cols, pos, out_cols), chunk_rows)
        if rest is not None:            # a cell may hold a line break: csv.reader from here
            for chunk, line in _row_chunks(csv.reader(chain(rest, src)), len(in_cols),
                                           chunk_rows, 2 + total):
                in_order.put(chunk, in_cols, pos, out_cols, line)
                total += len(chunk)
        in_order.finish()
    finally:
        in_order.close()
    return total


def _row_chunks(reader, width: int, chunk_rows: int, line: int) -> Iterator[tuple[list, int]]:
    """(each chunk of rows, ``width`` cells each, blank ones left out; the
    line of its first row), counting lines from ``line``."""
    for chunk in chunks(reader, chunk_rows):
        chunk = _even(chunk, width)
        if chunk:
            yield chunk, line
        line += len(chunk)


def _convert_json(reader, dst, in_cols, pos, out_cols, chunk_rows: int) -> int:
    total = 0
    for chunk, line in _row_chunks(reader, len(in_cols), chunk_rows, 2):
        columns = _columns(chunk, pos)
        out = _converted(columns, len(chunk), line)
        _write_json(dst, in_cols, columns, out, out_cols, len(chunk))
        total += len(chunk)
    return total


def _chunk_lines(rows, in_cols, pos: dict, out_cols, line: int) -> bytes:
    """The CSV lines of a chunk: its rows, or its text (lines each one row,
    :func:`blocks.rows_of_text`)."""
    if isinstance(rows, str):
        rows = _even(blocks.rows_of_text(rows), len(in_cols))
    return _csv_chunk(rows, in_cols, pos, out_cols, line) if rows else b""


def _utf8_writer(dst: TextIO):
    """A function writing UTF-8 bytes to ``dst``: straight to its binary
    buffer where it has one and writes UTF-8 (no decoding and encoding again,
    and no text-mode newline translation: the lines end in CRLF, as
    csv.writer ends them, on Windows too), else decoded into it."""
    raw = getattr(dst, "buffer", None)
    encoding = (getattr(dst, "encoding", None) or "").lower().replace("-", "").replace("_", "")
    if raw is not None and encoding == "utf8":
        dst.flush()                     # what was written as text goes first
        return raw.write
    return lambda data: dst.write(data.decode("utf-8"))


def _columns(chunk: list, pos: dict) -> dict:
    by_pos = list(zip(*chunk))
    return {c: by_pos[i] for c, i in pos.items()}


def _converted(columns: dict, n: int, line: int) -> dict:
    """convert_batch of the chunk's columns; an error names its line (or the chunk's)."""
    try:
        return convert.convert_batch(columns_to_batch(columns, n, line))
    except RowError:
        raise
    except InputError as e:
        raise RowError(f"lines {line}-{line + n - 1}: {e.message}", e.field) from None


def _csv_chunk(chunk: list, in_cols, pos: dict, out_cols, line: int) -> bytes:
    """The chunk's CSV lines, UTF-8. A file repeats readings (the same value, unit,
    sample... on many rows); where at least half the rows repeat another, only
    the distinct readings are converted and formatted, each row taking the
    results of its own (every input column the conversion reads is in the
    key, so a row's results are the ones it would get on its own). Any input
    error sends the whole chunk the usual way, which names the first bad line."""
    names = [c for c in INPUT_COLUMNS if c in pos]
    heads = lines.row_texts(chunk, in_cols, pos)
    found = _distinct_rows(chunk, heads, [pos[c] for c in names])
    if found is not None:
        rows, codes = found
        try:
            out = convert.convert_batch(
                columns_to_batch(dict(zip(names, zip(*rows))), len(rows), line))
        except InputError:
            pass
        else:
            return lines.csv_lines(heads, out, out_cols, codes)
    else:
        out = _in_contexts(chunk, pos, names, line)
        if out is not None:
            return lines.csv_lines(heads, out, out_cols)
    return lines.csv_lines(heads, _converted(_columns(chunk, pos), len(chunk), line), out_cols)


def _in_contexts(chunk: list, pos: dict, names: list, line: int) -> dict | None:
    """The chunk converted where its readings all differ but few contexts
    (the words of a row: unit, sample, ratio, texture, crop...) are shared
    by many rows: each context's cells are read once and given to all its
    rows with their codes, the number columns (value, temperature...) read
    a column at a time (:func:`cells.columns_to_batch_in_contexts`). None
    where the contexts are too many, or any cell is refused: the usual way
    then names the first bad line."""
    n = len(chunk)
    words = [c for c in names if c in CONTEXT_COLUMNS]
    found = _distinct(chunk, [pos[c] for c in words], n // 8) if words else ([()], None)
    if found is None:
        return None
    rows, codes = found
    numbers = {c: list(map(itemgetter(pos[c]), chunk)) for c in names if c not in CONTEXT_COLUMNS}
    try:
        return convert.convert_batch(columns_to_batch_in_contexts(
            numbers, dict(zip(words, zip(*rows))), codes, n, line))
    except InputError:
        return None


def _key(positions: list):
    """A row's cells at ``positions``, as a tuple."""
    return itemgetter(*positions) if len(positions) > 1 else (lambda r: (r[positions[0]],))


def _first_seen(keys, n: int, most: int) -> tuple[dict, np.ndarray] | None:
    """(each distinct key -> the row it first appears on, in that order;
    each row's index among the distinct keys) for ``n`` rows' ``keys``, or
    None where there are more than ``most``."""
    first: dict = {}
    seen = np.fromiter(map(first.setdefault, keys, range(n)), dtype=np.intp, count=n)
    if len(first) > most:
        return None
    dense = np.empty(n, dtype=np.intp)
    dense[np.fromiter(first.values(), dtype=np.intp, count=len(first))] = np.arange(len(first))
    return first, dense[seen]


def _distinct(chunk: list, positions: list, most: int) -> tuple[list, np.ndarray] | None:
    """(the distinct tuples of the cells at ``positions``; each row's index
    among them), or None where there are more than ``most``."""
    found = _first_seen(map(_key(positions), chunk), len(chunk), most)
    return None if found is None else (list(found[0]), found[1])


def _distinct_rows(chunk: list, heads: list, positions: list) -> tuple[list, np.ndarray] | None:
    """(the distinct tuples of the cells at ``positions``; for each row, the
    index of its own), or None where fewer than half the rows repeat one.

    Rows whose whole text (``heads``, from :func:`lines.row_texts`) is the
    same are found first, hashing strings the rows already have; only where
    they differ too often (a note or an id on each row) are the cells the
    conversion reads made into keys; neither is tried where the value column
    alone has too many distinct cells (in a sample of about 2,000 rows
    first, then in all). A text gives its cells back (quoted
    CSV; an empty cell and a short row's missing one read alike), so rows of
    one text are one reading."""
    n = len(chunk)
    sample = chunk[:: max(1, n // 2000)]     # values mostly distinct in a sample: no repeats
    if len(set(map(itemgetter(positions[0]), sample))) * 4 > len(sample) * 3 \
            or len(set(map(itemgetter(positions[0]), chunk))) * 2 > n:
        return None
    found = _first_seen(heads, n, n // 2)      # rows of the same text: the same reading
    if found is None:
        return _distinct(chunk, positions, n // 2)
    first, codes = found
    key = _key(positions)
    return [key(chunk[i]) for i in first.values()], codes
