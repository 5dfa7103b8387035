"""convert-csv makes its lines as bytes a chunk at a time (batch.assemble).
The references are Python's own: ``%`` and the one formatter for every
number cell, csv.writer writing row by row for every line."""
from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from fieldapp import batch
from fieldapp.batch import assemble

from test_batch_repeats import HEADER, _reference, assert_refused_at


def _cells(matrix) -> list[str]:
    return [bytes(r[r != 0]).decode("utf-8") for r in matrix]


def _awkward_numbers() -> np.ndarray:
    rng = np.random.default_rng(12)
    spread = rng.lognormal(0, 4, 60_000) * rng.choice([-1, 1], 60_000)
    short = np.array([round(x, int(k)) for x, k in
                      zip(rng.uniform(0, 1000, 20_000), rng.integers(0, 7, 20_000))])
    tens = 10.0 ** np.arange(-7, 9)
    ties = np.array([0.5, 1.5, 2.5, 123456.5, 99999.95, 9.999995, 0.1234565, 0.00012345650])
    edges = np.array([0.0, -0.0, np.nan, np.inf, -np.inf, 1e-4, -1e-4, 999_999, 999_998.6,
                      999_999.4, 1e30, -1e-30, 5e-324, 1.7976931348623157e308])
    return np.concatenate([spread, short, -short / 1000, tens, np.nextafter(tens, 0),
                           np.nextafter(tens, np.inf), ties, np.nextafter(ties, 0),
                           np.nextafter(ties, 9e9), edges])


def test_number_cells_are_the_one_formatters_text():
    """Reference: fieldapp.fmt.number(x, 6, missing="") (``%.6g`` where that
    is plain decimals) of each number, rounding ties, powers of ten and
    their neighbours, zero, NaN, infinities and the extremes of a double."""
    a = _awkward_numbers()
    got = _cells(assemble.number_matrix(a))
    want = [batch.format_number(x) for x in a.tolist()]
    wrong = [(x, g, w) for x, g, w in zip(a.tolist(), got, want) if g != w]
    assert not wrong, wrong[:5]


def test_text_cells_are_quoted_as_csv_writer_quotes_them():
    values = np.array(["a", None, 'say "hi"', "1,5", "a", "µS/cm", "line\nbreak"], dtype=object)
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(["" if v is None else v for v in values])
    assert ",".join(_cells(assemble.text_matrix(values))) + "\n" == buf.getvalue()


def _distinct_rows(n: int) -> list[list[str]]:
    """Invented readings, every row a different value, the site cells
    holding what a CSV cell may: commas, quotes, letters beyond ASCII."""
    sites = ["Farm A", "Block 3, north", 'the "old" bed', "Bench 4 µ", "Farm B ü"]
    units = ["dS/m", "µS/cm", "mS/cm"]
    samples = [("paste", ""), ("extract", "1:5"), ("feed", ""), ("water", "")]
    rows = []
    for i in range(n):
        kind, ratio = samples[i % 4]
        rows.append([sites[i % 5], f"{0.2 + i * 0.0137:.4f}", units[i % 3], kind, ratio,
                     f"{15 + i % 20}", "yes" if i % 2 else "no", "barley" if i % 7 == 0
                     else "", "loam" if kind == "extract" else ""])
    return rows


def _converted(rows, chunk_rows=50_000) -> str:
    src = io.StringIO()
    csv.writer(src, lineterminator="\r\n").writerows([HEADER] + rows)
    src.seek(0)
    dst = io.StringIO()
    assert batch.convert_csv(src, dst, chunk_rows=chunk_rows) == len(rows)
    return dst.getvalue()


@pytest.mark.parametrize("chunk_rows", [37, 50_000])
def test_lines_of_different_readings_are_csv_writers(chunk_rows):
    rows = _distinct_rows(400)
    assert _converted(rows, chunk_rows) == _reference(rows)


@pytest.mark.parametrize("odd", ["a line\nbreak", "a NUL \0 inside", "x" * 5000],
                         ids=["line break", "NUL", "one long cell"])
def test_an_odd_head_gives_the_same_lines(odd):
    """A quoted line break (the heads then encoded a row at a time), a NUL
    (it would be dropped with the padding) and one cell far longer than the
    rest (the padding would cost more than the text; these two send their
    chunk the text way): the same lines either way."""
    rows = _distinct_rows(120)
    rows[77][0] = odd
    assert _converted(rows) == _reference(rows)


def test_a_text_cell_with_a_nul_is_left_to_the_text_way():
    """A NUL of a cell's own would be dropped with the padding: the column
    gives no matrix and the lines are not made as bytes."""
    assert assemble.text_matrix(np.array(["a", "b\0c"], dtype=object)) is None
    cols = [assemble.text_matrix(np.array(["a", "b\0c"], dtype=object))]
    assert assemble.lines_bytes(["1", "2"], cols) is None
    good = [assemble.text_matrix(np.array(["a", "b"], dtype=object))]
    assert assemble.lines_bytes(["1", "2"], good) == b"1,a\r\n2,b\r\n"


