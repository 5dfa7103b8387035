"""Meters and their calibration checks (schema 002)."""
from __future__ import annotations

import json

from .core import StoreError, transaction, utc_now


def _meter_row_dict(row) -> dict:
    d = {k: row[k] for k in row.keys()}
    d["units"] = [u for u in (row["units"] or "").split(";") if u]
    d["ranges"] = json.loads(row["ranges_json"])
    d.pop("ranges_json")
    d["atc"] = bool(row["atc"])
    return d


def get_meter(conn, name_or_id) -> dict | None:
    if isinstance(name_or_id, int):
        row = conn.execute("SELECT * FROM meters WHERE id = ?", (name_or_id,)).fetchone()
    else:
        row = conn.execute("SELECT * FROM meters WHERE name = ?",
                           (" ".join(str(name_or_id).split()),)).fetchone()
    return None if row is None else _meter_row_dict(row)


def list_meters(conn) -> list[dict]:
    rows = conn.execute("SELECT * FROM meters ORDER BY name COLLATE NOCASE").fetchall()
    meters = [_meter_row_dict(r) for r in rows]
    for m in meters:
        m["last_check"] = last_calibration(conn, m["id"])
    return meters


def insert_meter(conn, m: dict) -> dict:
    """Store a meter profile (validated by the caller); names are unique."""
    with transaction(conn):
        if get_meter(conn, m["name"]) is not None:
            raise StoreError(f"A meter called {m['name']!r} exists already.", "name", 409)
        conn.execute(
            "INSERT INTO meters (name, units, ranges_json, accuracy_pct, atc, atc_coeff_pct,"
            " ref_temp_c, atc_min_c, atc_max_c, tds_factor, notes, created_at)"
            " VALUES (?,?,?,?,?,?,?,?,?,?,?,?)",
            (m["name"], ";".join(m["units"]), json.dumps(m["ranges"], ensure_ascii=False),
             m.get("accuracy_pct"), 1 if m.get("atc") else 0, m.get("atc_coeff_pct"),
             m.get("ref_temp_c") or 25.0, m.get("atc_min_c"), m.get("atc_max_c"),
             m.get("tds_factor"), m.get("notes") or "", utc_now()))
    return get_meter(conn, m["name"])


def insert_calibration(conn, c: dict) -> dict:
    with transaction(conn):
        new_id = conn.execute(
            "INSERT INTO calibrations (meter_id, standard, standard_uS_cm, value, unit, temp_c,"
            " compensated, expected_uS_cm, measured_uS_cm, deviation_pct, tolerance_pct, passed,"
            " checked_at, note) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?) RETURNING id",
            (c["meter_id"], c["standard"], c.get("standard_uS_cm"), c["value"], c["unit"],
             c.get("temp_c"), 1 if c.get("compensated") else 0, c["expected_uS_cm"],
             c["measured_uS_cm"], c["deviation_pct"], c["tolerance_pct"],
             1 if c["passed"] else 0, c.get("checked_at") or utc_now(),
             c.get("note") or "")).fetchone()[0]
        row = conn.execute("SELECT * FROM calibrations WHERE id = ?", (new_id,)).fetchone()
    return _cal_dict(row)


def _cal_dict(row) -> dict:
    d = {k: row[k] for k in row.keys()}
    d["passed"] = bool(d["passed"])
    d["compensated"] = bool(d["compensated"])
    return d


def last_calibration(conn, meter_id: int, before_utc: str | None = None) -> dict | None:
    """The newest check of a meter (at or before ``before_utc``, an ISO UTC time)."""
    row = conn.execute("SELECT * FROM calibrations WHERE meter_id = ? AND checked_at <= ? "
                       "ORDER BY checked_at DESC, id DESC LIMIT 1",
                       (meter_id, before_utc or "9999")).fetchone()
    return None if row is None else _cal_dict(row)


def list_calibrations(conn, meter_id: int) -> list[dict]:
    rows = conn.execute("SELECT * FROM calibrations WHERE meter_id = ? "
                        "ORDER BY checked_at DESC, id DESC", (meter_id,)).fetchall()
    return [_cal_dict(r) for r in rows]


