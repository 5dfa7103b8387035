"""A site's settings: what kind of place it is, its crop, soil, position and
notes; how a settings form or JSON body becomes validated values; and how the
kept history of those settings reads on screen.

Pure: no Flask, no SQL. ``web/sites.py`` validates with :func:`validate_settings`,
``store`` writes the change and its history rows in one transaction, and the
pages show :func:`describe_change` lines.
"""
from __future__ import annotations

import datetime as dt
import math
from typing import Mapping

from .science import InputError, extracts, tolerance
from .forms import parse_number

#: Stable keys (API, CSV, database) and the plain label shown on screen.
#: 'field' and 'greenhouse' are the kinds stored before this list grew.
SITE_KINDS = {
    "field": "Field",
    "orchard": "Orchard or vineyard",
    "greenhouse": "Greenhouse bench or bed",
    "water_source": "Water source (well, canal, tank)",
    "drain": "Drain or drainage outlet",
}

#: The settings a site keeps, in the order a form and the history show them,
#: with the plain word used in "changed on …: crop tomato → pepper".
SETTINGS_FIELDS = {
    "name": "name",
    "kind": "kind",
    "crop": "crop",
    "texture": "texture",
    "sp_pct": "saturation percentage (SP)",
    "latitude": "latitude",
    "longitude": "longitude",
    "notes": "notes",
}

NAME_MAX = 120
NOTES_MAX = 2000
SP_RANGE_PCT = (5.0, 400.0)


def kind_label(key) -> str:
    """The plain label of a site kind; an unknown stored key is shown as it is."""
    return SITE_KINDS.get(key, str(key or "")) if key else "not set"


def _text(body: Mapping, key: str, what: str, limit: int) -> str | None:
    v = body.get(key)
    if v is None:
        return None
    if not isinstance(v, str):
        raise InputError(f"{what[0].upper() + what[1:]} must be text (a JSON string) or null.",
                         key)
    v = v.strip()
    if len(v) > limit:
        raise InputError(f"{what[0].upper() + what[1:]} is at most {limit} characters.", key)
    if any(ord(c) < 32 and c not in "\n\t" for c in v):
        raise InputError(f"{what[0].upper() + what[1:]} cannot contain control characters.", key)
    return v


def _number(body: Mapping, key: str, what: str) -> float | None:
    v = body.get(key)
    if v is not None and not isinstance(v, (int, float, str)) or isinstance(v, bool):
        raise InputError(f"Type {what} as a number (or leave it empty).", key)
    return parse_number(v, key, what)


def validate_settings(body, creating: bool = False) -> dict:
    """The site settings present in ``body`` (a JSON object), validated.

    Only the keys given are returned (a PATCH changes only those); other keys
    are ignored. ``None`` or an empty string clears a setting (except name and
    kind). Raises :class:`InputError` naming the field, with what to type.
    """
    if not isinstance(body, Mapping):
        raise InputError("Send the site settings as a JSON object.", "body")
    attrs: dict = {}
    if "name" in body or creating:
        name = _text(body, "name", "the site name", NAME_MAX)
        name = " ".join((name or "").split())
        if not name:
            raise InputError("Type a site name, e.g. Block 3.", "name")
        attrs["name"] = name
    if "kind" in body:
        kind = body["kind"]
        if not isinstance(kind, str) or kind.strip() not in SITE_KINDS:
            raise InputError("Choose the kind of site, one of: " + ", ".join(SITE_KINDS)
                             + " (" + "; ".join(f"{k}: {lab.lower()}" for k, lab in
                                                SITE_KINDS.items() if k != lab.lower())
                             + ").", "kind")
        attrs["kind"] = kind.strip()
    if "crop" in body:
        crop = _text(body, "crop", "the crop", 120)
        attrs["crop"] = tolerance.find_crop(crop).name if crop else None
    if "texture" in body:
        tex = _text(body, "texture", "the texture", 60)
        attrs["texture"] = extracts.find_texture(tex).name if tex else None
    for key, what in (("latitude", "the latitude"), ("longitude", "the longitude"),
                      ("sp_pct", "the saturation percentage")):
        if key in body:
            attrs[key] = _number(body, key, what)
    lat, lon = attrs.get("latitude"), attrs.get("longitude")
    if lat is not None and not -90 <= lat <= 90:
        raise InputError("Latitude must be between −90 and 90 (decimal degrees, south "
                         "negative).", "latitude")
    if lon is not None and not -180 <= lon <= 180:
        raise InputError("Longitude must be between −180 and 180 (decimal degrees, west "
                         "negative).", "longitude")
    sp = attrs.get("sp_pct")
    if sp is not None and not SP_RANGE_PCT[0] <= sp <= SP_RANGE_PCT[1]:
        raise InputError(f"Saturation percentage must be between {SP_RANGE_PCT[0]:g} and "
                         f"{SP_RANGE_PCT[1]:g} %.", "sp_pct")
    if "notes" in body:
        attrs["notes"] = _text(body, "notes", "the notes", NOTES_MAX) or ""
    return attrs


