"""CSV export and import: RFC 4180, plain numbers, round trip, merge without doubles."""
from __future__ import annotations

import csv
import io

import pytest

from fieldapp import create_app, csvio, store

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True

BASE = {"site": "Block 3", "sample": "paste", "unit": "dS/m", "compensated": True}


def add(client, **kw):
    r = client.post("/api/readings", json={**BASE, **kw})
    assert r.status_code == 201, r.get_json()
    return r.get_json()


def export_text(client, site=None):
    r = client.get("/export.csv" + (f"?site={site}" if site else ""))
    assert r.status_code == 200
    assert r.mimetype == "text/csv"
    return r.get_data(as_text=True)


def parse(text):
    assert text.startswith("\ufeff")          # BOM: spreadsheets then read µ as µ
    return list(csv.DictReader(io.StringIO(text[1:], newline="")))


def test_export_header_rows_and_status(client):
    a = add(client, value="4.2", note='said "wet", then left')
    b = add(client, value="1413", unit="µS/cm", sample="water", temp_c="12",
            compensated=False, site="Well 2")
    client.post(f"/api/readings/{a['uuid']}/correct", json={"value": "4.3"})
    client.post(f"/api/readings/{b['uuid']}/void", json={"reason": "wrong bottle"})
    text = export_text(client)
    assert "\r\n" in text                       # RFC 4180 line ends
    rows = parse(text)
    for col in ("site", "taken_at", "sample", "value", "unit", "temp_c", "compensated",
                "ratio", "ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method",
                "flags", "status", "uuid"):
        assert col in rows[0]
    by_uuid = {r["uuid"]: r for r in rows}
    assert len(rows) == 3
    assert by_uuid[a["uuid"]]["status"] == "corrected"
    assert by_uuid[a["uuid"]]["note"] == 'said "wet", then left'
    assert by_uuid[b["uuid"]]["status"] == "void"
    assert by_uuid[b["uuid"]]["unit"] == "µS/cm"
    assert by_uuid[b["uuid"]]["void_reason"] == "wrong bottle"
    # taken_at is ISO 8601 with its offset
    assert by_uuid[a["uuid"]]["taken_at"][-6] in "+-"
    # only one site
    assert {r["site"] for r in parse(export_text(client, "Well 2"))} == {"Well 2"}


def test_numbers_in_plain_decimal_notation(client):
    add(client, value="0.00004", unit="S/cm")   # 0.04 dS/m: tiny numbers stay plain
    rows = parse(export_text(client))
    for col in ("value", "ec25_dS_m", "psi_s_MPa"):
        assert "e" not in rows[0][col].lower(), rows[0][col]
        float(rows[0][col])
    assert rows[0]["value"] == "0.00004"


def test_plain_number_helper():
    assert csvio.plain_number(1e-05) == "0.00001"
    assert csvio.plain_number(1234567.0) == "1234567"
    assert csvio.plain_number(-0.036) == "-0.036"
    assert csvio.plain_number(None) == ""
    assert float(csvio.plain_number(1.2345e-12)) == 1.2345e-12


def test_formula_like_text_is_neutralized_and_numbers_stay_numbers(client):
    add(client, value="2.5", note="=HYPERLINK(\"x\")", meter="@meter")
    row = parse(export_text(client))[0]
    assert row["note"].startswith("'=")
    assert row["meter"] == "'@meter"
    assert row["psi_s_MPa"].startswith("-")      # a negative number is not neutralized


def test_export_streams(client):
    add(client, value="2.5")
    r = client.get("/export.csv")
    assert r.is_streamed


def test_round_trip_preserves_every_field_and_merge_does_not_double(client, tmp_path):
    a = add(client, value="4.2", depth_cm="30", meter="m1", note="x, y", temp_c="21",
            compensated=False, replicate_group="S1", taken_at="2026-04-01T08:15:00-05:00")
    add(client, value="0.9", sample="extract", ratio="1:2.5", texture="loam", unit="mS/cm",
        site="Block 4")
    w = add(client, value="700", sample="water", unit="ppm", tds_factor="0.7", site="Well",
            compensated=False)
    assert client.post(f"/api/readings/{w['uuid']}/ack", json={
        "code": "temperature_unknown", "note": "sample at air temp, about 25"}).status_code == 201
    client.post(f"/api/readings/{a['uuid']}/correct", json={"value": "4.0"})
    first = export_text(client)

    other = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "other")})
    conn = store.connect(other.config["DATABASE"])
    counts = csvio.import_csv(conn, io.StringIO(first))
    assert counts == {"added": 4, "skipped": 0, "voided": 0}
    again = csvio.import_csv(conn, io.StringIO(first))
    assert again["added"] == 0 and again["skipped"] == 4
    conn.close()
    second = other.test_client().get("/export.csv").get_data(as_text=True)
    strip = lambda t: [{k: v for k, v in r.items() if k != "recorded_at"} for r in parse(t)]
    assert strip(second) == strip(first)
    assert any(r["flag_acks"] == "temperature_unknown=sample at air temp, about 25"
               for r in parse(second))
    # recorded_at is kept as well
    assert [r["recorded_at"] for r in parse(second)] == [r["recorded_at"] for r in parse(first)]


