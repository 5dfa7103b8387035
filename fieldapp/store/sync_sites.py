"""Sites and site settings changes that arrive in a batch: a site found by
its name or a former one (else made), each change kept once in the history,
the setting taking the latest change."""
from __future__ import annotations

import math

from .core import utc_now
from .sites import SITE_SETTINGS, _history_text, clean_site_name, get_site
from .sync_items import _bad, _text_or_none

def resolve_sites(conn, site_items: list) -> dict[str, int]:
    """Site name (lower case) -> site id here, for the sites a batch names:
    by the name it has now, else by a name it had before, else made new."""
    out: dict[str, int] = {}
    for i, s in enumerate(site_items or []):
        if not isinstance(s, dict) or not isinstance(s.get("name"), str):
            _bad("site", i, "has no name")
        names = [n for n in (s.get("names") or []) if isinstance(n, str)][:50] or [s["name"]]
        found = None
        for n in [s["name"]] + names:
            found = get_site(conn, clean_site_name(n), former_names=False)
            if found is not None:
                break
        if found is None:
            found = get_site(conn, clean_site_name(s["name"]))     # renamed here since
        out[s["name"].lower()] = found["id"] if found is not None else _make_site(conn, s["name"])
    return out


def _make_site(conn, name: str) -> int:
    """A site this log did not have, named by a batch: made with no history
    of its own, so that the settings changes the batch carries (its creation
    among them) are its history, and none competes with a change made here."""
    found = get_site(conn, clean_site_name(name))
    if found is not None:
        return found["id"]
    return conn.execute("INSERT INTO sites (name, kind, notes, created_at) VALUES (?, ?, ?, ?) "
                        "RETURNING id", (clean_site_name(name), "field", "", utc_now())).fetchone()[0]


def _site_id(conn, sites: dict, name: str) -> int:
    key = name.lower()
    if key not in sites:
        sites[key] = _make_site(conn, name)
    return sites[key]


def _setting_value(field: str, text):
    if text is None:
        return {"kind": "field", "notes": ""}.get(field)
    if field in ("sp_pct", "latitude", "longitude"):
        try:
            x = float(text)
        except ValueError:
            return None
        return x if math.isfinite(x) else None
    return text


def apply_history(conn, sites: dict, hist: list) -> dict:
    """Site settings changes made elsewhere: each kept in this log's history
    (once: the same site, field, time and value again is a resend), and the
    setting itself takes the latest change by change time (ties: the larger
    value, so every log picks the same)."""
    new = dup = 0
    change_nos: dict = {}
    for i, h in enumerate(hist or []):
        if not isinstance(h, dict) or h.get("field") not in SITE_SETTINGS \
                or not isinstance(h.get("changed_at"), str) or not isinstance(h.get("site"), str):
            _bad("settings change", i, "is not a change of a known setting")
        old = _text_or_none(h.get("old_value"), "settings change", i)
        val = _text_or_none(h.get("new_value"), "settings change", i)
        sid = _site_id(conn, sites, h["site"])
        field, when = h["field"], h["changed_at"]
        if conn.execute("SELECT 1 FROM site_history WHERE site_id = ? AND field = ? AND "
                        "changed_at = ? AND COALESCE(new_value, '') = COALESCE(?, '')",
                        (sid, field, when, val)).fetchone():
            dup += 1
            continue
        latest = conn.execute(
            "SELECT changed_at, new_value FROM site_history WHERE site_id = ? AND field = ? "
            "ORDER BY changed_at DESC, COALESCE(new_value, '') DESC LIMIT 1",
            (sid, field)).fetchone()
        site = get_site(conn, sid)
        wins = latest is None or (when, val or "") > (latest[0], latest[1] or "")
        if wins and _history_text(site[field]) != val:
            value = _setting_value(field, val)
            if field == "name":
                value = clean_site_name(val) if val else site["name"]
                other = get_site(conn, value, former_names=False)
                if other is not None and other["id"] != sid:
                    wins = False          # another site holds that name here: kept in history
            if wins:
                conn.execute(f"UPDATE sites SET {field} = ? WHERE id = ?", (value, sid))
                if field == "name":
                    sites[value.lower()] = sid
        key = (sid, when, h.get("action"))
        if key in change_nos:       # the other settings of the same change
            no, action = change_nos[key]
        else:
            no = conn.execute("SELECT COALESCE(MAX(change_no), 0) + 1 FROM site_history "
                              "WHERE site_id = ?", (sid,)).fetchone()[0]
            action = h.get("action") if no == 1 and h.get("action") in ("created", "existing") \
                else "changed"
            change_nos[key] = (no, action)
        conn.execute("INSERT INTO site_history (site_id, change_no, changed_at, action, field, "
                     "old_value, new_value) VALUES (?,?,?,?,?,?,?)",
                     (sid, no, when, action, field, old, val))
        new += 1
    return {"new": new, "duplicate": dup}

