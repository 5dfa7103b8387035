"""What a log sends: the next push batch of a device (rows it has not
sent, none it received from the office) and the next pull batch of a site
the office returns. Each kind is read in id order from its cursor."""
from __future__ import annotations

import json
import math

from .sites import clean_site_name, get_site
from .sync_items import _READING_ITEM_SELECT, _reading_item, site_names

_CURSOR_KEYS = ("h", "m", "c", "r", "v", "a")


def _not_received(kind: str, alias: str) -> str:
    return (f"NOT EXISTS (SELECT 1 FROM sync_received x WHERE x.kind = '{kind}' "
            f"AND x.row_id = {alias}.id)")


def push_batch(conn, cursor: dict, max_items: int = 500, max_bytes: int = 700_000
               ) -> tuple[dict, dict, bool]:
    """What a device sends next: (items, the cursor once the office confirms
    them, whether more is waiting). Rows that came from the office are left
    out. Each kind is read in id order from its cursor; a void or an
    acknowledgement waits for the batch that carries its reading, so no
    cursor ever steps over a row that was not sent."""
    cur = {k: int(cursor.get(k, 0)) for k in _CURSOR_KEYS}
    items: dict = {"sites": [], "history": [], "meters": [], "calibrations": [],
                   "readings": [], "voids": [], "acks": []}
    more = False
    budget = max_bytes

    hist = conn.execute(
        "SELECT h.id, h.site_id, s.name AS site, h.changed_at, h.action, h.field, "
        "h.old_value, h.new_value FROM site_history h JOIN sites s ON s.id = h.site_id "
        f"WHERE h.id > ? AND {_not_received('history', 'h')} ORDER BY h.id LIMIT ?",
        (cur["h"], max_items + 1)).fetchall()
    if len(hist) > max_items:
        hist, more = hist[:max_items], True
    for h in hist:
        items["history"].append({k: h[k] for k in ("site", "changed_at", "action", "field",
                                                   "old_value", "new_value")})
        cur["h"] = h["id"]

    for m in conn.execute("SELECT * FROM meters WHERE id > ? ORDER BY id", (cur["m"],)):
        items["meters"].append({k: m[k] for k in m.keys() if k != "id"})
        cur["m"] = m["id"]
    cals = conn.execute(
        "SELECT c.*, m.name AS meter FROM calibrations c JOIN meters m ON m.id = c.meter_id "
        "WHERE c.id > ? ORDER BY c.id LIMIT ?", (cur["c"], max_items + 1)).fetchall()
    if len(cals) > max_items:
        cals, more = cals[:max_items], True
    for c in cals:
        items["calibrations"].append({k: c[k] for k in c.keys() if k not in ("id", "meter_id")})
        cur["c"] = c["id"]

    rows = conn.execute(_READING_ITEM_SELECT + f" WHERE r.id > ? AND {_not_received('reading', 'r')}"
                        " ORDER BY r.id LIMIT ?", (cur["r"], max_items + 1)).fetchall()
    if len(rows) > max_items:
        rows, more = rows[:max_items], True
    sent_through = math.inf
    for i, r in enumerate(rows):
        item = _reading_item(r)
        size = len(json.dumps(item, ensure_ascii=False))
        if items["readings"] and size > budget:
            more = True
            break
        budget -= size
        items["readings"].append(item)
        cur["r"] = r["id"]
    if more:
        sent_through = cur["r"]

    for kind, table, cols in (("void", "voids", "reason, voided_at"),
                              ("ack", "flag_acks", "code, note, acked_at")):
        key = "v" if kind == "void" else "a"
        out = items["voids" if kind == "void" else "acks"]
        q = conn.execute(
            f"SELECT t.id, t.reading_id, r.uuid AS reading_uuid, {', '.join('t.' + c.strip() for c in cols.split(','))} "
            f"FROM {table} t JOIN readings r ON r.id = t.reading_id "
            f"WHERE t.id > ? AND {_not_received(kind, 't')} ORDER BY t.id LIMIT ?",
            (cur[key], max_items + 1)).fetchall()
        if len(q) > max_items:
            q, more = q[:max_items], True
        for row in q:
            if row["reading_id"] > sent_through:
                more = True
                break
            out.append({k: row[k] for k in row.keys() if k not in ("id", "reading_id")})
            cur[key] = row["id"]

    names_needed = {i["site"] for i in items["readings"]} | {h["site"] for h in items["history"]}
    for name in sorted(names_needed):
        site = get_site(conn, name, former_names=False)
        if site is not None:
            items["sites"].append({"name": site["name"], "names": site_names(conn, site["id"])})
    return items, cur, more


