"""This log's side of sync (schema 017, 018): its identity and settings
(``sync_settings``: the keys below), who took each reading here
(``reading_origin``) and the sites it follows.

The office and the exchange split the rest, one concern a module:
``sync_devices`` (devices paired with an office), ``sync_items`` (a row as
an item, and checking one that arrives), ``sync_send`` (what a push sends,
what a pull returns), ``sync_sites`` and ``sync_meters`` (sites, settings
changes, meters and checks that arrive), ``sync_readings`` (readings, voids
and acknowledgements that arrive), ``sync_apply`` (a whole push or pull,
all-or-nothing) and ``sync_views`` (what the office shows about who sent
what).

Portable SQL only (the office may run on PostgreSQL): ``?`` placeholders,
``INSERT ... ON CONFLICT ... DO NOTHING/DO UPDATE``, "check then insert"
inside the caller's transaction (a push holds ``sync_lock`` first, so two
pushes never interleave), timestamps as ISO text made in Python.

The exchange logic (batches, cursors, HTTP) is ``fieldapp/sync.py``.
"""
from __future__ import annotations

import json
import uuid as uuidlib

from .core import StoreError, transaction, utc_now
from .sites import clean_site_name

# ---------------------------------------------------------------- settings

#: Keys of sync_settings.
LOG_UUID = "log_uuid"
DEVICE_NAME = "device_name"
PERSON = "person"
OFFICE_URL = "office_url"
OFFICE_TOKEN = "office_token"
OFFICE_CA_FILE = "office_ca_file"
PUSH_CURSOR = "push_cursor"
PERSON_MAX = 80


def get_setting(conn, key: str, default: str | None = None) -> str | None:
    row = conn.execute("SELECT value FROM sync_settings WHERE key = ?", (key,)).fetchone()
    return default if row is None else row[0]


def set_setting(conn, key: str, value: str | None) -> None:
    """Set (or, with None, remove) one setting, inside or outside a transaction."""
    with transaction(conn):
        if value is None:
            conn.execute("DELETE FROM sync_settings WHERE key = ?", (key,))
        else:
            conn.execute("INSERT INTO sync_settings (key, value) VALUES (?, ?) "
                         "ON CONFLICT (key) DO UPDATE SET value = excluded.value",
                         (key, str(value)))


def log_uuid(conn) -> str:
    """This log's identity, made on first use (a device, an office)."""
    found = get_setting(conn, LOG_UUID)
    if found:
        return found
    with transaction(conn):
        conn.execute("INSERT INTO sync_settings (key, value) VALUES (?, ?) "
                     "ON CONFLICT (key) DO NOTHING", (LOG_UUID, str(uuidlib.uuid4())))
    return get_setting(conn, LOG_UUID)


def clean_person(text) -> str:
    """A person's or device's name as kept: one line, at most PERSON_MAX characters."""
    name = " ".join(str(text or "").split())
    if len(name) > PERSON_MAX:
        raise StoreError(f"A name is at most {PERSON_MAX} characters; shorten it.", "person")
    if any(ord(c) < 32 for c in name):
        raise StoreError("A name cannot contain control characters.", "person")
    return name


def note_reading_origin(conn, reading_id: int, person: str | None = None) -> None:
    """Remember that this log took a new reading, and who did (``person``, or
    the person set for this log), inside the caller's transaction."""
    # a visit's "visited by" may be longer than a person's name here: shortened, never refused
    who = " ".join(str(person).split())[:PERSON_MAX] if person else None
    who = who or get_setting(conn, PERSON) or None
    conn.execute("INSERT INTO reading_origin (reading_id, log_uuid, device_name, person) "
                 "VALUES (?, ?, ?, ?) ON CONFLICT (reading_id) DO NOTHING",
                 (reading_id, log_uuid(conn), get_setting(conn, DEVICE_NAME) or "", who))


# ---------------------------------------------------------------- follows

def follow_site(conn, name: str) -> str:
    name = clean_site_name(name)
    with transaction(conn):
        if not any(f["site_name"].lower() == name.lower() for f in list_follows(conn)):
            conn.execute("INSERT INTO sync_follows (site_name, cursor, added_at) "
                         "VALUES (?, '{}', ?) ON CONFLICT (site_name) DO NOTHING",
                         (name, utc_now()))
    return name


def unfollow_site(conn, name: str) -> int:
    name = " ".join(str(name or "").split()).lower()
    with transaction(conn):
        gone = [f["site_name"] for f in list_follows(conn) if f["site_name"].lower() == name]
        for n in gone:
            conn.execute("DELETE FROM sync_follows WHERE site_name = ?", (n,))
    return len(gone)


def list_follows(conn) -> list[dict]:
    return [{"site_name": r["site_name"], "cursor": json.loads(r["cursor"] or "{}"),
             "added_at": r["added_at"]}
            for r in conn.execute("SELECT * FROM sync_follows ORDER BY site_name")]

