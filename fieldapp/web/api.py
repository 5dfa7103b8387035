"""The JSON API the page uses; tests and other tools rely on these names."""
from __future__ import annotations

from flask import Blueprint, current_app, g, jsonify, request

from .. import labels, meters, records, sites, store
from ..science import InputError, extracts, osmotic, tolerance, units
from .db import get_db

bp = Blueprint("api", __name__, url_prefix="/api")


def _body() -> dict:
    data = request.get_json(silent=True)
    if not isinstance(data, dict):
        raise InputError("Send the reading as a JSON object.", "body")
    return data


def _max_age() -> float:
    return float(current_app.config.get("CALIBRATION_MAX_AGE_DAYS",
                                        meters.DEFAULT_MAX_AGE_DAYS))


def _site_or_404(name):
    site = store.get_site(get_db(), store.clean_site_name(name))
    if site is None:
        raise store.StoreError(f"No site called {name!r}.", "site", 404)
    return site


@bp.post("/preview")
def preview():
    """A reading in, the computed result out; nothing stored."""
    body = _body()
    site = None
    if body.get("site"):
        try:
            site = store.get_site(get_db(), store.clean_site_name(body["site"]))
        except store.StoreError:
            site = None
    return jsonify(labels.label_result(records.preview(body, site, get_db(), _max_age())))


@bp.post("/readings")
def save_reading():
    """Store a reading; the same uuid again returns the stored record (200)."""
    row, created = records.save_reading(get_db(), _body(), _max_age(), _device_id())
    return jsonify(_record(row)), 201 if created else 200


def _device_id():
    """The paired tablet sending this request (serve --lan), or None."""
    device = g.get("device")
    return device["id"] if device is not None else None


def _record(row) -> dict:
    """A stored reading for the page: the record, its result with plain labels."""
    d = store.reading_dict(row)
    d["result"] = labels.label_result(d["result"])
    return d


@bp.get("/readings")
def list_readings():
    db = get_db()
    site_id = None
    if request.args.get("site"):
        site_id = _site_or_404(request.args["site"])["id"]
    rows, nxt = store.readings_page(
        db, site_id=site_id, sample=request.args.get("sample") or None,
        date_from=_date(request.args.get("from"), "from"),
        date_to=_date(request.args.get("to"), "to"),
        limit=store.page_limit(request.args.get("limit")),
        after=request.args.get("after") or None)
    return _paged([store.reading_dict(r) for r in rows], nxt)


def _date(v, field):
    if not v:
        return None
    import datetime as dt
    try:
        dt.date.fromisoformat(v)
    except ValueError:
        raise InputError(f"{field} must be a date like 2026-05-14.", field) from None
    return v


def _paged(items: list, nxt: str | None):
    """A page of a list: the body stays a JSON array (older callers keep
    working); the next page, if any, is named by a ``Link: <...>; rel="next"``
    header and by ``X-Next-Cursor`` (pass it back as ``after``)."""
    resp = jsonify(items)
    if nxt is not None:
        from urllib.parse import urlencode
        args = {k: v for k, v in request.args.items() if k != "after"}
        args["after"] = nxt
        resp.headers["Link"] = f'<{request.path}?{urlencode(args)}>; rel="next"'
        resp.headers["X-Next-Cursor"] = nxt
    return resp


@bp.get("/readings/<rid>")
def get_reading(rid):
    row = store.get_reading(get_db(), rid)
    if row is None:
        raise store.StoreError("No such reading.", "uuid", 404)
    return jsonify(store.reading_dict(row))


@bp.post("/readings/<rid>/void")
def void_reading(rid):
    body = _body()
    row = store.void_reading(get_db(), rid, body.get("reason"))
    return jsonify(store.reading_dict(row))


@bp.post("/readings/<rid>/correct")
def correct_reading(rid):
    """A corrected version: a new reading that points at the one it replaces."""
    row, created = records.correct_reading(get_db(), rid, _body(), _max_age(), _device_id())
    return jsonify(_record(row)), 201 if created else 200


