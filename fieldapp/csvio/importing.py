"""Import, last step: convert and stage the new rows in chunks, then land
them in one short transaction (see :func:`import_rows`)."""
from __future__ import annotations

from typing import IO

from .. import __version__, store
from ..science import InputError
from .cells import _parse_acks
from .columns import COLUMNS
from .plan import plan_import
from .reading import ImportError_, read_export

IMPORT_CHUNK = 2000


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
    """Merge rows into the log, the whole file or nothing of it. Returns counts.

    The whole file is checked first (:func:`plan_import`): links between rows
    are resolved after every row is read, so any row order gives the same log.
    New rows are converted in chunks by the vectorized core (the result shown
    for each reading); the numbers computed where the reading was taken are
    kept as exported, so a merged log shows the same figures as its source.

    A long file never holds the log's write lock for long: each converted
    chunk is staged (``import_staging``) in its own short transaction, while
    saves from tablets go on between chunks, and one short final transaction
    moves the staged rows into ``readings`` (and adds the file's voids and
    acknowledgements). Staged rows are not readings: a run killed midway has
    added nothing, and running the same file again carries on from the last
    staged chunk (the job is named by a digest of the rows it adds). Called
    inside a caller's open transaction it all happens in that transaction."""
    order, known, _ = plan_import(conn, rows)
    skipped = len(rows) - len(order)
    depth = _depths(order)
    job = _import_job(conn, order)
    try:
        for k in range(job["rows_staged"], len(order), IMPORT_CHUNK):
            chunk = order[k:k + IMPORT_CHUNK]
            recs = _convert_chunk(chunk)
            with store.transaction(conn):
                store.stage_import_rows(conn, job["id"], k, [(depth[r["uuid"]], rec)
                                                             for r, rec in zip(chunk, recs)])
        with store.transaction(conn):
            clash = store.import_clashes(conn, job["id"])
            if clash is None:
                try:
                    added = store.finish_import_job(conn, job["id"])
                except store.StoreError as e:
                    raise ImportError_(f"{e.message} Nothing was imported.", e.field) from None
                voids = _merge_acks_and_voids(conn, order + known)
    except InputError:
        # a refused file leaves nothing staged (a kill leaves its chunks to resume)
        with store.transaction(conn):
            store.drop_import_job(conn, job["id"])
        raise
    if clash is not None:
        with store.transaction(conn):
            store.drop_import_job(conn, job["id"])
        raise ImportError_(f"The log changed while the file was imported ({clash}); "
                           "nothing was imported. Run the import again.", "file")
    return {"added": added, "skipped": skipped, "voided": voids}


def _depths(order: list[dict]) -> dict[str, int]:
    """How many rows of this file each new row sits above in its chain of
    corrections (0: it corrects nothing in the file); ``order`` lists every
    reading before its correction."""
    depth: dict[str, int] = {}
    for r in order:
        t = r["supersedes_uuid"]
        depth[r["uuid"]] = depth[t] + 1 if t in depth else 0
    return depth


def _import_job(conn, order: list[dict]) -> dict:
    """The staging job of these new rows: one left by a killed run of the same
    rows (to carry on), else a new one."""
    import hashlib
    h = hashlib.sha256()
    for r in order:
        h.update("\x1f".join(str(r.get(c, "")) for c in COLUMNS).encode("utf-8", "replace"))
        h.update(b"\x1e")
    with store.transaction(conn):
        return store.import_job(conn, h.hexdigest(), len(order))


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
            rec = build_record(payload, result=result)
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


def _merge_acks_and_voids(conn, rows: list[dict]) -> int:
    """Acknowledgements and voids the file carries that the log lacks."""
    wanted = [r for r in rows if r["flag_acks"] or r["status"] == "void"]
    brief = store.readings_brief(conn, [r["uuid"] for r in wanted])
    acks = store.acks_for_readings(conn, [brief[r["uuid"]]["id"] for r in wanted])
    voids = 0
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


def import_csv(conn, src: IO[str]) -> dict:
    try:
        rows = read_export(src)
    except ImportError_ as e:
        if "Nothing was imported" in e.message:
            raise
        raise ImportError_(e.message + " Nothing was imported.", e.field) from None
    return import_rows(conn, rows)
