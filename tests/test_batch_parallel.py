"""convert-csv with helper processes (fieldapp.batch.parallel): the same
bytes as one process writes, which are csv.writer's lines of every row
converted on its own (test_batch_repeats._reference); a bad row named as on
one core, after the same lines; a helper that dies costs nothing."""
from __future__ import annotations

import concurrent.futures
import csv
import io
import os

import pytest

from fieldapp import batch
from fieldapp.batch import blocks, parallel
from fieldapp.batch.cells import RowError

from test_batch_bytes import _distinct_rows
from test_batch_repeats import HEADER, _reference, _rows

pytestmark = pytest.mark.skipif(not parallel.helpers_possible(),
                                reason="helper processes are forked on Linux only")


@pytest.fixture(autouse=True)
def _helpers_kept(monkeypatch):
    """Helpers kept however fast a chunk converts (tiny chunks here), so
    the helper way is the one tested; the switch is tested on its own."""
    monkeypatch.setattr(blocks, "HELPERS_PAY", 0)


def _text(rows, newline="\r\n", header=HEADER) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator=newline).writerows([header] + rows)
    return buf.getvalue()


def _run(text: str, jobs: int, chunk_rows: int = 64) -> tuple[bytes, RowError | None]:
    """(the bytes written, the error raised or None)."""
    raw = io.BytesIO()
    dst = io.TextIOWrapper(raw, encoding="utf-8", newline="")
    err = None
    try:
        batch.convert_csv(io.StringIO(text, newline=""), dst, chunk_rows=chunk_rows, jobs=jobs)
    except RowError as e:
        err = e
    dst.flush()
    return raw.getvalue(), err


def _blank_lines(text: str) -> str:
    """Blank lines of each kind between rows (csv.reader skips them)."""
    lines = text.splitlines(keepends=True)
    for i in range(len(lines) - 1, 1, -37):
        lines.insert(i, "\r\n" if i % 2 else "\n")
    return "".join(lines)


FILES = {
    "all different, quoted cells": lambda: _text(_distinct_rows(700)),
    "repeated readings": lambda: _text(_rows(700)),
    "blank lines": lambda: _blank_lines(_text(_distinct_rows(700))),
    "LF line ends": lambda: _text(_distinct_rows(500), newline="\n"),
    "CR line ends": lambda: _text(_distinct_rows(500), newline="\r"),
    "a cell with a line break": lambda: _text(_distinct_rows(300)[:200]
                                              + [["Bench 4\nnorth"] + _distinct_rows(1)[0][1:]]
                                              + _distinct_rows(300)[200:]),
    "short and long rows": lambda: _text([r[:5] if i % 9 == 0 else r + ["x"] if i % 11 == 0
                                          else r for i, r in enumerate(_distinct_rows(400))]),
    "a literal quote, then a cell with a line break": lambda: _literal_quote_then_break(255),
    "a literal quote alone": lambda: _text(_distinct_rows(400)).replace("Bench 4 µ", 'Bench 4"'),
}


def _literal_quote_then_break(at: int) -> str:
    """A file with a note column whose row ``at`` (255: the last of a block
    of 64) has a quote inside its unquoted site cell (a literal quote) and a
    note quoted over two lines: an even number of quotes on a line that is
    not a row of its own, its rest the first line of the next block."""
    rows = [r + [f"n{i}"] for i, r in enumerate(_distinct_rows(400))]
    lines = _text(rows, header=HEADER + ["note"]).split("\r\n")
    row = lines[at + 1].split(",")
    assert row[0] == "Farm A" and row[-1] == f"n{at}"
    row[0], row[-1] = 'Farm"A', f'"n{at}\r\nmore"'
    lines[at + 1] = ",".join(row)
    return "\r\n".join(lines)


def _reader_only(text: str, chunk_rows: int = 64) -> bytes:
    """The bytes where csv.reader reads the whole file (no blocks): the
    reference for the block reading."""
    real = blocks.put_line_blocks
    blocks.put_line_blocks = lambda src, in_order, shape, rows: (0, [])
    try:
        return _run(text, 1, chunk_rows)[0]
    finally:
        blocks.put_line_blocks = real


@pytest.mark.parametrize("name", list(FILES))
def test_helpers_write_what_one_process_writes(name):
    text = FILES[name]()
    one, err1 = _run(text, 1)
    two, err2 = _run(text, 2)
    three, err3 = _run(text, 3, chunk_rows=50)
    assert err1 is err2 is err3 is None
    assert one == _reader_only(text)
    assert two == one and three == _run(text, 1, chunk_rows=50)[0]
    assert one.count(b"\r\n") >= 300


def test_helpers_match_csv_writer_row_by_row():
    rows = _distinct_rows(450)
    assert _run(_text(rows), 2)[0] == _reference(rows).encode("utf-8")


@pytest.mark.parametrize("bad_line", [10, 70, 140, 200])
def test_a_bad_row_is_named_after_the_same_lines(bad_line):
    """Chunks of 64 rows: line 70 and 200 are in chunks a helper converts,
    10 and 140 in the program's own (the chunk after a helper's)."""
    rows = _distinct_rows(300)
    rows[bad_line - 2][1] = "1,2.3"
    one, err1 = _run(_text(rows), 1)
    two, err2 = _run(_text(rows), 2)
    assert err1 is not None and err2 is not None
    assert (err2.line, err2.field, err2.message) == (err1.line, err1.field, err1.message)
    assert err2.line == bad_line
    assert two == one                   # the header and every chunk before the bad one
    assert two.count(b"\r\n") == 1 + (bad_line - 2) // 64 * 64


