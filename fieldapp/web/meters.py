"""Meters: the meters page (profiles, calibration checks and how they stand)
and its JSON, /api/meters and /api/calibrations."""
from __future__ import annotations

from flask import Blueprint, jsonify, render_template, request

from .. import meters, store
from ..science import units
from ..results import CAUTIONS
from .db import get_db
from .helpers import json_body, max_age_days

bp = Blueprint("meters", __name__)


@bp.get("/meters")
def meters_page():
    db = get_db()
    max_age = max_age_days()
    ms = store.list_meters(db)
    for m in ms:
        m["check"] = meters.check_status(m["last_check"], max_age)
    return render_template("meters.html", meters=ms, presets=meters.presets(), max_age_days=max_age,
                           units=units.DISPLAY_UNITS, cautions=CAUTIONS,
                           default_tolerance=meters.DEFAULT_TOLERANCE_PCT)


@bp.get("/api/meters")
def list_meters():
    return jsonify(meters=store.list_meters(get_db()), presets=meters.presets(),
                   standards=meters.STANDARDS, max_age_days=max_age_days(),
                   default_tolerance_pct=meters.DEFAULT_TOLERANCE_PCT)


@bp.post("/api/meters")
def create_meter():
    m = store.insert_meter(get_db(), meters.meter_from_body(json_body()))
    return jsonify(m), 201


@bp.post("/api/calibrations")
def create_calibration():
    """Check a meter against a standard; returns expected, deviation, passed."""
    return jsonify(meters.record_check(get_db(), json_body())), 201


@bp.get("/api/calibrations")
def list_calibrations():
    db = get_db()
    meter = store.get_meter(db, str(request.args.get("meter") or ""))
    if meter is None:
        raise store.StoreError("No such meter.", "meter", 404)
    return jsonify(store.list_calibrations(db, meter["id"]))
