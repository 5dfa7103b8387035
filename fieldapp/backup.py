"""Backup and restore of the log, safe while the server runs.

    python -m fieldapp backup --data DIR OUT        # OUT: a file, or a folder
    python -m fieldapp restore --data DIR BACKUP

``backup`` uses SQLite's online backup (``sqlite3.Connection.backup``) in a
single step, which copies one consistent snapshot of the database: in WAL
mode the server keeps saving readings meanwhile, and a save either is in the
copy entirely or not at all. The copy is written beside its final name,
checked (``PRAGMA integrity_check``, a fieldapp log), flushed to disk and only
then renamed into place, so a half-written backup never carries the final
name. It is a single self-contained file (rollback journal mode).

``restore`` refuses a file that is not a sound fieldapp log (corrupt, another
program's database, a newer schema), and before replacing anything keeps a
copy of the current log beside it (``fieldapp.sqlite3.replaced-<time>``).
The replacement itself goes through the same backup API, as one transaction,
so a crash mid-restore leaves the old log or the new one, never a mixture.
Stop the server before restoring, so that no tablet saves into the log being
replaced.
"""
from __future__ import annotations

import datetime as dt
import os
import shutil
import sqlite3
from pathlib import Path

from . import store
from .science import InputError


def _stamp() -> str:
    return dt.datetime.now().strftime("%Y%m%d-%H%M%S")


def _fsync_path(path: Path) -> None:
    # Windows flushes a file only through a handle open for writing.
    flags = (os.O_RDWR | getattr(os, "O_BINARY", 0)) if os.name == "nt" else os.O_RDONLY
    fd = os.open(path, flags)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(path: Path) -> None:
    if os.name == "nt":   # Windows cannot open a folder as a file; NTFS logs the rename
        return
    try:
        _fsync_path(path)
    except OSError:   # not every platform can fsync a folder
        pass


def _read_only_uri(path: Path) -> str:
    """A read-only SQLite URI for ``path`` that holds on Windows too (drive
    letters, backslashes) and for names with '?', '#' or '%' in them."""
    return Path(path).resolve().as_uri() + "?mode=ro"


def check_log_file(path: Path) -> dict:
    """Open ``path`` read-only and return its summary, or raise StoreError
    saying why it is not a sound fieldapp log."""
    path = Path(path)
    if not path.is_file():
        raise store.StoreError(f"{path} does not exist or is not a file.", "file")
    try:
        conn = sqlite3.connect(_read_only_uri(path), uri=True)
    except sqlite3.Error as e:
        raise store.StoreError(f"{path} cannot be opened ({e}).", "file") from None
    try:
        try:
            problems = store.integrity_problems(conn)
            summary = store.log_summary(conn)
        except sqlite3.DatabaseError as e:
            raise store.StoreError(f"{path} is not a readable SQLite database ({e}); "
                                   "nothing was changed.", "file") from None
        if problems:
            raise store.StoreError(f"{path} is damaged (integrity check: {problems[0]}); "
                                   "nothing was changed.", "file")
        newest = max(v for v, _ in store._migrations())
        if summary["schema"] > newest:
            raise store.StoreError(f"{path} was written by a newer fieldapp (schema "
                                   f"{summary['schema']}); update fieldapp first.", "file")
        return summary
    except store.StoreError as e:
        if e.message.startswith("This is not a fieldapp log"):
            raise store.StoreError(f"{path} is not a fieldapp log (another program's "
                                   "database?); nothing was changed.", "file") from None
        raise
    finally:
        conn.close()


