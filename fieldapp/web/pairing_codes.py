"""Pairing codes: the short code a tablet types to pair with the laptop's log
(made, shown, matched in constant time) and the digest kept of a device's
session token. The pages and the session check are in :mod:`.pairing`."""
from __future__ import annotations

import datetime as dt
import hashlib
import hmac
import secrets
import sqlite3

from .. import store

#: Letters and digits that cannot be mistaken for one another when read off a
#: screen and typed on a tablet (no 0/O, 1/I/L).
CODE_ALPHABET = "23456789ABCDEFGHJKMNPQRSTUVWXYZ"
CODE_LENGTH = 8                              # 31^8, about 8.5e11 codes
CODE_LIFETIME = dt.timedelta(hours=24)


def token_digest(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8", "replace")).hexdigest()


def normalize_code(text) -> str:
    """What a person typed -> the stored form: upper case, no spaces or dashes."""
    return "".join(c for c in str(text or "").upper() if c.isalnum())


def format_code(code: str) -> str:
    """K7QM4TXZ -> K7QM-4TXZ, easier to read aloud and type."""
    return code[:4] + "-" + code[4:] if len(code) == CODE_LENGTH else code


def matching_code(db, typed: str):
    """The active pairing code the person typed, or None. Every active code is
    compared in constant time, so the answer's timing says nothing."""
    match = None
    for row in store.active_pairing_codes(db, _utc()):
        if hmac.compare_digest(row["code"].encode(), typed[:64].encode()):
            match = row
    return match


def _utc(delta: dt.timedelta = dt.timedelta(0)) -> str:
    return (dt.datetime.now(dt.timezone.utc) + delta).isoformat(timespec="seconds")


def new_code(conn) -> sqlite3.Row:
    """Make a fresh pairing code (revoking the previous one) and store it."""
    code = "".join(secrets.choice(CODE_ALPHABET) for _ in range(CODE_LENGTH))
    return store.insert_pairing_code(conn, code, _utc(CODE_LIFETIME))


def current_code(conn, create: bool = False) -> sqlite3.Row | None:
    """The code tablets can pair with now; with ``create`` a new one when
    none is valid."""
    rows = store.active_pairing_codes(conn, _utc())
    if rows:
        return rows[0]
    return new_code(conn) if create else None
