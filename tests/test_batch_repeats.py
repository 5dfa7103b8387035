"""convert-csv converts each distinct reading of a chunk once and gives its
results to every row that repeats it. The reference here is Python's csv
module writing, row by row, the results of converting every row (no row
shares anything), with the one formatter's six significant digits."""
from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from fieldapp import batch
from fieldapp.science import convert

# invented readings (the demo's kind of data), each repeated many times
READINGS = [
    ["Farm A", "1.2", "dS/m", "paste", "", "", "yes", "barley", ""],
    ["Block 3, north", "640", "µS/cm", "extract", "1:5", "20", "no", "", "loam"],
    ["Bench 4", "2.0", "mS/cm", "feed", "", "", "yes", "", ""],
    ['the "old" bed', "0.00004", "dS/m", "water", "", "18.5", "no", "", ""],
    ["Farm A", "45", "mS/cm", "water", "", "", "yes", "", ""],
    ["Block 3", "3300000", "µS/cm", "drain", "", "30", "no", "", ""],
]
HEADER = ["site", "value", "unit", "sample", "ratio", "temp_c", "compensated", "crop",
          "texture"]


def _rows(n, sites=4):
    """The readings over and over; the site (not read by the conversion)
    takes ``sites`` spellings, so rows repeat whole or only in the reading."""
    return [[f"{r[0]} {i % sites}"] + r[1:] for i, r in
            ((i, READINGS[(i + i // 7) % len(READINGS)]) for i in range(n))]


def _reference(rows) -> str:
    """Every row converted on its own and written by csv.writer."""
    out_cols = [c for c in batch.OUTPUT_COLUMNS if c not in HEADER]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(HEADER + out_cols)
    for line, row in enumerate(rows, start=2):
        cols = {c: (cell,) for c, cell in zip(HEADER, row)}
        out = convert.convert_batch(batch.columns_to_batch(cols, 1, line))
        cells = []
        for c in out_cols:
            v = out[c][0] if c != "flags" else out[c].codes_column()[0]
            if isinstance(v, (float, np.floating)):
                cells.append(batch.format_number(v))
            else:
                cells.append("" if v is None else str(v))
        w.writerow(row + cells)
    return buf.getvalue()


@pytest.mark.parametrize("sites, distinct", [(4, len(READINGS) * 4), (1000, len(READINGS))])
@pytest.mark.parametrize("chunk_rows", [60, 50_000])
def test_repeated_readings_get_the_results_each_would_get_alone(chunk_rows, sites, distinct):
    rows = _rows(300, sites)
    src = io.StringIO()
    csv.writer(src, lineterminator="\r\n").writerows([HEADER] + rows)
    src.seek(0)
    texts = batch.lines.row_texts(rows, HEADER, {c: i for i, c in enumerate(HEADER)})
    found = batch._distinct_rows(rows, texts, list(range(1, 9)))
    assert found is not None and len(found[0]) == distinct    # the repeat path runs
    dst = io.StringIO()
    assert batch.convert_csv(src, dst, chunk_rows=chunk_rows) == 300
    assert dst.getvalue() == _reference(rows)


def test_a_bad_cell_among_repeats_names_its_own_line():
    rows = _rows(200)
    rows[150] = ["Farm A", "1,2,3", "dS/m", "paste", "", "", "yes", "", ""]
    rows[170] = ["Farm A", "1.5", "dS/m", "swamp", "", "", "yes", "", ""]
    assert_refused_at(rows, 152)


def assert_refused_at(rows, line: int):
    """convert-csv of ``rows`` refuses the file naming ``line``."""
    src = io.StringIO()
    csv.writer(src, lineterminator="\r\n").writerows([HEADER] + rows)
    src.seek(0)
    with pytest.raises(batch.RowError) as e:
        batch.convert_csv(src, io.StringIO())
    assert e.value.line == line and f"line {line}" in e.value.message
