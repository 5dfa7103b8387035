"""Import, last step: convert and stage the new rows in chunks, then land
them in one short transaction (see :func:`import_rows`)."""
from __future__ import annotations

from typing import IO

from .. import __version__, store
from ..science import InputError
from .cells import _parse_acks
from .columns import COLUMNS
from .plan import Plan
from .reading import ImportError_, iter_export

#: New rows converted and staged at a time (one short transaction each).
IMPORT_CHUNK = 5000


def _payload(r: dict) -> dict:
    return {"uuid": r["uuid"], "site": r["site"], "sample": r["sample"],
            "value": r["value"], "unit": r["unit"], "temp_c": r["temp_c"],
            "compensated": r["compensated"] == "yes", "ratio": r["ratio"],
            "sp": r["sp_pct"], "texture": r["texture"], "salt_type": r["salt_type"] or None,
            "tds_factor": r["tds_factor"], "theta_g_pct": r["theta_g_pct"],
            "matric_MPa": r["matric_MPa"], "depth_cm": r["depth_cm"],
            "meter": r["meter"], "replicate_group": r["replicate_group"],
            "note": r["note"], "taken_at": r["taken_at"],
            "visited_by": r["visited_by"], "supersedes": r["supersedes_uuid"] or None}


def import_rows(conn, rows: list[dict]) -> dict:
    """Merge checked rows (:func:`read_export`) into the log, all of them or
    none (:func:`import_csv` for a file). Returns counts."""
    import hashlib
    h = hashlib.sha256()
    for r in rows:
        h.update(repr([r.get(c) for c in COLUMNS]).encode("utf-8", "replace"))
    return _merge(conn, iter(rows), "rows:" + h.hexdigest())


def import_csv(conn, src: IO[str]) -> dict:
    """Merge an export file into the log, the whole file or nothing of it.
    Returns counts (added, skipped, voided).

    The file is read once, a block at a time (:func:`iter_export`), and checked
    against itself and the log as it goes (:class:`Plan`); links between rows
    are resolved once every row is read, so any row order gives the same log.
    New rows are converted in chunks by the vectorized core (the result shown
    for each reading); the numbers computed where the reading was taken are
    kept as exported, so a merged log shows the same figures as its source.

    A long file never holds the log's write lock for long: each converted
    chunk is staged (``import_staging``) in its own short transaction, while
    saves from tablets go on between chunks, and one short final transaction
    moves the staged rows into ``readings`` (and adds the file's voids and
    acknowledgements). Staged rows are not readings: a run killed midway has
    added nothing, and running the same file again carries on from the last
    staged chunk (the job is named by a digest of the file; a reading the log
    gained meanwhile among the staged ones refuses the import, to be run
    again). A refused file leaves nothing staged. Called inside a caller's
    open transaction it all happens in that transaction."""
    src = _rewindable(src)
    return _merge(conn, iter_export(src), "file:" + _file_digest(src))


def _rewindable(src: IO[str]) -> IO[str]:
    """``src``, or a copy of it in a temporary file when it cannot seek."""
    try:
        if src.seekable():
            return src
    except (AttributeError, ValueError):
        pass
    import shutil
    import tempfile
    copy = tempfile.TemporaryFile("w+", encoding="utf-8", newline="")
    shutil.copyfileobj(src, copy)
    copy.seek(0)
    return copy


def _file_digest(src: IO[str]) -> str:
    import hashlib
    h = hashlib.sha256()
    start = src.tell()
    while piece := src.read(1 << 20):
        h.update(piece.encode("utf-8", "surrogatepass"))
    src.seek(start)
    return h.hexdigest()


def _blocks(rows, size: int):
    block = []
    for r in rows:
        block.append(r)
        if len(block) == size:
            yield block
            block = []
    if block:
        yield block


def _merge(conn, rows, digest: str) -> dict:
    """Read, check and stage ``rows``, then land them (see :func:`import_csv`)."""
    import sqlite3
    plan = Plan(conn)
    try:
        done = _merge_planned(conn, plan, rows, digest)
    except BaseException:
        try:
            plan.close()
        except sqlite3.Error:     # an aborted caller's transaction: it rolls back
            pass
        raise
    plan.close()
    return done


