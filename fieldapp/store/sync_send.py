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


#: Voids and acknowledgements as a batch carries them: (cursor key, kind in
#: sync_received, table, columns, the batch's list).
_MARKS = (("v", "void", "voids", ("reason", "voided_at"), "voids"),
          ("a", "ack", "flag_acks", ("code", "note", "acked_at"), "acks"))


def _limited(rows: list, max_items: int) -> tuple[list, bool]:
    """At most max_items rows (read with LIMIT max_items + 1), and whether more wait."""
    return (rows[:max_items], True) if len(rows) > max_items else (rows, False)


def _fill_readings(rows: list, dest: list, cur: dict, max_items: int, max_bytes: int,
                   site: str | None = None) -> bool:
    """Reading items into ``dest`` while they fit in ``max_bytes`` (the first
    always goes), moving ``cur["r"]``; whether more wait."""
    rows, more = _limited(rows, max_items)
    budget = max_bytes
    for r in rows:
        item = _reading_item(r)
        if site is not None:
            item["site"] = site
        size = len(json.dumps(item, ensure_ascii=False))
        if dest and size > budget:
            return True
        budget -= size
        dest.append(item)
        cur["r"] = r["id"]
    return more


def _fill_marks(conn, out: dict, cur: dict, through: float, max_items: int,
                where_of, args: tuple = ()) -> bool:
    """Voids and acknowledgements after their cursors (``where_of(kind)``
    narrows them, with ``args``); one whose reading is past ``through`` waits
    for the batch that carries its reading. Whether more wait."""
    more = False
    for key, kind, table, cols, dest in _MARKS:
        q = conn.execute(
            f"SELECT t.id, t.reading_id, r.uuid AS reading_uuid, "
            f"{', '.join('t.' + c for c in cols)} FROM {table} t JOIN readings r "
            f"ON r.id = t.reading_id WHERE {where_of(kind)} AND t.id > ? "
            "ORDER BY t.id LIMIT ?", tuple(args) + (cur[key], max_items + 1)).fetchall()
        q, cut = _limited(q, max_items)
        more = more or cut
        for row in q:
            if row["reading_id"] > through:
                more = True
                break
            out[dest].append({k: row[k] for k in row.keys() if k not in ("id", "reading_id")})
            cur[key] = row["id"]
    return more


# ---------------------------------------------------------------- push

def _push_history(conn, items: dict, cur: dict, max_items: int) -> bool:
    hist = conn.execute(
        "SELECT h.id, h.site_id, s.name AS site, h.changed_at, h.action, h.field, "
        "h.old_value, h.new_value FROM site_history h JOIN sites s ON s.id = h.site_id "
        f"WHERE h.id > ? AND {_not_received('history', 'h')} ORDER BY h.id LIMIT ?",
        (cur["h"], max_items + 1)).fetchall()
    hist, more = _limited(hist, max_items)
    for h in hist:
        items["history"].append({k: h[k] for k in ("site", "changed_at", "action", "field",
                                                   "old_value", "new_value")})
        cur["h"] = h["id"]
    return more


def _push_meters(conn, items: dict, cur: dict, max_items: int) -> bool:
    """Every meter after the cursor (few), calibration checks max_items at a time."""
    for m in conn.execute("SELECT * FROM meters WHERE id > ? ORDER BY id", (cur["m"],)):
        items["meters"].append({k: m[k] for k in m.keys() if k != "id"})
        cur["m"] = m["id"]
    cals = conn.execute(
        "SELECT c.*, m.name AS meter FROM calibrations c JOIN meters m ON m.id = c.meter_id "
        "WHERE c.id > ? ORDER BY c.id LIMIT ?", (cur["c"], max_items + 1)).fetchall()
    cals, more = _limited(cals, max_items)
    for c in cals:
        items["calibrations"].append({k: c[k] for k in c.keys() if k not in ("id", "meter_id")})
        cur["c"] = c["id"]
    return more


def _push_sites(conn, items: dict) -> None:
    """The sites the batch's readings and settings changes name, with their former names."""
    names_needed = {i["site"] for i in items["readings"]} | {h["site"] for h in items["history"]}
    for name in sorted(names_needed):
        site = get_site(conn, name, former_names=False)
        if site is not None:
            items["sites"].append({"name": site["name"], "names": site_names(conn, site["id"])})


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
    more = _push_history(conn, items, cur, max_items)
    more = _push_meters(conn, items, cur, max_items) or more
    rows = conn.execute(_READING_ITEM_SELECT + f" WHERE r.id > ? AND {_not_received('reading', 'r')}"
                        " ORDER BY r.id LIMIT ?", (cur["r"], max_items + 1)).fetchall()
    more = _fill_readings(rows, items["readings"], cur, max_items, max_bytes) or more
    sent_through = cur["r"] if more else math.inf
    more = _fill_marks(conn, items, cur, sent_through, max_items,
                       lambda kind: _not_received(kind, "t")) or more
    _push_sites(conn, items)
    return items, cur, more


def is_empty(items: dict) -> bool:
    return not any(items.get(k) for k in ("history", "meters", "calibrations", "readings",
                                          "voids", "acks"))


# ---------------------------------------------------------------- pull

def _pull_history(conn, site: dict, out: dict, cur: dict, max_items: int) -> bool:
    hist = conn.execute("SELECT id, changed_at, action, field, old_value, new_value FROM "
                        "site_history WHERE site_id = ? AND id > ? ORDER BY id LIMIT ?",
                        (site["id"], cur["h"], max_items + 1)).fetchall()
    hist, more = _limited(hist, max_items)
    for h in hist:
        out["history"].append({"site": site["name"], **{k: h[k] for k in h.keys() if k != "id"}})
        cur["h"] = h["id"]
    return more


def _pull_reading_rows(conn, site_id: int, after: int, exclude_log: str | None,
                       max_items: int) -> list:
    """A site's readings after the cursor (up to max_items + 1), not those of ``exclude_log``."""
    where = "r.site_id = ? AND r.id > ?"
    args: list = [site_id, after]
    if exclude_log:
        where += (" AND NOT EXISTS (SELECT 1 FROM reading_origin xo WHERE "
                  "xo.reading_id = r.id AND xo.log_uuid = ?)")
        args.append(exclude_log)
    return conn.execute(_READING_ITEM_SELECT + f" WHERE {where} ORDER BY r.id LIMIT ?",
                        args + [max_items + 1]).fetchall()


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
    more = _pull_history(conn, site, out, cur, max_items)
    rows = _pull_reading_rows(conn, sid, cur["r"], exclude_log, max_items)
    more = _fill_readings(rows, out["readings"], cur, max_items, max_bytes,
                          site=site["name"]) or more
    through = cur["r"] if more else math.inf
    more = _fill_marks(conn, out, cur, through, max_items, lambda kind: "r.site_id = ?",
                       (sid,)) or more
    out["more"] = more
    return out
