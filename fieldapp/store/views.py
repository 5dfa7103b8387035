"""What the site pages, reports and targets read (schema 003, 015)."""
from __future__ import annotations

import sqlite3

from .core import VIEW_COLUMNS, transaction, utc_now
from .readings import _READING_SELECT


_VIEW_SELECT = f"""
    SELECT r.id, r.uuid, r.sample, r.depth_cm, r.taken_at, r.ratio, r.theta_g_pct,
           r.matric_MPa, r.meter, r.ec25_dS_m, r.ece_dS_m, r.ece_method, r.flags,
           {', '.join('r.' + c for c in VIEW_COLUMNS)}, v.visit_date, st.status,
           CASE WHEN r.flags = '' THEN '' ELSE
               (SELECT group_concat(f.code || ' ' || f.severity, ';') FROM reading_flags f
                WHERE f.reading_id = r.id) END AS flag_rows
    FROM readings r
    JOIN visits v ON v.id = r.visit_id
    JOIN reading_status st ON st.id = r.id"""


def view_readings(conn, site_id: int) -> list[dict]:
    """Every reading version of a site, oldest id first, as the site views
    (``interpret``) read them: the columns they use, the view columns of
    schema 015 and the flags from ``reading_flags`` (``flag_list``: code and
    severity, in the reading's order), without the result JSON."""
    out = []
    for row in conn.execute(_VIEW_SELECT + " WHERE r.site_id = ? ORDER BY r.id", (site_id,)):
        d = dict(zip(row.keys(), row))
        d["flags"] = [c for c in d["flags"].split(";") if c]
        fl = d.pop("flag_rows")
        sev = dict(x.split(" ", 1) for x in fl.split(";")) if fl else {}
        d["flag_list"] = [{"code": c, "severity": sev.get(c)} for c in d["flags"]]
        out.append(d)
    return out

def visits_for_site(conn, site_id: int) -> list[sqlite3.Row]:
    """The site's visits, newest first, with how many readings (all versions)
    and how many current ones each holds."""
    # "current" as the reading_status view defines it, tested on the id alone:
    # the readings_visit index answers the counts without reading any row.
    return conn.execute("""
        SELECT v.id, v.site_id, v.visit_date, v.visited_by,
               COUNT(r.id) AS n_readings,
               SUM(CASE WHEN r.id NOT IN (SELECT reading_id FROM voids) AND r.id NOT IN
                   (SELECT supersedes_id FROM readings WHERE supersedes_id IS NOT NULL)
                   THEN 1 ELSE 0 END) AS n_current
        FROM visits v
        JOIN readings r ON r.visit_id = v.id
        WHERE v.site_id = ?
        GROUP BY v.id, v.site_id, v.visit_date, v.visited_by
        ORDER BY v.visit_date DESC, v.id DESC""", (site_id,)).fetchall()


def get_visit(conn, visit_id: int) -> sqlite3.Row | None:
    return conn.execute("SELECT * FROM visits WHERE id = ?", (visit_id,)).fetchone()


def readings_for_visit(conn, visit_id: int) -> list[sqlite3.Row]:
    """Every reading of a visit (current, corrected and void), in the order taken."""
    return conn.execute(_READING_SELECT + " WHERE r.visit_id = ? ORDER BY r.taken_at, r.id",
                        (visit_id,)).fetchall()


def list_targets(conn, crop: str | None = None) -> list[dict]:
    """The user's target ranges, optionally for one crop."""
    sql, args = "SELECT * FROM targets", ()
    if crop:
        sql, args = sql + " WHERE crop = ?", (crop,)
    return [dict(r) for r in conn.execute(sql + " ORDER BY crop COLLATE NOCASE, measure", args)]


def save_target(conn, t: dict) -> tuple[dict, bool]:
    """Insert or replace the target of (crop, measure); returns (row, created)."""
    with transaction(conn):
        old = conn.execute("SELECT id FROM targets WHERE crop = ? AND measure = ?",
                           (t["crop"], t["measure"])).fetchone()
        conn.execute(
            "INSERT INTO targets (crop, measure, lo_dS_m, hi_dS_m, note, updated_at) "
            "VALUES (?,?,?,?,?,?) ON CONFLICT (crop, measure) DO UPDATE SET "
            "lo_dS_m = excluded.lo_dS_m, hi_dS_m = excluded.hi_dS_m, note = excluded.note, "
            "updated_at = excluded.updated_at",
            (t["crop"], t["measure"], t.get("lo_dS_m"), t.get("hi_dS_m"), t.get("note") or "",
             utc_now()))
        row = conn.execute("SELECT * FROM targets WHERE crop = ? AND measure = ?",
                           (t["crop"], t["measure"])).fetchone()
    return dict(row), old is None


def delete_target(conn, target_id: int) -> bool:
    """Remove a target range (a setting, not a reading); False if none."""
    with transaction(conn):
        cur = conn.execute("DELETE FROM targets WHERE id = ?", (target_id,))
    return cur.rowcount > 0


