"""A row as a sync item: the reading columns an item carries, how a stored
reading becomes one, and the checks an arriving item must pass before
anything of its batch is kept (a batch is refused whole)."""
from __future__ import annotations

import json
import math
import re

from .core import COMPUTED_FIELDS, INPUT_FIELDS, StoreError

#: Reading columns a sync item carries, as stored.
READING_ITEM_FIELDS = ("uuid",) + INPUT_FIELDS + COMPUTED_FIELDS + (
    "result_json", "app_version", "recorded_at")

_READING_ITEM_SELECT = """
    SELECT r.id, r.uuid, {cols}, s.name AS site, v.visited_by,
           COALESCE(p.uuid, rv.supersedes_uuid) AS supersedes_uuid,
           o.log_uuid AS origin_log, o.device_name AS origin_device, o.person AS origin_person
    FROM readings r
    JOIN sites s ON s.id = r.site_id
    JOIN visits v ON v.id = r.visit_id
    LEFT JOIN readings p ON p.id = r.supersedes_id
    LEFT JOIN reading_review rv ON rv.reading_id = r.id
    LEFT JOIN reading_origin o ON o.reading_id = r.id""".format(
    cols=", ".join(f"r.{c}" for c in READING_ITEM_FIELDS if c != "uuid"))


def _reading_item(row) -> dict:
    d = {c: row[c] for c in READING_ITEM_FIELDS}
    d["compensated"] = bool(d["compensated"])
    d["site"] = row["site"]
    d["visited_by"] = row["visited_by"] or ""
    d["supersedes_uuid"] = row["supersedes_uuid"]
    d["origin"] = ({"log_uuid": row["origin_log"], "device_name": row["origin_device"] or "",
                    "person": row["origin_person"]} if row["origin_log"] else None)
    return d


def site_names(conn, site_id: int) -> list[str]:
    """A site's name now, then the names it had before (newest first)."""
    now = conn.execute("SELECT name FROM sites WHERE id = ?", (site_id,)).fetchone()[0]
    names = [now]
    for r in conn.execute("SELECT old_value FROM site_history WHERE site_id = ? AND "
                          "field = 'name' AND old_value IS NOT NULL ORDER BY id DESC",
                          (site_id,)):
        if r[0].lower() not in {n.lower() for n in names}:
            names.append(r[0])
    return names



_UUID_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:-]{7,63}$")
_NUMBER_COLS = ("depth_cm", "value", "temp_c", "sp_pct", "tds_factor", "theta_g_pct",
                "matric_MPa", "ec25_dS_m", "ece_dS_m", "psi_s_MPa")
_TEXT_COLS = ("sample", "unit", "ratio", "texture", "meter", "replicate_group", "note",
              "taken_at", "ece_method", "psi_s_method", "flags", "app_version", "recorded_at")
ITEM_TEXT_MAX = 4000
RESULT_JSON_MAX = 64_000


def _bad(what: str, i: int, why: str):
    raise StoreError(f"The batch was refused whole, nothing of it was kept: {what} {i + 1} "
                     f"{why}.", "batch", 400)


def _check_reading_item(d, i: int) -> dict:
    if not isinstance(d, dict):
        _bad("reading", i, "is not an object")
    if not isinstance(d.get("uuid"), str) or not _UUID_RE.match(d["uuid"]):
        _bad("reading", i, "has no valid uuid")
    for c in _NUMBER_COLS:
        v = d.get(c)
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float))
                              or not math.isfinite(v)):
            _bad("reading", i, f"has a {c} that is not a number")
    if d.get("value") is None:
        _bad("reading", i, "has no value")
    for c in _TEXT_COLS + ("site", "visited_by", "supersedes_uuid"):
        v = d.get(c)
        if v is not None and (not isinstance(v, str) or len(v) > ITEM_TEXT_MAX):
            _bad("reading", i, f"has a {c} that is not short text")
    for c in ("sample", "unit", "taken_at", "site"):
        if not d.get(c):
            _bad("reading", i, f"has no {c}")
    rj = d.get("result_json")
    if not isinstance(rj, str) or len(rj) > RESULT_JSON_MAX:
        _bad("reading", i, "has no result")
    try:
        if not isinstance(json.loads(rj), dict):
            raise ValueError
    except ValueError:
        _bad("reading", i, "has a result that is not a JSON object")
    o = d.get("origin")
    if o is not None and (not isinstance(o, dict) or not isinstance(o.get("log_uuid"), str)):
        _bad("reading", i, "has an origin without a log")
    return d


def _text_or_none(v, what, i):
    if v is not None and (not isinstance(v, str) or len(v) > ITEM_TEXT_MAX):
        _bad(what, i, "holds something that is not short text")
    return v

