"""Pairing codes, paired devices and the pairing limiter (schema 004, 010, 013)."""
from __future__ import annotations

import sqlite3

from .core import transaction, utc_now


def active_pairing_codes(conn, now: str) -> list[sqlite3.Row]:
    """Pairing codes neither revoked nor expired at ``now`` (UTC ISO 8601)."""
    return conn.execute("SELECT * FROM pairing_codes WHERE revoked_at IS NULL AND "
                        "expires_at > ? ORDER BY id DESC", (now,)).fetchall()


def insert_pairing_code(conn, code: str, expires_at: str,
                        replace_active: bool = True) -> sqlite3.Row:
    """A new pairing code; by default the codes still active are revoked, so
    one code is valid at a time."""
    now = utc_now()
    with transaction(conn):
        if replace_active:
            conn.execute("UPDATE pairing_codes SET revoked_at = ? WHERE revoked_at IS NULL",
                         (now,))
        new_id = conn.execute("INSERT INTO pairing_codes (code, created_at, expires_at) "
                              "VALUES (?,?,?) RETURNING id", (code, now, expires_at)).fetchone()[0]
    return conn.execute("SELECT * FROM pairing_codes WHERE id = ?", (new_id,)).fetchone()


def revoke_pairing_codes(conn, code_id: int | None = None) -> int:
    """Revoke one code, or every code still open; returns how many."""
    with transaction(conn):
        if code_id is None:
            cur = conn.execute("UPDATE pairing_codes SET revoked_at = ? "
                               "WHERE revoked_at IS NULL", (utc_now(),))
        else:
            cur = conn.execute("UPDATE pairing_codes SET revoked_at = ? "
                               "WHERE id = ? AND revoked_at IS NULL", (utc_now(), code_id))
    return cur.rowcount


def insert_device(conn, token_sha256: str, label: str, user_agent: str, address: str,
                  code_id: int | None) -> sqlite3.Row:
    now = utc_now()
    with transaction(conn):
        new_id = conn.execute(
            "INSERT INTO paired_devices (token_sha256, label, user_agent, address, code_id, "
            "paired_at, last_seen_at) VALUES (?,?,?,?,?,?,?) RETURNING id",
            (token_sha256, label, user_agent, address, code_id, now, now)).fetchone()[0]
    return conn.execute("SELECT * FROM paired_devices WHERE id = ?", (new_id,)).fetchone()


def device_by_token(conn, token_sha256: str) -> sqlite3.Row | None:
    """The paired device holding this token, unless it was unpaired."""
    return conn.execute("SELECT * FROM paired_devices WHERE token_sha256 = ? AND "
                        "revoked_at IS NULL", (token_sha256,)).fetchone()


def touch_device(conn, device_id: int, address: str) -> None:
    with transaction(conn):
        conn.execute("UPDATE paired_devices SET last_seen_at = ?, address = ? WHERE id = ?",
                     (utc_now(), address, device_id))


def list_devices(conn) -> list[sqlite3.Row]:
    return conn.execute("SELECT * FROM paired_devices ORDER BY revoked_at IS NOT NULL, "
                        "paired_at DESC").fetchall()


def note_reading_device(conn, reading_id: int, device_id: int) -> None:
    """Remember which paired tablet sent a new reading (schema/012_reading_devices.sql)."""
    with transaction(conn):
        conn.execute("INSERT INTO reading_devices (reading_id, device_id) "
                     "VALUES (?, ?) ON CONFLICT DO NOTHING", (reading_id, device_id))


def device_reading_counts(conn) -> dict[int, int]:
    """device id -> how many readings (versions included) it sent."""
    return {r[0]: r[1] for r in conn.execute(
        "SELECT device_id, COUNT(*) FROM reading_devices GROUP BY device_id")}


def revoke_devices(conn, device_id: int | None = None) -> int:
    """Unpair one device, or every paired device; returns how many."""
    with transaction(conn):
        if device_id is None:
            cur = conn.execute("UPDATE paired_devices SET revoked_at = ? "
                               "WHERE revoked_at IS NULL", (utc_now(),))
        else:
            cur = conn.execute("UPDATE paired_devices SET revoked_at = ? "
                               "WHERE id = ? AND revoked_at IS NULL", (utc_now(), device_id))
    return cur.rowcount


# ---- pairing limiter and bounds (schema 010)

def pairing_failure_counts(conn, address: str, since: float) -> dict:
    """Wrong codes since ``since`` (epoch seconds): from this address and
    overall, with the oldest time of each (for Retry-After)."""
    a = conn.execute("SELECT COUNT(*), MIN(failed_at) FROM pairing_failures "
                     "WHERE address = ? AND failed_at > ?", (address, since)).fetchone()
    t = conn.execute("SELECT COUNT(*), MIN(failed_at) FROM pairing_failures "
                     "WHERE failed_at > ?", (since,)).fetchone()
    return {"address": a[0], "address_oldest": a[1], "overall": t[0], "overall_oldest": t[1]}


def add_pairing_failure(conn, address: str, at: float, prune_before: float) -> None:
    with transaction(conn):
        conn.execute("DELETE FROM pairing_failures WHERE failed_at <= ?", (prune_before,))
        conn.execute("INSERT INTO pairing_failures (address, failed_at) VALUES (?, ?)",
                     (address, at))


def devices_paired_with(conn, code_id: int) -> int:
    """Devices a code has paired (unpaired ones included: the bound is on the code)."""
    return conn.execute("SELECT COUNT(*) FROM paired_devices WHERE code_id = ?",
                        (code_id,)).fetchone()[0]