@bp.post("/readings/<rid>/ack")
def ack_flag(rid):
    """Acknowledge a flag with a note: the flag stays, the note says why it is fine."""
    body = _body()
    return jsonify(records.ack_flag(get_db(), rid, body.get("code"), body.get("note"))), 201


@bp.get("/meters")
def list_meters():
    return jsonify(meters=store.list_meters(get_db()), presets=meters.presets(),
                   standards=meters.STANDARDS, max_age_days=_max_age(),
                   default_tolerance_pct=meters.DEFAULT_TOLERANCE_PCT)


@bp.post("/meters")
def create_meter():
    m = store.insert_meter(get_db(), meters.meter_from_body(_body()))
    return jsonify(m), 201


@bp.post("/calibrations")
def create_calibration():
    """Check a meter against a standard; returns expected, deviation, passed."""
    return jsonify(meters.record_check(get_db(), _body())), 201


@bp.get("/calibrations")
def list_calibrations():
    db = get_db()
    meter = store.get_meter(db, str(request.args.get("meter") or ""))
    if meter is None:
        raise store.StoreError("No such meter.", "meter", 404)
    return jsonify(store.list_calibrations(db, meter["id"]))


def _site_attrs(body, creating: bool = False) -> dict:
    """The site settings in a JSON body, validated (see fieldapp.sites): name,
    kind, crop, texture, sp_pct, latitude, longitude, notes. A wrong JSON type
    or value answers 400 naming the field."""
    return sites.validate_settings(body, creating=creating)


site_dict = sites.site_dict


@bp.get("/sites")
def list_sites():
    rows, nxt = store.sites_page(get_db(), limit=store.page_limit(request.args.get("limit")),
                                 after=request.args.get("after") or None)
    return _paged([site_dict(r) for r in rows], nxt)


@bp.post("/sites")
def create_site():
    """Set up a new site with its settings; its creation opens its history."""
    return jsonify(sites.create_site(get_db(), _body())), 201


@bp.get("/sites/<int:site_id>")
def get_site(site_id):
    row = store.get_site(get_db(), site_id)
    if row is None:
        raise store.StoreError("No such site.", "site", 404)
    return jsonify(site_dict(row))


@bp.patch("/sites/<int:site_id>")
def update_site(site_id):
    """Change some settings of a site (only the keys sent); the change is kept
    in the site's history in the same transaction. Later readings use the new
    SP, texture and crop; stored readings keep the numbers they were saved with."""
    db = get_db()
    if store.get_site(db, site_id) is None:
        raise store.StoreError("No such site.", "site", 404)
    row, change_no = store.change_site_settings(db, site_id, _site_attrs(_body()))
    return jsonify({**site_dict(row), "change_no": change_no})


@bp.get("/sites/<int:site_id>/history")
def site_history(site_id):
    """The kept changes of a site's settings, oldest first, each with its rows
    (field, old_value, new_value) and a plain sentence."""
    db = get_db()
    if store.get_site(db, site_id) is None:
        raise store.StoreError("No such site.", "site", 404)
    return jsonify(sites.history_changes(store.site_history(db, site_id)))


@bp.get("/meta")
def meta():
    """What the entry form offers: units, sample kinds, textures, crops, methods."""
    return jsonify(
        units=units.DISPLAY_UNITS,
        samples=[{"key": k.key, "label": k.label, "takes_ratio": k.takes_ratio,
                  "default_ratio": k.default_ratio, "is_soil": k.is_soil}
                 for k in extracts.SAMPLE_KINDS.values()],
        textures=sorted(extracts.TEXTURES) if hasattr(extracts, "TEXTURES") else [],
        crops=sorted(c.name for c in tolerance.CROPS.values()),
        ece_methods=list(extracts.REGRESSIONS),
        psi_s_routes=list(osmotic.PSI_S_ROUTES),
        site_kinds=[{"key": k, "label": lab} for k, lab in sites.SITE_KINDS.items()],
    )
