"""The JSON API the page uses; tests and other tools rely on these names."""
from __future__ import annotations

from flask import Blueprint, current_app, g, jsonify, request

from .. import labels, meters, records, sites, store
from ..science import InputError, extracts, osmotic, tolerance, units
from . import get_db

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
    rows = store.list_readings(db, site_id=site_id, sample=request.args.get("sample") or None,
                               date_from=request.args.get("from") or None,
                               date_to=request.args.get("to") or None)
    return jsonify([store.reading_dict(r) for r in rows])


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
    db = get_db()
    old = store.get_reading(db, rid)
    if old is None:
        raise store.StoreError("No such reading.", "uuid", 404)
    body = _body()
    payload = {k: old[k] for k in ("sample", "depth_cm", "value", "unit", "temp_c",
                                   "ratio", "texture", "tds_factor", "theta_g_pct",
                                   "matric_MPa", "meter", "replicate_group", "note",
                                   "taken_at", "visited_by")}
    payload["compensated"] = bool(old["compensated"])
    payload["sp"] = old["sp_pct"]
    payload.update(body)
    payload["site"] = old["site"]
    payload["supersedes"] = rid
    row, created = records.save_reading(db, payload, _max_age(), _device_id())
    return jsonify(_record(row)), 201 if created else 200


@bp.post("/readings/<rid>/ack")
def ack_flag(rid):
    """Acknowledge a flag with a note: the flag stays, the note says why it is fine."""
    body = _body()
    code = str(body.get("code") or "").strip()
    note = " ".join(str(body.get("note") or "").split())
    if not code:
        raise InputError("Say which flag (its code) you acknowledge.", "code")
    if not note:
        raise InputError("Add a short note saying why the flag is acceptable.", "note")
    if len(note) > records.NOTE_MAX:
        raise InputError(f"The note is at most {records.NOTE_MAX} characters.", "note")
    return jsonify(store.ack_flag(get_db(), rid, code, note)), 201


@bp.get("/meters")
def list_meters():
    return jsonify(meters=store.list_meters(get_db()), presets=meters.presets(),
                   standards=meters.STANDARDS, max_age_days=_max_age(),
                   default_tolerance_pct=meters.DEFAULT_TOLERANCE_PCT)


@bp.post("/meters")
def create_meter():
    body = _body()
    if body.get("preset") and not body.get("ranges"):
        preset = next((p for p in meters.presets() if body["preset"] in (p["name"], p["label"])),
                      None)
        if preset is None:
            raise InputError("Unknown preset; see GET /api/meters.", "preset")
        body = {**preset, **{k: v for k, v in body.items() if k != "preset"}}
    m = store.insert_meter(get_db(), meters.validate_meter(body))
    return jsonify(m), 201


@bp.post("/calibrations")
def create_calibration():
    """Check a meter against a standard; returns expected, deviation, passed."""
    body = _body()
    db = get_db()
    name = body.get("meter")
    meter = store.get_meter(db, str(name)) if name else None
    if meter is None:
        raise InputError("Choose a meter profile (add it on the Meters page first).", "meter")
    check = meters.calibration_check(body, meter)
    stored = store.insert_calibration(db, check)
    return jsonify({**stored, "meter": meter["name"]}), 201


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


def site_dict(row) -> dict:
    d = {k: row[k] for k in row.keys()}
    d["kind_label"] = sites.kind_label(d.get("kind"))
    return d


@bp.get("/sites")
def list_sites():
    return jsonify([site_dict(r) for r in store.list_sites(get_db())])


@bp.post("/sites")
def create_site():
    """Set up a new site with its settings; its creation opens its history."""
    db = get_db()
    attrs = _site_attrs(_body(), creating=True)
    name = store.clean_site_name(attrs.pop("name"))
    if store.get_site(db, name, former_names=False) is not None:
        raise store.StoreError(f"A site called {name!r} exists already.", "name", 409)
    with store.transaction(db):
        row = store.ensure_site(db, name, former_names=False, **attrs)
    return jsonify(site_dict(row)), 201


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