def test_import_of_a_foreign_file_imports_nothing(client, db):
    add(client, value="4.2")
    for bad in ("name,age\nx,3\n", "", "\x00\x01garbage"):
        with pytest.raises(csvio.ImportError_):
            csvio.import_csv(db, io.StringIO(bad))
    assert db.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 1


def test_import_with_one_bad_row_imports_nothing(client, db, tmp_path):
    add(client, value="4.2")
    text = export_text(client)
    rows = parse(text)
    rows.append({**rows[0], "uuid": "bbbbbbbb-0000-4000-8000-000000000001", "value": "4.3"})
    rows.append({**rows[0], "uuid": "bbbbbbbb-0000-4000-8000-000000000002", "value": "oops"})
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(rows[0]))
    w.writeheader()
    w.writerows(rows)
    other = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "o")})
    conn = store.connect(other.config["DATABASE"])
    with pytest.raises(csvio.ImportError_, match="line 4"):
        csvio.import_csv(conn, io.StringIO(buf.getvalue()))
    assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 0
    assert conn.execute("SELECT COUNT(*) FROM sites").fetchone()[0] == 0
    conn.close()


# ---- formula prefixing: every sign a spreadsheet reads, also behind invisible characters

from hypothesis import given, settings, strategies as st   # noqa: E402

FORMULA_SIGNS = ["=", "+", "-", "@", "\t", "\r",
                 "\uff1d", "\uff0b", "\uff0d", "\uff20", "\ufe66"]   # ＝＋－＠ ﹦
INVISIBLE = ["\u200b", "\u200c", "\u200d", "\u2060", "\ufeff", "\u200e", "\u202e", " ",
             "\u00a0", "\u3000", "\x00", "\n"]


@pytest.mark.parametrize("sign", FORMULA_SIGNS)
def test_full_width_small_and_hidden_formula_signs_are_prefixed(sign):
    # OWASP CSV injection guidance names = + - @ tab CR (from memory); the
    # full-width and small forms are folded to them by some spreadsheets.
    assert csvio.neutralize(sign + "1+1") == "'" + sign + "1+1"
    for inv in INVISIBLE:
        s = inv + inv + sign + "HYPERLINK(1)"
        assert csvio.neutralize(s) == "'" + s
    assert csvio.neutralize("Bench 4 " + sign) == "Bench 4 " + sign   # only at the start


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.text(alphabet=st.sampled_from(FORMULA_SIGNS + INVISIBLE + ["'", "a", "1", " "]),
               max_size=8) | st.text(max_size=12))
def test_neutralize_then_unneutralize_gives_back_what_was_typed(s):
    out = csvio.neutralize(s)
    assert csvio.unneutralize(out) == s
    if out == s:        # left alone: nothing a spreadsheet would run
        assert not s.startswith("'") and not any(
            c in FORMULA_SIGNS for c in s.lstrip("".join(INVISIBLE))[:1])


@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.lists(st.none() | st.floats() | st.sampled_from([-0.0, 1e-05, 1e16, 2.0 ** 60]),
                max_size=40),
       st.lists(st.none() | st.text(max_size=10) | st.sampled_from(
           ["1:5", "007", "2026-05-14T09:30:00+02:00", "=1", "a1"]), max_size=40))
def test_a_column_at_a_time_gives_the_cells_one_at_a_time_does(numbers, texts):
    # the export's column helpers against the one-cell functions they stand for
    from fieldapp.csvio.cells import neutralize_all, plain_numbers
    assert plain_numbers(numbers) == [csvio.plain_number(x) for x in numbers]
    assert neutralize_all(texts) == [csvio.neutralize(t) for t in texts]
    times = [t for t in texts if t is not None]
    cells = csvio.ReadableCells()
    assert cells.local_texts(times) == [cells.local_text(t) for t in times]


def test_a_note_typed_with_an_apostrophe_survives_export_and_import(client, tmp_path):
    a = add(client, value="2.0", note="'=1+1")
    b = add(client, value="2.1", note="'plain")
    text = export_text(client)
    other = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "other")})
    conn = store.connect(other.config["DATABASE"])
    csvio.import_csv(conn, io.StringIO(text))
    assert store.get_reading(conn, a["uuid"])["note"] == "'=1+1"
    assert store.get_reading(conn, b["uuid"])["note"] == "'plain"
    conn.close()


