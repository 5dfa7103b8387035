"""A whole batch applied in one transaction, all of it or none: a device's
push at the office, a pulled batch on the device (with its cursor)."""
from __future__ import annotations

import json

from .core import StoreError, transaction
from .sync_meters import apply_meters
from .sync_readings import apply_readings, apply_voids_acks
from .sync_sites import apply_history, resolve_sites

def lock_for_sync(conn) -> None:
    """First statement of a push's transaction: pushes apply one at a time."""
    conn.execute("UPDATE sync_lock SET n = n + 1 WHERE id = 1")


def apply_push(conn, items: dict, device: dict) -> dict:
    """A device's batch at the office, in one transaction: all of it or none."""
    if not isinstance(items, dict):
        raise StoreError("The batch is not an object.", "batch", 400)
    origin = {"log_uuid": device["log_uuid"], "device_name": device["name"], "person": None}
    with transaction(conn):
        lock_for_sync(conn)
        sites = resolve_sites(conn, items.get("sites"))
        h = apply_history(conn, sites, items.get("history"))
        m = apply_meters(conn, items.get("meters"), items.get("calibrations"))
        r = apply_readings(conn, sites, items.get("readings"), origin)
        va, _, _ = apply_voids_acks(conn, items.get("voids"), items.get("acks"))
    r.pop("ids")
    return {"history": h, "meters": m, "readings": r, "voids_acks": va}



def apply_pull(conn, follow_name: str, batch: dict) -> dict:
    """A pulled batch on the device, in one transaction with its cursor: the
    rows it adds are marked as received, so they are never pushed back."""
    with transaction(conn):
        counts = {"readings": 0, "voids": 0, "acks": 0, "history": 0, "review": 0}
        if batch.get("site"):
            before = conn.execute("SELECT COALESCE(MAX(id), 0) FROM site_history").fetchone()[0]
            sites = resolve_sites(conn, [batch["site"]])
            h = apply_history(conn, sites, batch.get("history"))
            counts["history"] = h["new"]
            r = apply_readings(conn, sites, batch.get("readings"))
            counts["readings"], counts["review"] = r["new"], r["review"]
            va, new_v, new_a = apply_voids_acks(conn, batch.get("voids"), batch.get("acks"))
            counts["voids"], counts["acks"] = va["voids"], va["acks"]
            marks = [("reading", i) for i in r["ids"]] + [("void", i) for i in new_v] \
                + [("ack", i) for i in new_a]
            marks += [("history", row[0]) for row in conn.execute(
                "SELECT id FROM site_history WHERE id > ?", (before,))]
            conn.executemany("INSERT INTO sync_received (kind, row_id) VALUES (?, ?) "
                             "ON CONFLICT (kind, row_id) DO NOTHING", marks)
        conn.execute("UPDATE sync_follows SET cursor = ? WHERE site_name = ?",
                     (json.dumps(batch.get("cursor") or {}), follow_name))
    return counts

