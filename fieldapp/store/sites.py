"""Sites, their settings and the settings history (schema 001, 006)."""
from __future__ import annotations

import sqlite3

from .core import SITE_NAME_MAX, StoreError, transaction, utc_now


def clean_site_name(name) -> str:
    name = " ".join(str(name or "").split())
    if not name:
        raise StoreError("Type a site name, e.g. Block 3.", "site")
    if len(name) > SITE_NAME_MAX:
        raise StoreError(f"Site names are at most {SITE_NAME_MAX} characters; shorten it.",
                         "site")
    if any(ord(c) < 32 for c in name):
        raise StoreError("Site names cannot contain control characters.", "site")
    return name


def get_site(conn, name_or_id, former_names: bool = True) -> sqlite3.Row | None:
    """A site by id or by name. A name no site holds now finds the site that
    held it last (a reading queued on a tablet before the site was renamed);
    ``former_names=False`` looks at current names only."""
    if isinstance(name_or_id, int):
        return conn.execute("SELECT * FROM sites WHERE id = ?", (name_or_id,)).fetchone()
    name = " ".join(str(name_or_id).split())
    row = conn.execute("SELECT * FROM sites WHERE name = ?", (name,)).fetchone()
    if row is None and former_names:
        row = site_by_former_name(conn, name)
    return row


def ensure_site(conn, name: str, former_names: bool = True, **attrs) -> sqlite3.Row:
    """Return the site called ``name`` (or, with ``former_names``, the site
    renamed away from it), creating it (inside the caller's transaction) if it
    does not exist. The creation is the first entry of the site's history."""
    name = clean_site_name(name)
    row = get_site(conn, name, former_names=former_names)
    if row is None:
        conn.execute(
            "INSERT INTO sites (name, crop, latitude, longitude, sp_pct, texture, kind, notes,"
            " created_at) VALUES (?,?,?,?,?,?,?,?,?)",
            (name, attrs.get("crop"), attrs.get("latitude"), attrs.get("longitude"),
             attrs.get("sp_pct"), attrs.get("texture"), attrs.get("kind") or "field",
             attrs.get("notes") or "", utc_now()))
        row = get_site(conn, name, former_names=False)
        _record_site_history(conn, row["id"], "created",
                             {k: (None, row[k]) for k in SITE_SETTINGS})
    return row


SITE_EDITABLE = ("crop", "latitude", "longitude", "sp_pct", "texture", "kind", "notes")


def update_site(conn, site_id: int, **attrs) -> sqlite3.Row:
    """Change some settings of a site; the change is kept in its history."""
    return change_site_settings(conn, site_id, attrs)[0]


# ---- site settings and their history (schema/006_site_settings.sql)

#: The settings kept in site_history, in the order they are shown.
SITE_SETTINGS = ("name", "kind", "crop", "texture", "sp_pct", "latitude", "longitude", "notes")


def _history_text(value) -> str | None:
    if value is None or value == "":
        return None
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _record_site_history(conn, site_id: int, action: str, changes: dict,
                         when: str | None = None) -> int | None:
    """Append one change (``{field: (old, new)}``) to the site's history,
    inside the caller's transaction; fields whose value did not change are
    left out. Returns the change number, or None when nothing changed."""
    rows = [(f, _history_text(o), _history_text(n)) for f, (o, n) in changes.items()]
    rows = [r for r in rows if r[1] != r[2]]
    if not rows:
        return None
    no = conn.execute("SELECT COALESCE(MAX(change_no), 0) + 1 FROM site_history "
                      "WHERE site_id = ?", (site_id,)).fetchone()[0]
    when = when or utc_now()
    conn.executemany(
        "INSERT INTO site_history (site_id, change_no, changed_at, action, field, old_value,"
        " new_value) VALUES (?,?,?,?,?,?,?)",
        [(site_id, no, when, action, f, o, n) for f, o, n in rows])
    return no


def change_site_settings(conn, site_id: int, attrs: dict) -> tuple[sqlite3.Row, int | None]:
    """Change a site's settings (any of SITE_SETTINGS) and keep the change in
    its history, in one transaction. Returns (the site, change number or None
    when nothing changed). A name another site holds answers 409."""
    with transaction(conn):
        old = get_site(conn, site_id)
        if old is None:
            raise StoreError("No such site.", "site", 404)
        cols = [k for k in SITE_SETTINGS if k in attrs]
        if "crop" in cols and str(old["crop"] or "").lower() == str(attrs["crop"] or "").lower():
            cols.remove("crop")      # the same crop spelt in another case is no change
        if "name" in attrs:
            attrs = {**attrs, "name": clean_site_name(attrs["name"])}
            other = get_site(conn, attrs["name"], former_names=False)
            if other is not None and other["id"] != site_id:
                raise StoreError(f"Another site is called {other['name']!r} already; choose "
                                 "another name.", "name", 409)
        if "kind" in attrs and not attrs["kind"]:
            attrs = {**attrs, "kind": "field"}
        if "notes" in attrs and attrs["notes"] is None:
            attrs = {**attrs, "notes": ""}
        no = None
        if cols:
            try:
                conn.execute(f"UPDATE sites SET {', '.join(c + ' = ?' for c in cols)} "
                             "WHERE id = ?", [attrs[c] for c in cols] + [site_id])
            except sqlite3.IntegrityError as e:
                raise StoreError(f"These settings could not be kept ({e}).", None, 409) from None
            no = _record_site_history(conn, site_id, "changed",
                                      {c: (old[c], attrs[c]) for c in cols})
        row = get_site(conn, site_id)
    return row, no


