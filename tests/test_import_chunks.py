"""A long import commits in chunks but lands whole: other saves go on between
chunks, a run killed midway adds nothing and the next run carries on."""
from __future__ import annotations

import io

import pytest

import sys
from pathlib import Path

from fieldapp import csvio, store

sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))
import bench  # noqa: E402  (tests/benchmarks/bench.py: the invented log builder)

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True


@pytest.fixture
def source(tmp_path):
    """An export of 1,000 invented readings with a few corrections among them."""
    db_path, _ = bench.make_log(tmp_path / "src", 1000)
    conn = store.connect(db_path)
    from fieldapp.records import save_reading
    picked = [r["uuid"] for r in conn.execute("SELECT uuid FROM readings WHERE sample IN ('water', 'feed') ORDER BY id LIMIT 3")]
    for u in picked:
        old = store.get_reading(conn, u)
        row, _ = save_reading(conn, {"site": old["site"], "sample": old["sample"],
                                     "value": "9.9", "unit": "dS/m", "compensated": True,
                                     "taken_at": old["taken_at"], "supersedes": u})
        save_reading(conn, {"site": old["site"], "sample": old["sample"], "value": "9.8",
                            "unit": "dS/m", "compensated": True, "taken_at": old["taken_at"],
                            "supersedes": row["uuid"]})
    buf = io.StringIO()
    csvio.export(conn, buf)
    conn.close()
    return buf.getvalue()


def dump(conn):
    return sorted((r["uuid"], r["value"], r["status"], r["supersedes_uuid"] or "")
                  for r in store.iter_readings(conn))


def test_killed_import_adds_nothing_and_the_next_run_resumes(tmp_path, source, monkeypatch,
                                                            log_target):
    monkeypatch.setattr(csvio.importing, "IMPORT_CHUNK", 150)
    conn = store.connect(log_target)
    real, calls = csvio.importing._convert_chunk, []

    def killed_after_three(chunk):
        if len(calls) == 3:
            raise KeyboardInterrupt          # the laptop closed mid-import
        calls.append(len(chunk))
        return real(chunk)

    monkeypatch.setattr(csvio.importing, "_convert_chunk", killed_after_three)
    with pytest.raises(KeyboardInterrupt):
        csvio.import_csv(conn, io.StringIO(source))
    assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 0
    assert conn.execute("SELECT COUNT(*) FROM sites").fetchone()[0] == 0
    assert conn.execute("SELECT COUNT(*) FROM import_staging").fetchone()[0] == 450
    conn.close()

    conn = store.connect(log_target)     # a new run after the restart
    calls.clear()
    monkeypatch.setattr(csvio.importing, "_convert_chunk", lambda chunk: calls.append(len(chunk))
                        or real(chunk))
    counts = csvio.import_csv(conn, io.StringIO(source))
    assert counts["added"] == 1006
    assert sum(calls) == 1006 - 450, "the staged chunks were converted again"
    assert conn.execute("SELECT COUNT(*) FROM import_staging").fetchone()[0] == 0
    assert conn.execute("SELECT COUNT(*) FROM import_jobs").fetchone()[0] == 0

    fresh = store.connect(tmp_path / "b.sqlite3")
    csvio.import_csv(fresh, io.StringIO(source))
    assert dump(conn) == dump(fresh)
    assert sum(1 for r in dump(conn) if r[2] == "corrected") == 6


def test_saves_go_on_between_chunks(source, monkeypatch, log_target):
    from conftest import lock_wait
    monkeypatch.setattr(csvio.importing, "IMPORT_CHUNK", 200)
    conn = store.connect(log_target)
    other = store.connect(log_target, upgrade=False)
    lock_wait(other, 200)                            # a save that waits 200 ms fails
    real, done = csvio.importing._convert_chunk, []

    def convert_then_save(chunk):
        with store.transaction(other):
            other.execute("INSERT INTO sites (name, created_at) VALUES (?, 'x')",
                          (f"tablet save {len(done)}",))
        done.append(1)
        return real(chunk)

    monkeypatch.setattr(csvio.importing, "_convert_chunk", convert_then_save)
    csvio.import_csv(conn, io.StringIO(source))
    assert len(done) == 6
    assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 1006


def test_a_save_meanwhile_of_a_staged_uuid_refuses_the_import(source, monkeypatch, log_target):
    monkeypatch.setattr(csvio.importing, "IMPORT_CHUNK", 500)
    conn = store.connect(log_target)
    real = csvio.importing._convert_chunk

    def meanwhile(chunk):
        out = real(chunk)
        if chunk[0]["_line"] == 2:            # the tablet sends one of the file's readings
            rec = {**out[5]}
            store.insert_reading(conn, rec, fetch=False)
        return out

    monkeypatch.setattr(csvio.importing, "_convert_chunk", meanwhile)
    with pytest.raises(csvio.ImportError_, match="changed while"):
        csvio.import_csv(conn, io.StringIO(source))
    assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 1
    assert conn.execute("SELECT COUNT(*) FROM import_staging").fetchone()[0] == 0
    assert conn.execute("SELECT COUNT(*) FROM import_jobs").fetchone()[0] == 0   # job dropped


class _Pipe(io.StringIO):
    """A source that cannot seek (a pipe, an upload read once)."""

    def seekable(self):
        return False

    def seek(self, *a):
        raise io.UnsupportedOperation("seek")


def test_a_source_that_cannot_seek_imports_the_same(tmp_path, source, log_target):
    conn = store.connect(log_target)
    counts = csvio.import_csv(conn, _Pipe(source))
    assert counts["added"] == 1006 and counts["skipped"] == 0
    fresh = store.connect(tmp_path / "b.sqlite3")
    csvio.import_csv(fresh, io.StringIO(source))
    assert dump(conn) == dump(fresh)