def backup(db_path, out) -> dict:
    """Copy the log at ``db_path`` to ``out`` (a new file, or a folder where a
    dated name is chosen). Returns the copy's summary with its path and size."""
    db_path = Path(db_path)
    if not db_path.is_file() or db_path.stat().st_size == 0:
        raise store.StoreError(f"There is no log at {db_path} to back up.", "data")
    out = Path(out)
    if out.is_dir():
        out = out / f"fieldapp-backup-{_stamp()}.sqlite3"
    if out.exists():
        raise InputError(f"{out} exists already; choose a new file name or a folder.",
                         "output")
    if not out.parent.is_dir():
        raise InputError(f"The folder {out.parent} does not exist.", "output")
    part = out.with_name(out.name + ".part")
    state = store.inspect_log(db_path)          # quick_check before every backup
    if state["state"] != "ok":
        raise store.StoreError(
            f"{state['problem']} A backup now would copy the damage, so none was made."
            if state["state"] == "damaged" else state["problem"], "data")
    try:
        src = store.connect(db_path, upgrade=False)
        src.execute("SELECT count(*) FROM sqlite_master").fetchone()
    except sqlite3.OperationalError:            # a read-only folder: read it as such
        src = store.connect_readonly(db_path)
    try:
        try:
            store.log_summary(src)
        except sqlite3.DatabaseError as e:
            raise store.StoreError(f"{db_path} is not a readable fieldapp log ({e}).",
                                   "data") from None
        dst = sqlite3.connect(part)
        try:
            src.backup(dst)                       # one step: one consistent snapshot
            dst.execute("PRAGMA journal_mode = DELETE")
            problems = store.integrity_problems(dst)
            summary = store.log_summary(dst)
        finally:
            dst.close()
    except BaseException:
        part.unlink(missing_ok=True)
        raise
    finally:
        src.close()
    if problems:
        part.unlink(missing_ok=True)
        raise store.StoreError(f"The copy failed its integrity check ({problems[0]}); the "
                               "log may be damaged. Nothing was written.", "data")
    _fsync_path(part)
    os.replace(part, out)
    _fsync_dir(out.parent)
    return {**summary, "path": str(out), "bytes": out.stat().st_size}


def restore(backup_file, db_path) -> dict:
    """Replace the log at ``db_path`` with ``backup_file``; returns the
    restored summary and where the replaced log was kept (or None)."""
    backup_file, db_path = Path(backup_file), Path(db_path)
    summary = check_log_file(backup_file)
    if backup_file.resolve() == db_path.resolve():
        raise InputError("That file is the log itself; choose a backup.", "file")
    kept = None
    db_path.parent.mkdir(parents=True, exist_ok=True)
    if db_path.exists() and db_path.stat().st_size > 0:
        kept = db_path.with_name(f"{db_path.name}.replaced-{_stamp()}")
        readable = True
        try:
            current = store.connect(db_path, upgrade=False)
        except sqlite3.DatabaseError:
            readable = False
        if readable:
            try:
                store.log_summary(current)
                keep = sqlite3.connect(kept)
                try:
                    current.backup(keep)
                    keep.execute("PRAGMA journal_mode = DELETE")
                finally:
                    keep.close()
            except sqlite3.DatabaseError:
                readable = False
                kept.unlink(missing_ok=True)
            except store.StoreError:
                raise store.StoreError(f"{db_path} is not a fieldapp log; fieldapp will not "
                                       "replace it. Choose another --data folder.",
                                       "data") from None
            finally:
                current.close()
        if not readable:
            # Damaged: keep its bytes as they are (with its WAL), then start afresh.
            for suffix in ("", "-wal"):
                f = db_path.with_name(db_path.name + suffix)
                if f.exists():
                    shutil.copy2(f, kept.with_name(kept.name + suffix))
            for suffix in ("", "-wal", "-shm"):
                db_path.with_name(db_path.name + suffix).unlink(missing_ok=True)
        _fsync_path(kept)
    src = sqlite3.connect(_read_only_uri(backup_file), uri=True)
    dst = sqlite3.connect(db_path, timeout=30)
    try:
        src.backup(dst)
    finally:
        src.close()
        dst.close()
    store.connect(db_path).close()     # WAL mode and migrations, as at start-up
    return {**summary, "path": str(db_path), "kept": str(kept) if kept else None}


def _data_db(a) -> Path:
    from . import default_data_dir
    return Path(a.data or default_data_dir()) / store.DB_NAME


def cmd_backup(a) -> int:
    r = backup(_data_db(a), a.output)
    print(f"fieldapp: backed up {r['readings']} readings at {r['sites']} sites to {r['path']} "
          f"({r['bytes'] / 1e6:.1f} MB, integrity check passed).")
    return 0


def cmd_restore(a) -> int:
    r = restore(a.file, _data_db(a))
    print(f"fieldapp: restored {r['readings']} readings at {r['sites']} sites from {a.file} "
          f"into {r['path']}.")
    if r["kept"]:
        print(f"fieldapp: the log it replaced is kept as {r['kept']}.")
    return 0
