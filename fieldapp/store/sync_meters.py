"""Meter profiles and calibration checks that arrive in a batch."""
from __future__ import annotations

from .sync_items import _bad

_METER_COLS = ("name", "units", "ranges_json", "accuracy_pct", "atc", "atc_coeff_pct",
               "ref_temp_c", "atc_min_c", "atc_max_c", "tds_factor", "notes", "created_at")
_CAL_COLS = ("standard", "standard_uS_cm", "value", "unit", "temp_c", "compensated",
             "expected_uS_cm", "measured_uS_cm", "deviation_pct", "tolerance_pct", "passed",
             "checked_at", "note")


def apply_meters(conn, meters: list, cals: list) -> dict:
    """Meter profiles by name (one made elsewhere under a name taken here is
    left as it is here), calibration checks by meter, time, standard and value."""
    new_m = new_c = dup = 0
    for i, m in enumerate(meters or []):
        if not isinstance(m, dict) or not isinstance(m.get("name"), str) or not m["name"].strip():
            _bad("meter", i, "has no name")
        for c in ("units", "ranges_json", "created_at"):
            if not isinstance(m.get(c), str):
                _bad("meter", i, f"has no {c}")
        if conn.execute("SELECT 1 FROM meters WHERE lower(name) = lower(?)",
                        (m["name"],)).fetchone():
            dup += 1
            continue
        conn.execute(f"INSERT INTO meters ({', '.join(_METER_COLS)}) VALUES "
                     f"({', '.join('?' * len(_METER_COLS))})",
                     [m.get(c) if c not in ("notes",) else (m.get(c) or "") for c in _METER_COLS])
        new_m += 1
    for i, c in enumerate(cals or []):
        if not isinstance(c, dict) or not isinstance(c.get("meter"), str):
            _bad("calibration check", i, "names no meter")
        meter = conn.execute("SELECT id FROM meters WHERE lower(name) = lower(?)",
                             (c["meter"],)).fetchone()
        if meter is None:
            _bad("calibration check", i, "is of a meter the batch does not carry")
        if conn.execute("SELECT 1 FROM calibrations WHERE meter_id = ? AND checked_at = ? AND "
                        "standard = ? AND value = ? AND unit = ?",
                        (meter[0], c.get("checked_at"), c.get("standard"), c.get("value"),
                         c.get("unit"))).fetchone():
            dup += 1
            continue
        try:
            conn.execute(f"INSERT INTO calibrations (meter_id, {', '.join(_CAL_COLS)}) VALUES "
                         f"(?, {', '.join('?' * len(_CAL_COLS))})",
                         [meter[0]] + [c.get(k) if k != "note" else (c.get(k) or "")
                                       for k in _CAL_COLS])
        except Exception as e:            # a NOT NULL column missing: the item is not a check
            if "constraint" not in str(e).lower():
                raise
            _bad("calibration check", i, f"is incomplete ({e})")
        new_c += 1
    return {"meters": new_m, "calibrations": new_c, "duplicate": dup}

