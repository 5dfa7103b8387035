"""Import, second step: check a whole file against itself and the log."""
from __future__ import annotations

from .. import store
from .cells import plain_number
from .columns import COLUMNS
from .reading import ImportError_


def _site_key(name) -> str:
    return " ".join(str(name or "").split()).casefold()


def _refuse(msg: str, field: str = "file"):
    raise ImportError_(msg + " Nothing was imported.", field)


def plan_import(conn, rows: list[dict]) -> tuple[list[dict], list[dict], dict]:
    """Check a whole file against itself and the log, before anything is written.

    Returns (new rows in an order where every reading comes before its
    correction, rows already in the log, what the log holds of each uuid the
    file names). Links are resolved over the whole file, so the rows may come
    in any order (a spreadsheet sort). Refused, naming the lines: a uuid twice
    with different content, a uuid the log holds for a different reading
    (the API's 409), a correction of itself, a circle of corrections, a
    correction onto another site, two corrections of one reading, a
    correction of a reading the log already has corrected or void, a
    correction of a reading that is nowhere, and a row whose status says the
    opposite of what the file shows."""
    by_uuid, unique = _unique_rows(rows)
    named = set(by_uuid) | {r["supersedes_uuid"] for r in unique if r["supersedes_uuid"]}
    stored = store.readings_brief(conn, named)
    fresh, known = _split_known(unique, stored)
    child_of = _corrections(unique)
    _check_targets(fresh, by_uuid, stored)
    depth = _chain_depths(fresh, by_uuid)
    _check_status(fresh, child_of, stored)
    order = sorted(fresh, key=lambda r: (depth[r["uuid"]], r["_line"]))
    return order, known, stored


def _unique_rows(rows: list[dict]) -> tuple[dict[str, dict], list[dict]]:
    """Rows by uuid (uuids and links stripped), and the rows without the
    repeats of an identical row; a uuid twice with different content is refused."""
    by_uuid: dict[str, dict] = {}
    for r in rows:
        if not isinstance(r["uuid"], str) or not r["uuid"].strip():
            _refuse(f"line {r['_line']}: the uuid is missing.")
        r["uuid"] = r["uuid"].strip()
        r["supersedes_uuid"] = (r["supersedes_uuid"] or "").strip() or None
        first = by_uuid.get(r["uuid"])
        if first is not None:
            same = all(first[c] == r[c] for c in COLUMNS if c not in ("status",))
            if not same:
                _refuse(f"lines {first['_line']} and {r['_line']} carry the same uuid "
                        f"{r['uuid']} for different readings.")
            r["_duplicate"] = True
            continue
        by_uuid[r["uuid"]] = r
    return by_uuid, [r for r in rows if not r.get("_duplicate")]


def _split_known(unique: list[dict], stored: dict) -> tuple[list[dict], list[dict]]:
    """(rows new to the log, rows it holds already); a uuid the log holds for
    another reading is refused (the API's 409)."""
    known, fresh = [], []
    for r in unique:
        s = stored.get(r["uuid"])
        if s is None:
            fresh.append(r)
            continue
        if (_site_key(s["site"]) != _site_key(r["site"]) or s["value"] != r["value"]
                or s["unit"] != r["unit"].strip()
                or (s["supersedes_uuid"] or None) != r["supersedes_uuid"]):
            raise ImportError_(
                f"line {r['_line']}: the log already holds uuid {r['uuid']} for a different "
                f"reading ({s['site']}, {plain_number(s['value'])} {s['unit']}); the stored "
                "one is kept. Nothing was imported.", "uuid")
        known.append(r)
    return fresh, known


def _corrections(unique: list[dict]) -> dict[str, dict]:
    """Target uuid -> the row that corrects it; refused: a correction of
    itself, two corrections of one reading."""
    child_of: dict[str, dict] = {}
    for r in unique:
        t = r["supersedes_uuid"]
        if t is None:
            continue
        if t == r["uuid"]:
            _refuse(f"line {r['_line']}: the reading {t} corrects itself.")
        if t in child_of:
            _refuse(f"lines {child_of[t]['_line']} and {r['_line']} both correct {t}; a "
                    "reading has one correction (correct the newest version).")
        child_of[t] = r
    return child_of


def _check_targets(fresh: list[dict], by_uuid: dict, stored: dict) -> None:
    """Every new correction's target is in the file or current in the log,
    on the same site."""
    for r in fresh:
        t = r["supersedes_uuid"]
        if t is None:
            continue
        if t in by_uuid:
            target = by_uuid[t]
            where = f"line {target['_line']}"
        elif t in stored:
            target = stored[t]
            where = "the log"
            if target["status"] != "current":
                _refuse(f"line {r['_line']} corrects {t}, which the log already has "
                        f"{target['status']}; correct the newest version instead.")
        else:
            _refuse(f"line {r['_line']} corrects {t}, which is neither in the file nor in "
                    "the log.")
        if _site_key(target["site"]) != _site_key(r["site"]):
            _refuse(f"line {r['_line']} corrects a reading of another site ({where}: "
                    f"{target['site']!r}, this line: {r['site']!r}); a correction stays on "
                    "the same site.")


def _chain_depths(fresh: list[dict], by_uuid: dict) -> dict[str, int]:
    """How deep each new row sits in its chain of new corrections; a circle is
    refused. Every row has at most one target and one correction, so a walk
    from each new row either ends outside the new rows or comes back to it."""
    fresh_uuids = {r["uuid"] for r in fresh}
    depth: dict[str, int] = {}
    for r in fresh:
        path, u = [], r["uuid"]
        while u in fresh_uuids and u not in depth:
            if u in path:
                lines = sorted(by_uuid[x]["_line"] for x in path[path.index(u):])
                _refuse("lines " + ", ".join(map(str, lines)) + " correct one another in a "
                        "circle; one of them must be the first reading.")
            path.append(u)
            u = by_uuid[u]["supersedes_uuid"]
        base = depth.get(u, -1) if u in fresh_uuids else -1
        for x in reversed(path):
            base += 1
            depth[x] = base
    return depth


def _check_status(fresh: list[dict], child_of: dict, stored: dict) -> None:
    """A row's status agrees with what the file shows of it."""
    for r in fresh:
        kid = child_of.get(r["uuid"])
        if r["status"] == "corrected" and kid is None and \
                not (r["uuid"] in stored and stored[r["uuid"]]["corrected_by_uuid"]):
            _refuse(f"line {r['_line']} says corrected, but no line corrects it; the "
                    "correction is missing from the file.")
        if r["status"] != "corrected" and kid is not None:
            _refuse(f"line {r['_line']} says {r['status']}, but line {kid['_line']} "
                    "corrects it.")
