"""An invented scenario so a newcomer sees a living log at once.

Every name and number here is made up for the demonstration (Farm A,
Block 3, Greenhouse B bench 4); none of it is data about a real place.
"""
from __future__ import annotations

import datetime as dt
import uuid

from . import meters, records, store

SITES = [
    {"name": "Farm A Block 3", "crop": "Tomato", "texture": "clay loam", "kind": "field",
     "latitude": 10.0012, "longitude": 20.0031, "notes": "Drip line, south end wetter."},
    {"name": "Farm A Block 7", "crop": "Barley", "sp_pct": 48, "kind": "field",
     "latitude": 10.0040, "longitude": 20.0075, "notes": ""},
    {"name": "Farm A well 2", "crop": "Tomato", "kind": "water_source",
     "latitude": 10.0021, "longitude": 20.0010, "notes": "Irrigation source for Block 3."},
    {"name": "Greenhouse B bench 4", "crop": "Cucumber", "kind": "greenhouse", "notes": ""},
]

# (site, days ago, sample, value, unit, extra fields)
READINGS = [
    ("Farm A Block 3", 120, "extract", 0.41, "mS/cm", {"ratio": "1:5", "temp_c": 19, "depth_cm": 15}),
    ("Farm A Block 3", 120, "extract", 0.62, "mS/cm", {"ratio": "1:5", "temp_c": 19, "depth_cm": 45}),
    ("Farm A Block 3", 60, "extract", 0.48, "mS/cm", {"ratio": "1:5", "temp_c": 22, "depth_cm": 15}),
    ("Farm A Block 3", 60, "extract", 0.71, "mS/cm", {"ratio": "1:5", "temp_c": 22, "depth_cm": 45}),
    ("Farm A Block 3", 7, "paste", 3.1, "dS/m", {"compensated": True, "depth_cm": 15}),
    ("Farm A Block 3", 7, "paste", 4.4, "dS/m", {"compensated": True, "depth_cm": 45}),
    ("Farm A Block 7", 90, "paste", 5.2, "mmhos/cm", {"temp_c": 24, "depth_cm": 20}),
    ("Farm A Block 7", 30, "paste", 6.0, "mmhos/cm", {"temp_c": 26, "depth_cm": 20}),
    ("Farm A Block 7", 2, "extract", 1480, "µS/cm", {"ratio": "1:2", "temp_c": 14, "depth_cm": 20,
                                                     "note": "after rain"}),
    ("Farm A well 2", 100, "water", 1150, "µS/cm", {"compensated": True}),
    ("Farm A well 2", 40, "water", 1.32, "mS/cm", {"compensated": True}),
    ("Farm A well 2", 3, "water", 860, "ppm", {"tds_factor": 0.64, "compensated": True}),
    ("Greenhouse B bench 4", 14, "feed", 2.2, "mS/cm", {"compensated": True}),
    ("Greenhouse B bench 4", 14, "leachate", 3.0, "mS/cm", {"compensated": True}),
    ("Greenhouse B bench 4", 1, "feed", 2.3, "mS/cm", {"compensated": True}),
    ("Greenhouse B bench 4", 1, "leachate", 4.1, "mS/cm", {"compensated": True}),
    ("Greenhouse B bench 4", 1, "sme", 2.6, "mS/cm", {"compensated": True}),
]


#: Demo meters (generic types) and their checks: days ago, value shown, °C, compensated.
METERS = [
    ("tester A", "pocket tester 0-1999 µS/cm", [(30, 1405, 25, True), (2, 1420, 25, True)]),
    ("tester B", "pocket tester 0.00-20.00 mS/cm", [(20, 1.41, 25, True), (1, 1.55, 25, True)]),
    ("handheld 1", "handheld 4-range 0-200 mS/cm", [(100, 1398, 25, True)]),
]
_METER_FOR_UNIT = {"µS/cm": "tester A", "mS/cm": "tester B"}


def _load_meters(conn, today: dt.date) -> None:
    presets = {p["name"]: p for p in meters.presets()}
    for name, preset, checks in METERS:
        if store.get_meter(conn, name) is not None:
            continue
        m = store.insert_meter(conn, meters.validate_meter({**presets[preset], "name": name}))
        unit = m["units"][0]
        for days, value, temp, comp in checks:
            c = meters.calibration_check({"standard": "kcl_0.01", "value": value, "unit": unit,
                                          "temp_c": temp, "compensated": comp}, m)
            when = dt.datetime.combine(today - dt.timedelta(days=days), dt.time(8, 0))
            c["checked_at"] = when.astimezone(dt.timezone.utc).isoformat(timespec="seconds")
            store.insert_calibration(conn, c)


def load(conn, today: dt.date | None = None) -> int:
    """Add the demo sites and readings; returns how many readings were added.
    Running it twice adds nothing the second time."""
    today = today or dt.date.today()
    with store.transaction(conn):
        for s in SITES:
            attrs = {k: v for k, v in s.items() if k != "name"}
            store.ensure_site(conn, s["name"], **attrs)
    _load_meters(conn, today)
    added = 0
    for i, (site, days, sample, value, unit, extra) in enumerate(READINGS):
        when = dt.datetime.combine(today - dt.timedelta(days=days), dt.time(9, 0)).astimezone()
        payload = {"uuid": str(uuid.uuid5(uuid.NAMESPACE_URL, f"fieldapp-demo-{i}")),
                   "site": site, "sample": sample, "value": value, "unit": unit,
                   "taken_at": when.replace(minute=5 * (i % 12)).isoformat(),
                   "meter": _METER_FOR_UNIT.get(unit), "visited_by": "demo", **extra}
        _, created = records.save_reading(conn, payload)
        added += created
    return added
