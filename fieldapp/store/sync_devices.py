"""The devices paired with an office for sync (``office_devices``) and the
names they go by."""
from __future__ import annotations

from .core import transaction, utc_now
from .sync import DEVICE_NAME, LOG_UUID, get_setting

def insert_office_device(conn, token_sha256: str, log_uuid_: str, name: str, person: str,
                         address: str, code_id: int | None) -> dict:
    """A device paired for sync; an earlier pairing of the same log is revoked."""
    now = utc_now()
    with transaction(conn):
        conn.execute("UPDATE office_devices SET revoked_at = ? WHERE log_uuid = ? AND "
                     "revoked_at IS NULL", (now, log_uuid_))
        row = conn.execute(
            "INSERT INTO office_devices (token_sha256, log_uuid, name, person, address, code_id,"
            " paired_at, last_seen_at) VALUES (?,?,?,?,?,?,?,?) RETURNING id",
            (token_sha256, log_uuid_, name, person, address, code_id, now, now)).fetchone()
    return office_device(conn, row[0])


def office_device(conn, device_id: int) -> dict | None:
    row = conn.execute("SELECT * FROM office_devices WHERE id = ?", (device_id,)).fetchone()
    return None if row is None else dict(row)


def office_device_by_token(conn, token_sha256: str) -> dict | None:
    """The device holding this token: revoked ones too (the caller says why it refuses)."""
    row = conn.execute("SELECT * FROM office_devices WHERE token_sha256 = ?",
                       (token_sha256,)).fetchone()
    return None if row is None else dict(row)


def touch_office_device(conn, device_id: int, address: str, person: str | None = None,
                        name: str | None = None, readings_in: int = 0,
                        synced: bool = False) -> None:
    """Last seen now (inside or outside the caller's transaction)."""
    now = utc_now()
    with transaction(conn):
        conn.execute(
            "UPDATE office_devices SET last_seen_at = ?, address = ?, "
            "readings_in = readings_in + ?, person = COALESCE(?, person), "
            "name = COALESCE(?, name), last_sync_at = COALESCE(?, last_sync_at) WHERE id = ?",
            (now, address, readings_in, person, name, now if synced else None, device_id))


def list_office_devices(conn) -> list[dict]:
    return [dict(r) for r in conn.execute(
        "SELECT * FROM office_devices ORDER BY CASE WHEN revoked_at IS NULL THEN 0 ELSE 1 END, "
        "last_seen_at DESC, id DESC")]


def revoke_office_device(conn, device_id: int) -> int:
    with transaction(conn):
        cur = conn.execute("UPDATE office_devices SET revoked_at = ? WHERE id = ? AND "
                           "revoked_at IS NULL", (utc_now(), device_id))
    return cur.rowcount


def count_office_devices_of_code(conn, code_id: int) -> int:
    return conn.execute("SELECT COUNT(*) FROM office_devices WHERE code_id = ?",
                        (code_id,)).fetchone()[0]



def device_names(conn) -> dict[str, str]:
    """log uuid -> the name its device goes by now (its latest pairing; this
    log's own name for itself)."""
    out = {r[0]: r[1] for r in conn.execute(
        "SELECT log_uuid, name FROM office_devices WHERE name <> '' ORDER BY id")}
    me, name = get_setting(conn, LOG_UUID), get_setting(conn, DEVICE_NAME)
    if me and name:
        out.setdefault(me, name)
    return out