def _merge_planned(conn, plan: Plan, rows, digest: str) -> dict:
    with store.transaction(conn):
        job = store.import_job(conn, digest)
    try:
        late = _stage_all(conn, job, plan, rows)
        plan.finish()
        if late is not None:        # a conversion refusal comes after the file's own
            raise late
        with store.transaction(conn):
            clash = store.import_clashes(conn, job["id"])
            if clash is None:
                store.set_import_depths(conn, job["id"])
                try:
                    added = store.finish_import_job(conn, job["id"])
                except store.StoreError as e:
                    raise ImportError_(f"{e.message} Nothing was imported.", e.field) from None
                voids = _merge_acks_and_voids(conn)
    except InputError as e:
        # a refused file leaves nothing staged (a kill leaves its chunks to resume)
        with store.transaction(conn):
            store.drop_import_job(conn, job["id"])
        if isinstance(e, ImportError_) and "Nothing was imported" not in e.message:
            raise ImportError_(e.message + " Nothing was imported.", e.field) from None
        raise
    if clash is not None:
        with store.transaction(conn):
            store.drop_import_job(conn, job["id"])
        raise ImportError_(f"The log changed while the file was imported ({clash}); "
                           "nothing was imported. Run the import again.", "file")
    return {"added": added, "skipped": plan.rows - plan.fresh, "voided": voids}


def _stage_all(conn, job: dict, plan: Plan, rows) -> ImportError_ | None:
    """Index every row and stage the new ones past what the job staged
    already, a chunk per short transaction. Once the file shows a refusal
    nothing more is converted; a conversion refusal is returned, to be raised
    after the checks of the whole file."""
    done, seq, pending, late = job["rows_staged"], 0, [], None
    for block in _blocks(rows, IMPORT_CHUNK):
        for r in plan.add_block(block):     # seq: rows new to the log so far
            seq += 1
            if seq > done and late is None and plan.error is None:
                pending.append(r)
            if len(pending) == IMPORT_CHUNK:
                late = _stage(conn, job["id"], seq - len(pending), pending)
                pending = []
    if pending and late is None and plan.error is None:
        late = _stage(conn, job["id"], seq - len(pending), pending)
    return late


def _stage(conn, job_id: int, first_seq: int, chunk: list[dict]) -> ImportError_ | None:
    try:
        recs = _convert_chunk(chunk)
    except ImportError_ as e:
        return e
    with store.staging_transaction(conn):
        store.stage_import_rows(conn, job_id, first_seq, [(0, rec) for rec in recs])
    return None


def _convert_chunk(chunk: list[dict]) -> list[dict]:
    from ..records import build_record, check_fields
    from ..records import RowInputError, convert_readings
    payloads = [_payload(r) for r in chunk]
    for r, p in zip(chunk, payloads):
        try:
            check_fields(p)
        except InputError as e:
            raise ImportError_(f"line {r['_line']}: {e.message} Nothing was "
                               "imported.", e.field) from None
    try:
        results = convert_readings(payloads)
    except RowInputError as e:
        raise ImportError_(f"line {chunk[e.index]['_line']}: {e.message} Nothing "
                           "was imported.", e.field) from None
    recs = []
    for r, payload, result in zip(chunk, payloads, results):
        result["imported"] = True
        try:
            rec = build_record(payload, result=result, fields_checked=True)
        except (InputError, store.StoreError) as e:
            raise ImportError_(f"line {r['_line']}: {e.message} Nothing was "
                               "imported.", getattr(e, "field", None)) from None
        for c in ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa",
                  "psi_s_method", "recorded_at"):
            rec[c] = r[c] if r[c] != "" else None
        rec["flags"] = r["flags"]
        rec["app_version"] = r["app_version"] or __version__
        rec["supersedes_uuid"] = r["supersedes_uuid"]
        recs.append(rec)
    return recs


def _merge_acks_and_voids(conn) -> int:
    """Acknowledgements and voids the file carries that the log lacks (the
    plan's rows with either, ``store.plan_marks``, a part at a time)."""
    voids = 0
    for wanted in store.plan_marks(conn):
        brief = store.readings_brief(conn, [r["uuid"] for r in wanted])
        acks = store.acks_for_readings(conn, [brief[r["uuid"]]["id"] for r in wanted])
        for r in wanted:
            b = brief[r["uuid"]]
            if r["flag_acks"]:
                have = {a["code"] for a in acks[b["id"]]}
                for code, note in _parse_acks(r["flag_acks"]):
                    if code not in have:
                        store.insert_ack(conn, b["id"], code, note)
                        have.add(code)
            if r["status"] == "void" and b["status"] == "current":
                store.insert_void(conn, b["id"], " ".join(r["void_reason"].split()),
                                  r["voided_at"] or None)
                voids += 1
    return voids