def site_history(conn, site_id: int) -> list[dict]:
    """Every kept change of a site's settings, oldest first: one dict per
    setting per change (change_no, changed_at, action, field, old_value, new_value)."""
    return [dict(r) for r in conn.execute(
        "SELECT change_no, changed_at, action, field, old_value, new_value FROM site_history "
        "WHERE site_id = ? ORDER BY change_no, id", (site_id,))]


def site_by_former_name(conn, name: str) -> sqlite3.Row | None:
    """The site that was last renamed away from ``name`` (case ignored), if any."""
    row = conn.execute(
        "SELECT site_id FROM site_history WHERE field = 'name' AND action = 'changed' "
        "AND old_value = ? COLLATE NOCASE ORDER BY id DESC LIMIT 1", (name,)).fetchone()
    if row is None:
        return None
    return conn.execute("SELECT * FROM sites WHERE id = ?", (row[0],)).fetchone()


def list_sites(conn, where: str = "", args=(), limit: int | None = None,
               counts: bool = True) -> list[sqlite3.Row]:
    """Every site (or, with ``where``/``limit``, one page of them: see
    :func:`sites_page`) with its reading count and latest current reading.
    ``counts=False``: ``n_readings`` is NULL (counting walks every reading of
    the log; ``store.SiteCache.reading_counts`` keeps the counts)."""
    n = "(SELECT COUNT(*) FROM readings r WHERE r.site_id = s.id)" if counts else "NULL"
    return conn.execute(f"""
        SELECT s.*,
               {n} AS n_readings,
               l.taken_at AS last_taken_at, l.sample AS last_sample, l.value AS last_value,
               l.unit AS last_unit, l.ec25_dS_m AS last_ec25_dS_m, l.ece_dS_m AS last_ece_dS_m,
               l.flags AS last_flags
        FROM sites s
        LEFT JOIN readings l ON l.id = (
            SELECT r.id FROM readings r JOIN reading_status st ON st.id = r.id
            WHERE r.site_id = s.id AND st.status = 'current'
            ORDER BY r.taken_at DESC, r.id DESC LIMIT 1)
        """ + where + """
        ORDER BY s.name COLLATE NOCASE, s.id""" + (" LIMIT ?" if limit else ""),
        list(args) + ([limit] if limit else [])).fetchall()


def open_flag_counts(conn, site_ids=None, ids: tuple | None = None) -> dict[int, int]:
    """Per site, how many current readings carry an error-level flag that
    nobody has acknowledged (a reading saved where the page could not check
    it: the sites list marks it until a correction or an acknowledgement
    settles it; "Save anyway" on the page acknowledges at once). ``site_ids``:
    only these sites (the page of the sites list being shown); ``ids``
    (lo, hi): only readings with lo < id <= hi (``store.SiteCache`` adds
    readings saved since)."""
    only, args = "", []
    if ids is not None:
        only, args = "AND f.reading_id > ? AND f.reading_id <= ? ", [ids[0], ids[1]]
    if site_ids is not None:
        site_ids = list(site_ids)
        if not site_ids:
            return {}
        only += f"AND r.site_id IN ({','.join('?' * len(site_ids))})"
        args += site_ids
    # reading_flags (schema 014): the error-level rows through their index,
    # then three unique-index probes each; no JSON is read.
    rows = conn.execute("""
        SELECT r.site_id, COUNT(DISTINCT f.reading_id)
        FROM reading_flags f
        JOIN readings r ON r.id = f.reading_id
        WHERE f.severity = 'error'
          AND NOT EXISTS (SELECT 1 FROM voids v WHERE v.reading_id = f.reading_id)
          AND NOT EXISTS (SELECT 1 FROM readings n WHERE n.supersedes_id = f.reading_id)
          AND NOT EXISTS (SELECT 1 FROM flag_acks a WHERE a.reading_id = f.reading_id
                          AND a.code = f.code)
          """ + only + """
        GROUP BY r.site_id""", args).fetchall()
    return {r[0]: r[1] for r in rows}