def is_empty(items: dict) -> bool:
    return not any(items.get(k) for k in ("history", "meters", "calibrations", "readings",
                                          "voids", "acks"))



def pull_site(conn, site_name: str, cursor: dict, exclude_log: str | None,
              max_items: int = 500, max_bytes: int = 700_000) -> dict:
    """What the office sends a device that follows this site, from its
    cursor: the site's names, its settings changes, readings (not those the
    device itself took), voids and acknowledgements (a void or an
    acknowledgement waits for the batch carrying its reading)."""
    cur = {k: int(cursor.get(k, 0)) if isinstance(cursor, dict) else 0 for k in ("h", "r", "v", "a")}
    site = get_site(conn, clean_site_name(site_name))
    out = {"site": None, "history": [], "readings": [], "voids": [], "acks": [],
           "cursor": cur, "more": False}
    if site is None:
        return out
    sid = site["id"]
    out["site"] = {"name": site["name"], "names": site_names(conn, sid)}
    hist = conn.execute("SELECT id, changed_at, action, field, old_value, new_value FROM "
                        "site_history WHERE site_id = ? AND id > ? ORDER BY id LIMIT ?",
                        (sid, cur["h"], max_items + 1)).fetchall()
    if len(hist) > max_items:
        hist, out["more"] = hist[:max_items], True
    for h in hist:
        out["history"].append({"site": site["name"], **{k: h[k] for k in h.keys() if k != "id"}})
        cur["h"] = h["id"]
    where = "r.site_id = ? AND r.id > ?"
    args: list = [sid, cur["r"]]
    if exclude_log:
        where += (" AND NOT EXISTS (SELECT 1 FROM reading_origin xo WHERE "
                  "xo.reading_id = r.id AND xo.log_uuid = ?)")
        args.append(exclude_log)
    rows = conn.execute(_READING_ITEM_SELECT + f" WHERE {where} ORDER BY r.id LIMIT ?",
                        args + [max_items + 1]).fetchall()
    if len(rows) > max_items:
        rows, out["more"] = rows[:max_items], True
    budget = max_bytes
    for r in rows:
        item = _reading_item(r)
        item["site"] = site["name"]
        size = len(json.dumps(item, ensure_ascii=False))
        if out["readings"] and size > budget:
            out["more"] = True
            break
        budget -= size
        out["readings"].append(item)
        cur["r"] = r["id"]
    through = cur["r"] if out["more"] else math.inf
    for key, table, cols in (("v", "voids", ("reason", "voided_at")),
                             ("a", "flag_acks", ("code", "note", "acked_at"))):
        q = conn.execute(
            f"SELECT t.id, t.reading_id, r.uuid AS reading_uuid, "
            f"{', '.join('t.' + c for c in cols)} FROM {table} t JOIN readings r "
            f"ON r.id = t.reading_id WHERE r.site_id = ? AND t.id > ? ORDER BY t.id LIMIT ?",
            (sid, cur[key], max_items + 1)).fetchall()
        if len(q) > max_items:
            q, out["more"] = q[:max_items], True
        dest = out["voids" if key == "v" else "acks"]
        for row in q:
            if row["reading_id"] > through:
                out["more"] = True
                break
            dest.append({k: row[k] for k in row.keys() if k not in ("id", "reading_id")})
            cur[key] = row["id"]
    return out