def test_a_row_error_keeps_its_field_and_line_through_pickling():
    import pickle
    e = pickle.loads(pickle.dumps(RowError("line 7: bad", "value", 7)))
    assert (e.message, e.field, e.line) == ("line 7: bad", "value", 7)


def _lines_with_pid(k: int) -> bytes:
    return f"{k} {os.getpid()}\n".encode()


_PARENT = os.getpid()


def _dies_in_a_helper(k: int) -> bytes:
    if os.getpid() != _PARENT:
        os._exit(3)
    return f"{k}\n".encode()


def _through(convert, chunks: int, between=None) -> str:
    """The text ``convert`` gave chunks 0..chunks-1 put through an InOrder
    of 2 processes; ``between(in_order)`` is called after the first four."""
    out = []
    in_order = parallel.InOrder(convert, out.append, jobs=2)
    try:
        for k in range(chunks):
            if k == 4 and between:
                between(in_order)
            in_order.put(k)
        in_order.finish()
    finally:
        in_order.close()
    return b"".join(out).decode()


def test_chunks_come_back_in_order_from_more_than_one_process():
    got = [line.split() for line in _through(_lines_with_pid, 9).splitlines()]
    assert [int(k) for k, _ in got] == list(range(9))
    assert got[0][1] == str(os.getpid())            # the first chunk: no helper yet
    assert len({pid for _, pid in got}) == 2


def test_a_helper_that_dies_costs_its_chunk_nothing():
    assert _through(_dies_in_a_helper, 7).split() == [str(k) for k in range(7)]


def test_one_chunk_starts_no_helper(monkeypatch):
    def refused(*a, **k):
        raise AssertionError("a helper was started for a file of one chunk")
    monkeypatch.setattr(concurrent.futures, "ProcessPoolExecutor", refused)
    text = _text(_distinct_rows(60))
    assert _run(text, 2)[0] == _run(text, 1)[0]


def test_without_fork_everything_is_converted_here(monkeypatch):
    monkeypatch.setattr(parallel, "helpers_possible", lambda: False)
    monkeypatch.setattr(concurrent.futures, "ProcessPoolExecutor", None)
    assert parallel.InOrder(_lines_with_pid, list.append, jobs=4).jobs == 1
    text = _text(_distinct_rows(300))
    assert _run(text, 2)[0] == _run(text, 1)[0]


@pytest.mark.parametrize("name", ["all different, quoted cells", "blank lines",
                                  "a cell with a line break"])
def test_a_fast_file_goes_on_in_one_process_with_the_same_bytes(monkeypatch, name):
    """Where a chunk converts about as fast as it is read (repeated
    readings), the helpers are stopped after the first round and the rest
    is converted here: the same lines, none twice or lost."""
    stopped = []
    alone = parallel.InOrder.alone

    def spy(self):
        stopped.append(self.own_s)
        alone(self)
    monkeypatch.setattr(parallel.InOrder, "alone", spy)
    monkeypatch.setattr(blocks, "HELPERS_PAY", float("inf"))
    text = FILES[name]()
    assert _run(text, 2)[0] == _run(text, 1)[0]
    assert len(stopped) == 1 and stopped[0] > 0



class _StopsDecoding:
    """The lines of a text that cannot be decoded from line ``bad`` on (as a
    file read with the wrong encoding stops)."""

    def __init__(self, text: str, bad: int):
        self._lines = iter(io.StringIO(text, newline=""))
        self._left = bad

    def __iter__(self):
        return self

    def __next__(self):
        self._left -= 1
        if self._left < 0:
            raise UnicodeDecodeError("utf-8", b"\xe9", 0, 1, "invalid continuation byte")
        return next(self._lines)


@pytest.mark.parametrize("bad", [40, 100, 140, 210, 290])
def test_a_file_that_stops_being_utf8_writes_the_same_lines_first(bad):
    """A line that cannot be decoded: the chunks before its block are
    written, as one process writes them (the program's own chunk of the
    round too), then the decoding error is raised."""
    text = _text(_distinct_rows(400))
    outs = []
    for jobs in (1, 2):
        raw = io.BytesIO()
        dst = io.TextIOWrapper(raw, encoding="utf-8", newline="")
        with pytest.raises(UnicodeDecodeError):
            batch.convert_csv(_StopsDecoding(text, bad), dst, chunk_rows=64, jobs=jobs)
        dst.flush()
        outs.append(raw.getvalue())
    assert outs[0] == outs[1]
    assert outs[0].count(b"\r\n") == 1 + (bad - 1) // 64 * 64


def test_a_helper_killed_between_chunks_costs_nothing():
    """A helper ended from outside while idle (the system short of memory):
    the next chunks are converted here, every one once and in order."""
    def kill(in_order):
        for proc in list(in_order._pool._processes.values()):
            proc.kill()
            proc.join()
    got = [line.split() for line in _through(_lines_with_pid, 11, kill).splitlines()]
    assert [int(k) for k, _ in got] == list(range(11))
    assert all(pid == str(os.getpid()) for _, pid in got[4:])
