"""The import's plan lives in the connection's temporary tables, and its
refusals come in the order a check of the whole file gives: by kind (the
file's own cells and repeats, then corrections of themselves or twice, then
targets, then circles, then statuses), and within a kind the first line.

Issue 12: the plan kept an entry per reading in memory (some 330 bytes a
row); now it is checked in SQL, so these pin the order of its refusals on
both backends, across blocks of rows."""
from __future__ import annotations

import csv
import io

import pytest

from fieldapp import csvio

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True


@pytest.fixture
def rows(client):
    """Ten new readings of one site, made from one exported row (lines 2-11)."""
    r = client.post("/api/readings", json={"site": "Block 3", "sample": "paste",
                                           "value": "2.0", "unit": "dS/m",
                                           "compensated": True})
    assert r.status_code == 201
    text = client.get("/export.csv").get_data(as_text=True)
    template = next(csv.DictReader(io.StringIO(text[1:], newline="")))
    template.update(flag_acks="", void_reason="", voided_at="", supersedes_uuid="",
                    status="current")
    return [{**template, "uuid": f"aaaaaaaa-0000-4000-8000-{i:012d}",
             "value": f"{1 + i / 10:.1f}"} for i in range(10)]


def link(rows, old: int, new: int) -> None:
    rows[new]["supersedes_uuid"] = rows[old]["uuid"]
    rows[old]["status"] = "corrected"


def text_of(rows) -> str:
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=csvio.EXPORT_COLUMNS, lineterminator="\r\n")
    w.writeheader()
    w.writerows(rows)
    return buf.getvalue()


def refusal(db, rows) -> str:
    before = db.execute("SELECT COUNT(*) FROM readings").fetchone()[0]
    with pytest.raises(csvio.ImportError_) as e:
        csvio.import_csv(db, io.StringIO(text_of(rows)))
    assert db.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == before
    assert db.execute("SELECT COUNT(*) FROM import_staging").fetchone()[0] == 0
    assert "Nothing was imported" in e.value.message
    return e.value.message


@pytest.fixture(params=[3, 5000], ids=["blocks-of-3", "one-block"])
def chunk(request, monkeypatch):
    monkeypatch.setattr(csvio.importing, "IMPORT_CHUNK", request.param)
    return request.param


def test_a_correction_of_itself_or_a_second_one_the_first_line_of_either(db, rows, chunk):
    rows[7]["supersedes_uuid"] = rows[7]["uuid"]            # line 9
    link(rows, 1, 2)
    rows[3]["supersedes_uuid"] = rows[1]["uuid"]            # line 5, after line 4
    assert "lines 4 and 5 both correct " + rows[1]["uuid"] in refusal(db, rows)
    rows[7]["supersedes_uuid"] = rows[7]["uuid"]
    rows[0]["supersedes_uuid"] = rows[0]["uuid"]            # line 2
    assert refusal(db, rows).startswith(f"line 2: the reading {rows[0]['uuid']} "
                                        "corrects itself")


def test_the_first_circle_is_named_with_its_own_lines_before_any_status(db, rows, chunk):
    rows[0]["status"] = "corrected"                         # line 2: a status refusal
    link(rows, 8, 6)
    link(rows, 6, 8)                                        # lines 8, 10
    link(rows, 5, 3)
    link(rows, 3, 9)
    link(rows, 9, 5)                                        # lines 5, 7, 11
    msg = refusal(db, rows)
    assert msg.startswith("lines 5, 7, 11 correct one another in a circle"), msg
    rows[5]["supersedes_uuid"] = ""                         # the chain 5 <- 3 <- 9 is fine
    rows[6]["supersedes_uuid"] = ""
    assert refusal(db, rows).startswith("line 2 says corrected, but no line corrects it")
    rows[0]["status"] = "current"
    assert refusal(db, rows).startswith("line 10 says corrected, but no line corrects it")


def test_a_target_nowhere_comes_before_a_circle(db, rows, chunk):
    link(rows, 1, 2)
    link(rows, 2, 1)                                        # a circle, lines 3 and 4
    rows[9]["supersedes_uuid"] = "eeeeeeee-0000-4000-8000-000000000009"
    assert refusal(db, rows).startswith("line 11 corrects eeeeeeee-0000-4000-8000-"
                                        "000000000009, which is neither in the file")


def test_repeats_across_blocks_are_skipped_or_refused_and_chains_land(db, rows, chunk):
    link(rows, 4, 0)
    link(rows, 0, 9)                                        # 4 <- 0 <- 9: depths 0, 1, 2
    counts = csvio.import_csv(db, io.StringIO(text_of(rows + [dict(rows[0])])))
    assert counts["added"] == 10 and counts["skipped"] == 1
    got = {r["uuid"]: r["supersedes_uuid"] for r in db.execute(
        "SELECT r.uuid, p.uuid AS supersedes_uuid FROM readings r LEFT JOIN readings p "
        "ON p.id = r.supersedes_id WHERE r.uuid LIKE 'aaaaaaaa-%'")}
    assert got == {r["uuid"]: r["supersedes_uuid"] or None for r in rows}
    for t in ("import_plan", "import_plan_marks", "import_plan_targets"):
        assert db.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0] == 0, t
    other = [{**r, "uuid": r["uuid"].replace("aaaaaaaa", "bbbbbbbb"),
              "supersedes_uuid": ""} for r in rows]
    for r in other:
        r["status"] = "current"
    first, second = {**other[0], "value": "7.5"}, {**other[1], "value": "7.5"}
    msg = refusal(db, other[:5] + [first, second] + other[5:])
    assert msg.startswith(f"lines 2 and 7 carry the same uuid {other[0]['uuid']}"), msg
    msg = refusal(db, other[:5] + [second, first] + other[5:])
    assert msg.startswith(f"lines 3 and 7 carry the same uuid {other[1]['uuid']}"), msg


def test_the_plan_is_in_temporary_tables_while_the_file_is_read(db, rows, monkeypatch):
    monkeypatch.setattr(csvio.importing, "IMPORT_CHUNK", 4)
    seen, convert = [], csvio.importing._convert_chunk

    def counting(chunk):
        seen.append(db.execute("SELECT COUNT(*) FROM import_plan").fetchone()[0])
        return convert(chunk)
    monkeypatch.setattr(csvio.importing, "_convert_chunk", counting)
    csvio.import_csv(db, io.StringIO(text_of(rows)))
    assert seen == [4, 8, 10]          # the entries of the blocks read so far
    assert db.execute("SELECT COUNT(*) FROM import_plan").fetchone()[0] == 0
