"""Damaged, empty or unwritable logs: checks, summaries and read-only
connections for rescue."""
from __future__ import annotations

import os
import sqlite3
from pathlib import Path

from .core import StoreError, _migrations


def integrity_problems(conn, quick: bool = False) -> list[str]:
    """SQLite's own check of every page and index; an empty list means sound."""
    rows = conn.execute("PRAGMA quick_check" if quick else "PRAGMA integrity_check").fetchall()
    found = [r[0] for r in rows]
    return [] if found == ["ok"] else found


def log_summary(conn) -> dict:
    """What a log holds, to tell a user what a backup or restore carries."""
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    if "readings" not in tables or "sites" not in tables:
        raise StoreError("This is not a fieldapp log (no readings table).", "file")
    return {
        "schema": conn.execute("PRAGMA user_version").fetchone()[0],
        "readings": conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0],
        "sites": conn.execute("SELECT COUNT(*) FROM sites").fetchone()[0],
        "newest": conn.execute("SELECT MAX(recorded_at) FROM readings").fetchone()[0],
    }


# ---- damaged, empty or unwritable logs (read-only rescue)

SQLITE_HEADER = b"SQLite format 3\x00"


def _ro_uri(path: Path, immutable: bool = False) -> str:
    from urllib.parse import quote
    return f"file:{quote(str(Path(path).resolve()))}?" + ("immutable=1" if immutable
                                                          else "mode=ro")


def connect_readonly(path: str | Path) -> sqlite3.Connection:
    """Open the log so that nothing can be written through this connection
    (a damaged log, a read-only folder, a full disk). ``mode=ro`` first; in a
    read-only folder SQLite cannot make its shared-memory file, and then the
    file is opened as immutable, which is exact as long as no write-ahead log
    holds unmerged pages (checked: otherwise the error says so)."""
    path = Path(path)
    try:
        conn = sqlite3.connect(_ro_uri(path), uri=True, timeout=30, isolation_level=None,
                               check_same_thread=False)
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
    except sqlite3.OperationalError:
        wal = path.with_name(path.name + "-wal")
        if wal.exists() and wal.stat().st_size > 0:
            raise
        conn = sqlite3.connect(_ro_uri(path, immutable=True), uri=True, timeout=30,
                               isolation_level=None, check_same_thread=False)
    conn.row_factory = sqlite3.Row
    conn.execute("PRAGMA query_only = ON")
    return conn


def _restore_hint(path: Path) -> str:
    return (f"Restore a backup with: python -m fieldapp restore --data {path.parent} "
            "BACKUP_FILE (stop the server first); the damaged file is kept beside it.")


def inspect_log(path: str | Path) -> dict:
    """What state the log file is in, without writing anything to it.

    Returns {"state": ..., "problem": text or None}; state is "new" (no file
    yet), "ok", "damaged" (opens, but SQLite's quick_check finds damage: the
    server may start read-only for rescue), or "refused" (an empty file, not
    a database, another program's or a newer fieldapp's database: nothing can
    be rescued through fieldapp and nothing is touched)."""
    path = Path(path)
    if not path.exists():
        return {"state": "new", "problem": None}
    size = path.stat().st_size
    wal = path.with_name(path.name + "-wal")
    if size == 0:
        extra = (f" A write-ahead file {wal.name} of {wal.stat().st_size} bytes lies beside "
                 "it: keep both files." if wal.exists() and wal.stat().st_size else "")
        return {"state": "refused", "problem": (
            f"{path} is empty (0 bytes): the log was cut short or never written. fieldapp "
            "will not start a new log over it." + extra + " " + _restore_hint(path)
            + " If this folder never held a log, delete the empty file.")}
    try:
        with open(path, "rb") as f:
            head = f.read(16)
    except OSError as e:
        return {"state": "refused", "problem": f"{path} cannot be read ({e.strerror})."}
    if head != SQLITE_HEADER:
        return {"state": "refused", "problem": (
            f"{path} is not a readable fieldapp log (not a SQLite database, or its first "
            "page is damaged). It was left as it is. " + _restore_hint(path))}
    try:
        conn = connect_readonly(path)
    except sqlite3.Error as e:
        return {"state": "refused", "problem": f"{path} cannot be opened ({e}). "
                + _restore_hint(path)}
    try:
        tables = {r[0] for r in conn.execute(
            "SELECT name FROM sqlite_master WHERE type='table'")}
        if tables and "readings" not in tables:
            return {"state": "refused", "problem": (
                f"{path} is a database of another program; fieldapp will not touch it. "
                "Choose another --data folder.")}
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        if version > max(v for v, _ in _migrations()):
            return {"state": "refused", "problem": (
                f"this database was written by a newer fieldapp (schema {version}); "
                "update fieldapp.")}
        problems = integrity_problems(conn, quick=True)
    except sqlite3.DatabaseError as e:
        problems = [str(e)]
    finally:
        conn.close()
    if problems:
        return {"state": "damaged", "problem": (
            f"The log {path} is damaged (SQLite quick_check: {problems[0][:200]}). fieldapp "
            "opened it read-only and writes nothing to it: export what can still be read "
            "(the Export link, or python -m fieldapp export), then " + _restore_hint(path)[0]
            .lower() + _restore_hint(path)[1:])}
    return {"state": "ok", "problem": None}


def unwritable_reason(folder: str | Path, error: str = "") -> str | None:
    """Why the log's folder cannot take a write now, in words, or None."""
    import shutil
    folder = Path(folder)
    if "readonly" in error or "read-only" in error or not os.access(folder, os.W_OK):
        return (f"the folder {folder} is read-only (a write-protected card or a file system "
                "mounted read-only)")
    try:
        free = shutil.disk_usage(folder).free
    except OSError:
        free = None
    if "full" in error or (free is not None and free < 1 << 20):
        return f"the disk holding {folder} is full ({(free or 0) // 1024} KiB free)"
    return None