@pytest.mark.parametrize("newline", [None, "\r\n", ""])
@pytest.mark.parametrize("encoding", ["utf-8", "UTF8", "utf-8-sig", "utf-16"])
def test_lines_reach_a_byte_stream_as_csv_writer_wrote_them(encoding, newline):
    """Written to a text stream over bytes (standard output), the lines go
    to its buffer as UTF-8 where it writes UTF-8, so a text mode that turns
    "\\n" into CRLF (Windows) cannot make CR CR LF; another encoding gets the
    text itself. Either way the bytes are csv.writer's lines in the
    stream's encoding, the header and every row, in order."""
    rows = _distinct_rows(300)
    rows[5][2] = "µS/cm"
    src = io.StringIO()
    csv.writer(src, lineterminator="\r\n").writerows([HEADER] + rows)
    src.seek(0)
    raw = io.BytesIO()
    dst = io.TextIOWrapper(raw, encoding=encoding, newline=newline)
    assert batch.convert_csv(src, dst, chunk_rows=128) == len(rows)
    dst.flush()
    want = _reference(rows)
    if newline == "\r\n" and encoding.lower().replace("-", "") != "utf8":
        want = want.replace("\n", "\r\n")     # the text way: the stream's own translation
    assert raw.getvalue() == want.encode(encoding)


def _rows_in_contexts(n: int) -> list[list[str]]:
    """Every row a different value, the rest of the row one of the six
    invented readings of test_batch_repeats (so few contexts, many rows each)."""
    from test_batch_repeats import READINGS
    return [r[:1] + [f"{float(r[1]) * (1 + i * 1e-7):.7g}"] + r[2:]
            for i, r in ((i, READINGS[i % len(READINGS)]) for i in range(n))]


@pytest.mark.parametrize("temps", ["repeated", "each row its own"])
def test_different_values_in_few_contexts_read_each_context_once(monkeypatch, temps):
    """The context route runs (a spy counts it) and its lines are those of
    every row converted on its own (test_batch_repeats._reference), the
    temperatures a few repeated or each row's own (a number column is read
    whole, not as part of the context)."""
    rows = _rows_in_contexts(600)
    if temps != "repeated":
        for i, r in enumerate(rows):
            r[5] = f"{12 + (i % 397) * 0.1:.1f}"
    calls = []
    real = batch.columns_to_batch_in_contexts
    monkeypatch.setattr(batch, "columns_to_batch_in_contexts",
                        lambda *a: calls.append(len(a[2])) or real(*a))
    assert _converted(rows) == _reference(rows)
    assert calls == [600]


@pytest.mark.parametrize("col, cell", [(2, "furlongs"), (5, "70"), (1, "-1"), (1, "1,2,3")],
                         ids=["unit", "temperature", "negative", "not a number"])
def test_a_bad_context_cell_names_its_own_line(col, cell):
    """A unit no meter shows, a temperature out of range, a negative or
    unreadable value on one row of a chunk read by contexts: the chunk is
    read the usual way and the message names that row's line."""
    rows = _rows_in_contexts(600)
    rows[433][col] = cell
    assert_refused_at(rows, 435)


@pytest.mark.parametrize("kinds", [1, 3, 40, 5000])
def test_groups_are_the_rows_sharing_every_key(kinds):
    """science.groups.groups (table-compacted keys, a radix sort where they are
    small) against a dict of key tuples: the same partition of the rows,
    NaN and None each one key, a coded column the same as a plain one."""
    from fieldapp.science.coded import coded_table
    from fieldapp.science.groups import groups
    rng = np.random.default_rng(kinds)
    n = 20_000
    a = rng.integers(0, kinds, n).astype(float)
    a[rng.random(n) < 0.1] = np.nan
    words = np.array(["x", "y", None, "z"], dtype=object)[rng.integers(0, 4, n)]
    b = rng.integers(0, 7, n) * 0.5
    ctx = rng.integers(0, 50, n)
    b_coded = coded_table(b[:50], ctx)
    want: dict = {}
    for i, key in enumerate(zip(a.tolist(), words.tolist(), b_coded.tolist())):
        want.setdefault(tuple("nan" if k != k else k for k in key), []).append(i)
    got = {tuple("nan" if k != k else k for k in key): rows.tolist()
           for key, rows in groups(a, words, b_coded)}
    assert got == want


def test_a_column_of_plain_numbers_reads_as_the_form_reads_each_cell():
    """A column read at once (cells._number_column) gives each cell the
    number forms.parse_number gives it alone (the page's reading of a typed
    number), on random decimals and the other plain forms a file holds."""
    from fieldapp import forms
    from fieldapp.batch.cells import _number_column
    rng = np.random.default_rng(7)
    cells = [f"{x:.{int(rng.integers(0, 9))}f}" for x in rng.lognormal(0, 3, 20_000)]
    cells += ["-0", ".5", "5.", "+1", "1e3", "1E-3", "-2.5e-2", "007", "0.000", "", "12"]
    got = _number_column(cells, 2, "temp_c")
    want = [np.nan if c == "" else forms.parse_number(c, "temp_c") for c in cells]
    assert np.array_equal(got, np.array(want, dtype=float), equal_nan=True)
