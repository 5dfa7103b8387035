"""The JSON API the page uses; tests and other tools rely on these names."""
from __future__ import annotations

from flask import Blueprint, current_app, jsonify, request

from .. import labels, meters, records, store
from ..science import InputError, extracts, osmotic, tolerance, units
from ..science.convert import parse_number
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
    row, created = records.save_reading(get_db(), _body(), _max_age())
    return jsonify(_record(row)), 201 if created else 200


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
    row, created = records.save_reading(db, payload, _max_age())
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
        preset = next((p for p in meters.presets() if p["name"] == body["preset"]), None)
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


def _site_attrs(body: dict) -> dict:
    attrs = {}
    if "crop" in body:
        attrs["crop"] = tolerance.find_crop(body["crop"]).name if body["crop"] else None
    for key in ("latitude", "longitude", "sp_pct"):
        if key in body:
            attrs[key] = parse_number(body[key], key)
    if attrs.get("latitude") is not None and not -90 <= attrs["latitude"] <= 90:
        raise InputError("Latitude must be between −90 and 90.", "latitude")
    if attrs.get("longitude") is not None and not -180 <= attrs["longitude"] <= 180:
        raise InputError("Longitude must be between −180 and 180.", "longitude")
    if attrs.get("sp_pct") is not None and not 5 <= attrs["sp_pct"] <= 400:
        raise InputError("Saturation percentage must be between 5 and 400 %.", "sp_pct")
    if "texture" in body:
        attrs["texture"] = body["texture"] or None
        if attrs["texture"]:
            extracts.sp_for_texture(attrs["texture"])
    if "kind" in body:
        if body["kind"] not in ("field", "greenhouse"):
            raise InputError("Site kind is field or greenhouse.", "kind")
        attrs["kind"] = body["kind"]
    if "notes" in body:
        notes = str(body["notes"] or "")
        if len(notes) > records.NOTE_MAX:
            raise InputError(f"Notes are at most {records.NOTE_MAX} characters.", "notes")
        attrs["notes"] = notes
    return attrs


def site_dict(row) -> dict:
    return {k: row[k] for k in row.keys()}


@bp.get("/sites")
def list_sites():
    return jsonify([site_dict(r) for r in store.list_sites(get_db())])


@bp.post("/sites")
def create_site():
    body = _body()
    db = get_db()
    name = store.clean_site_name(body.get("name"))
    attrs = _site_attrs(body)
    if store.get_site(db, name) is not None:
        raise store.StoreError(f"A site called {name!r} exists already.", "name", 409)
    with store.transaction(db):
        row = store.ensure_site(db, name, **attrs)
    return jsonify(site_dict(row)), 201


@bp.patch("/sites/<int:site_id>")
def update_site(site_id):
    db = get_db()
    if store.get_site(db, site_id) is None:
        raise store.StoreError("No such site.", "site", 404)
    row = store.update_site(db, site_id, **_site_attrs(_body()))
    return jsonify(site_dict(row))


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
    )