# --------------------------------------------------------------------------
# history
# --------------------------------------------------------------------------

def value_text(field: str, value: str | None) -> str:
    """A history value as shown on screen."""
    if value is None or value == "":
        return "not set"
    if field == "kind":
        return kind_label(value).lower()
    if field == "sp_pct":
        return f"{_short(value)} %"
    if field in ("latitude", "longitude"):
        return _short(value, 8)
    if field == "notes":
        return "“" + (value if len(value) <= 60 else value[:57] + "…") + "”"
    return value.lower() if field == "crop" else value


def _short(text: str, digits: int = 4) -> str:
    try:
        x = float(text)
    except ValueError:
        return text
    return f"{x:.{digits}g}"


def local_time_text(iso: str | None = None) -> str:
    """A time in this machine's zone with its UTC offset, e.g.
    '2026-11-30 14:05 UTC+01:00' (now when ``iso`` is None)."""
    if iso is None:
        t = dt.datetime.now().astimezone()
    else:
        t = dt.datetime.fromisoformat(str(iso).replace("Z", "+00:00"))
        if t.tzinfo is None:
            t = t.replace(tzinfo=dt.timezone.utc)
        t = t.astimezone()
    off = t.utcoffset() or dt.timedelta(0)
    sign = "-" if off < dt.timedelta(0) else "+"
    mins = abs(int(off.total_seconds() // 60))
    return f"{t:%Y-%m-%d %H:%M} UTC{sign}{mins // 60:02d}:{mins % 60:02d}"


def describe_change(rows: list[Mapping]) -> dict:
    """One change (the history rows sharing a change number) as plain text:
    {'when', 'action', 'text'}; e.g. 'crop tomato → pepper; saturation
    percentage (SP) not set → 48 %'. For a creation ('created') or the
    settings found when the history began ('existing') the text lists the
    values set: 'name Block 3; kind field'."""
    rows = sorted(rows, key=lambda r: list(SETTINGS_FIELDS).index(r["field"])
                  if r["field"] in SETTINGS_FIELDS else 99)
    first = rows[0]
    parts = []
    for r in rows:
        word = SETTINGS_FIELDS.get(r["field"], r["field"])
        if first["action"] == "changed":
            parts.append(f"{word} {value_text(r['field'], r['old_value'])} → "
                         f"{value_text(r['field'], r['new_value'])}")
        else:
            parts.append(f"{word} {value_text(r['field'], r['new_value'])}")
    text = "; ".join(parts)
    return {"change_no": first["change_no"], "changed_at": first["changed_at"],
            "when": local_time_text(first["changed_at"]), "action": first["action"],
            "text": text,
            "fields": [r["field"] for r in rows]}


def history_changes(rows: list[Mapping]) -> list[dict]:
    """History rows (``store.site_history``) grouped into changes, oldest
    first; each change says itself in one line and keeps its rows."""
    by_no: dict[int, list] = {}
    for r in rows:
        by_no.setdefault(r["change_no"], []).append(dict(r))
    out = []
    for no in sorted(by_no):
        d = describe_change(by_no[no])
        d["rows"] = [{k: r[k] for k in ("field", "old_value", "new_value")} for r in by_no[no]]
        out.append(d)
    return out


def site_dict(row) -> dict:
    """A site as the API and the command line show it, with its kind's label."""
    d = {k: row[k] for k in row.keys()}
    d["kind_label"] = kind_label(d.get("kind"))
    return d


def create_site(conn, body) -> dict:
    """Set up a new site with its settings; its creation opens its history."""
    from . import store
    attrs = validate_settings(body, creating=True)
    name = store.clean_site_name(attrs.pop("name"))
    if store.get_site(conn, name, former_names=False) is not None:
        raise store.StoreError(f"A site called {name!r} exists already.", "name", 409)
    with store.transaction(conn):
        row = store.ensure_site(conn, name, former_names=False, **attrs)
    return site_dict(row)