@pytest.mark.parametrize("ending", ["\r\n", "\n", "\r"])
def test_import_reads_lines_as_the_csv_module_does(client, tmp_path, ending):
    """The import walks the file's lines in place: ended by CRLF, LF or CR as
    Python's csv module reads a file opened with newline="" (the reference),
    while a note's own line breaks, including ones str.splitlines would split
    at (U+2028, NEL, form feed), stay inside its cell."""
    notes = ["two\nlines", "sep\u2028arated", "next\x85line", "page\x0cbreak", "plain"]
    made = [add(client, value=f"{2 + i / 10:.1f}", note=n) for i, n in enumerate(notes)]
    text = export_text(client)
    rows = list(csv.reader(io.StringIO(text[1:], newline="")))
    buf = io.StringIO()
    csv.writer(buf, lineterminator=ending, quoting=csv.QUOTE_ALL).writerows(rows)
    other = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "other")})
    conn = store.connect(other.config["DATABASE"])
    counts = csvio.import_csv(conn, io.StringIO("\ufeff" + buf.getvalue(), newline=""))
    assert counts["added"] == len(notes)
    for rec, note in zip(made, notes):
        assert store.get_reading(conn, rec["uuid"])["note"] == note
    conn.close()


@pytest.mark.parametrize("ending", ["\r\n", "\r"])
@pytest.mark.parametrize("block", [1, 2, 7])
def test_lines_split_across_read_blocks_are_read_whole(client, monkeypatch, ending, block):
    """The import reads the file a block at a time; a line (or a CRLF) cut by
    a block's end reads as csv.reader reads the whole text (the reference)."""
    from fieldapp.csvio import reading
    add(client, value="2.5", note="a\r\nnote")
    add(client, value="3.5", note="plain")
    rows = list(csv.reader(io.StringIO(export_text(client)[1:], newline="")))
    buf = io.StringIO()
    csv.writer(buf, lineterminator=ending).writerows(rows)
    monkeypatch.setattr(reading, "_READ_BLOCK", block)
    got = reading.read_export(io.StringIO("\ufeff" + buf.getvalue(), newline=""))
    assert [r["note"] for r in got] == [r[rows[0].index("note")] for r in rows[1:]]
    assert len(got) == 2


def test_export_lines_are_the_text_csv_writer_writes(client):
    """The export joins cells it quoted a column at a time (fieldapp.csvtext);
    Python's csv.writer (RFC 4180 quoting, the excel dialect) is the reference:
    reading the export with csv.reader and writing the rows back with
    csv.writer gives the same text, character for character."""
    add(client, value="4.2", note='said "wet", then left')
    add(client, value="1.1", note="two\r\nlines, and a comma", site='Bench "4", east')
    add(client, value="2.2", note="=1+2", sample="extract", ratio="1:5", texture="loam",
        compensated=False, temp_c="31")
    add(client, value="0.9", note="plain")
    text = export_text(client)[1:]
    rows = list(csv.reader(io.StringIO(text, newline="")))
    again = io.StringIO()
    csv.writer(again, lineterminator="\r\n").writerows(rows)
    assert text == again.getvalue()
    assert len(rows) == 5 and any('"wet"' in c for r in rows for c in r)


def test_csv_quoted_matches_csv_writer_cell_by_cell():
    """fieldapp.csvtext.csv_quoted against Python's csv.writer, one cell per row."""
    from fieldapp.csvtext import csv_quoted
    cells = ["", "a", "a,b", 'q"q', "line\nbreak", "cr\rx", "crlf\r\n", " lead", "µS/cm",
             "'1:5", None, '"', ",", "x" * 50]
    for cell in cells:
        buf = io.StringIO()
        csv.writer(buf, lineterminator="\r\n").writerow(["x", cell])
        assert "x," + csv_quoted([cell])[0] + "\r\n" == buf.getvalue(), repr(cell)
    assert csv_quoted(["a", "b"]) == ["a", "b"]


def test_neutralize_all_of_a_column_is_neutralize_of_each_cell():
    """The one-search shortcut for a column of usual cells (uuids, times)
    never passes over a cell that needs its apostrophe: random short texts of
    the characters that matter (formula signs, digits and separators a
    spreadsheet converts, NUL, a non-ASCII letter), against neutralize itself."""
    import random
    import string
    import uuid

    from fieldapp.csvio.cells import neutralize, neutralize_all
    rnd = random.Random(3)
    alphabet = string.ascii_letters + string.digits + ":/.,%-+ eEaApPmM=@'\t\x00é"
    for _ in range(5000):
        col = ["".join(rnd.choice(alphabet) for _ in range(rnd.randint(0, 6)))
               for _ in range(rnd.randint(1, 5))]
        assert neutralize_all(col) == [neutralize(c) for c in col], col
    ids = [str(uuid.UUID(int=rnd.getrandbits(128))) for _ in range(200)]
    assert neutralize_all(ids) == ids
    digits_only = "12345678-1234-1234-1234-123456789012"     # a spreadsheet reads it as a number
    assert neutralize_all(ids + [digits_only])[-1] == "'" + digits_only
