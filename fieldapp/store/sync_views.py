"""What the office shows about sync: corrections to review, who (person,
device) sent what, and a log's fingerprint for comparing two logs."""
from __future__ import annotations

from .sync_devices import device_names

def review_pairs(conn, site_id: int | None = None) -> list[dict]:
    """Readings corrected twice (by two devices): the version linked as the
    correction and each version marked for review, per original."""
    where, args = "", []
    if site_id is not None:
        where, args = " WHERE r.site_id = ?", [site_id]
    out = []
    for row in conn.execute(
            "SELECT rv.supersedes_uuid, r.uuid AS rival, r.taken_at, o.person, o.device_name, "
            "(SELECT n.uuid FROM readings n JOIN readings t ON t.id = n.supersedes_id "
            " WHERE t.uuid = rv.supersedes_uuid) AS linked "
            "FROM reading_review rv JOIN readings r ON r.id = rv.reading_id "
            "LEFT JOIN reading_origin o ON o.reading_id = r.id" + where +
            " ORDER BY rv.supersedes_uuid, r.id", args):
        out.append(dict(row))
    return out


def _name(names: dict, log: str | None, stored: str | None) -> str:
    return names.get(log or "", "") or (stored or "")


def sites_across_devices(conn) -> list[dict]:
    """Every site with its reading count, latest current reading and who
    (person, device) sent its newest reading."""
    from .sites import list_sites
    names = device_names(conn)
    last = {r[0]: (r[1], _name(names, r[4], r[2]), r[3]) for r in conn.execute(
        "SELECT r.site_id, o.person, o.device_name, r.recorded_at, o.log_uuid FROM readings r "
        "LEFT JOIN reading_origin o ON o.reading_id = r.id "
        "WHERE r.id IN (SELECT MAX(id) FROM readings GROUP BY site_id)")}
    out = []
    for s in list_sites(conn):
        d = dict(s)
        p = last.get(s["id"])
        d["last_person"], d["last_device"], d["last_recorded_at"] = p if p else (None, None, None)
        out.append(d)
    return out


def scout_activity(conn) -> list[dict]:
    """Per person and device: readings (every version), the latest taken,
    and when the device was last seen at the office."""
    seen = {}
    for d in conn.execute("SELECT log_uuid, MAX(last_seen_at) FROM office_devices GROUP BY log_uuid"):
        seen[d[0]] = d[1]
    names = device_names(conn)
    out = []
    for r in conn.execute(
            "SELECT o.person, o.log_uuid, MAX(o.device_name) AS device_name, COUNT(*) AS n, "
            "MAX(r.taken_at) AS last_taken_at FROM reading_origin o "
            "JOIN readings r ON r.id = o.reading_id GROUP BY o.person, o.log_uuid "
            "ORDER BY MAX(r.taken_at) DESC"):
        d = dict(r)
        d["device_name"] = _name(names, r["log_uuid"], r["device_name"])
        d["last_seen_at"] = seen.get(r["log_uuid"])
        out.append(d)
    return out


def site_readings_by(conn, site_id: int, person: str | None = None, log: str | None = None,
                     limit: int = 200) -> list[dict]:
    """A site's readings (newest first), only those of a person and/or a device."""
    where, args = ["r.site_id = ?"], [site_id]
    if person:
        where.append("o.person = ?")
        args.append(person)
    if log:
        where.append("o.log_uuid = ?")
        args.append(log)
    names = device_names(conn)
    rows = [dict(r) for r in conn.execute(
        "SELECT r.uuid, r.taken_at, r.sample, r.value, r.unit, r.ec25_dS_m, r.ece_dS_m, "
        "r.flags, st.status, o.person, o.device_name, o.log_uuid FROM readings r "
        "JOIN reading_status st ON st.id = r.id LEFT JOIN reading_origin o "
        "ON o.reading_id = r.id WHERE " + " AND ".join(where) +
        " ORDER BY r.taken_at DESC, r.id DESC LIMIT ?", args + [limit])]
    for r in rows:
        r["device_name"] = _name(names, r["log_uuid"], r["device_name"])
    return rows


def people_and_devices(conn, site_id: int) -> tuple[list[str], list[tuple[str, str]]]:
    """Who and which devices took readings at a site (for its filter)."""
    people = [r[0] for r in conn.execute(
        "SELECT DISTINCT o.person FROM reading_origin o JOIN readings r ON r.id = o.reading_id "
        "WHERE r.site_id = ? AND o.person IS NOT NULL ORDER BY o.person", (site_id,))]
    names = device_names(conn)
    devices = sorted(((r[0], _name(names, r[0], r[1])) for r in conn.execute(
        "SELECT o.log_uuid, MAX(o.device_name) FROM reading_origin o JOIN readings r "
        "ON r.id = o.reading_id WHERE r.site_id = ? GROUP BY o.log_uuid", (site_id,))),
        key=lambda x: x[1])
    return people, devices


def log_fingerprint(conn) -> dict:
    """What two logs must share once they have converged: every reading by
    uuid with its values and the version it corrects, the voids, the
    acknowledgements, and the site settings."""
    readings = {r[0]: tuple(r[1:]) for r in conn.execute(
        "SELECT r.uuid, s.name, r.value, r.unit, r.taken_at, r.flags, r.result_json, "
        "COALESCE(p.uuid, rv.supersedes_uuid) FROM readings r JOIN sites s ON s.id = r.site_id "
        "LEFT JOIN readings p ON p.id = r.supersedes_id "
        "LEFT JOIN reading_review rv ON rv.reading_id = r.id")}
    voids = {r[0]: r[1] for r in conn.execute(
        "SELECT r.uuid, v.reason FROM voids v JOIN readings r ON r.id = v.reading_id")}
    acks = {(r[0], r[1]) for r in conn.execute(
        "SELECT r.uuid, a.code FROM flag_acks a JOIN readings r ON r.id = a.reading_id")}
    return {"readings": readings, "voids": voids, "acks": acks}
