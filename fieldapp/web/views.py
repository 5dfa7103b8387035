"""Site views: what the readings mean (summary, charts, and /api/sites/<id>/summary),
the printable visit report, the offline map, and the user's target ranges
(/api/targets).

Thin like the other blueprints: the numbers come from ``interpret`` (pure),
the pictures from ``charts`` (pure SVG), the rows from ``store``.
"""
from __future__ import annotations

import datetime as dt

from flask import Blueprint, abort, jsonify, render_template, request, url_for
from markupsafe import Markup

from .. import meters, store
from .. import sites as sitecfg
from ..science import InputError, extracts, tolerance
from . import Later
from .db import get_db
from .helpers import max_age_days, site_by_id, site_cache

charts = Later("fieldapp.charts")
interpret = Later("fieldapp.interpret")
osmotic = Later("fieldapp.science.osmotic")     # its tables are numpy arrays

bp = Blueprint("views", __name__)

#: Distances are listed as a full table up to this many sites; beyond, each
#: site lists its nearest neighbours.
MATRIX_MAX_SITES = 10


def interpretation(db, site, targets, as_of: str | None = None, highlight: str | None = None,
                   highlight_at: str | None = None) -> tuple[dict, list[dict], dict | None]:
    """The summary, the chart data and the profile of a site, up to ``as_of``,
    from the few rows the database picks for them (``store.site_rows``)."""
    rows = store.site_rows(db, site["id"], as_of=as_of, keep_day=highlight, cache=site_cache())
    summary = interpret.summary_from_rows(site, rows, targets, as_of=as_of)
    specs = interpret.specs_from_series(site, rows["soil_series"], rows["sol_series"], targets,
                                        highlight=highlight, highlight_at=highlight_at)
    prof = interpret.profile_spec(site, rows["profile"], day=as_of)
    return summary, specs, prof


def _svg(s: str) -> Markup | None:
    # charts.* escape every piece of text they place, so the string is safe markup.
    return Markup(s) if s else None


#: A chart labels this many flagged points (the latest) and lists them below
#: it; the others keep their ring and mark, and the site log's "Flagged only"
#: list holds every one (a log full of unit slips stays a small page).
FLAGGED_LABELS = 10


def _chart_figures(specs: list[dict], site_id: int) -> list[dict]:
    out = []
    for k, s in enumerate(specs):
        series = s["series"]
        n_flagged = sum(1 for x in series for p in x["points"] if p.get("flagged"))
        picked = charts.latest_flagged(series, FLAGGED_LABELS)
        latest = picked[::-1]                                               # newest first
        out.append({"id": s["id"], "title": s["title"],
                    "svg": _svg(charts.trend_svg(dict(s, label_flagged=FLAGGED_LABELS,
                                                          flagged_picked=picked,
                                                          ref=f"f{k}-"))),
                    "bands_source": s.get("bands_source"),
                    "n_points": sum(len(x["points"]) for x in series),
                    "n_flagged": n_flagged,
                    "flagged_latest": [p["label"] for _, p in latest] if n_flagged > len(latest)
                    else [],
                    "flagged_url": url_for("sites.site_log", site_id=site_id, flagged=1) + "#log"})
    return out


def site_view(db, site) -> dict:
    """Everything the summary partial at the top of the site log shows."""
    site = dict(site)
    crop = interpret.site_crop(site)
    targets = store.list_targets(db, crop.name) if crop else []
    summary, specs, prof = interpretation(db, site, targets)
    return {
        "s": summary,
        "charts": _chart_figures(specs, site["id"]),
        "profile": prof and {"title": prof["title"], "svg": _svg(charts.profile_svg(prof))},
        "targets": targets,
        "measures": interpret.TARGET_MEASURES,
        "crop": crop.name if crop else None,
        "report_url": url_for("views.report", site_id=site["id"]),
        "settings_url": url_for("sites.site_settings", site_id=site["id"]),
        "map_url": url_for("views.map_page"),
        "has_visits": bool(summary["n_readings"]),   # every reading belongs to a visit
        "water_bounds": tolerance.WATER_HAZARD_BOUNDS_dS_m,
    }


# --------------------------------------------------------------------------
# visit report
# --------------------------------------------------------------------------

def _report_cautions(readings) -> list[str]:
    out = list(interpret.CAUTIONS)
    kinds = {r["sample"] for r in readings}
    if kinds & {"paste", "extract"}:
        out.append(extracts.ESTIMATE_CAUTION)
    out.append(osmotic.CAUTION)
    if "water" in kinds:
        out.append(tolerance.LEACHING_CAUTION)
    return list(dict.fromkeys(out))


def meter_checks(db, readings, max_age_days: float) -> list[dict]:
    """Each meter used on a visit with the calibration check that was valid
    when its first reading of the visit was taken, and how that check stood
    then: passed, failed, due (older than the limit) or none on record."""
    first: dict[str, str] = {}
    for r in readings:
        name = " ".join(str(r.get("meter") or "").split())
        if name and (name not in first or r["taken_at"] < first[name]):
            first[name] = r["taken_at"]
    out = []
    for name in sorted(first, key=str.lower):
        meter = store.get_meter(db, name)
        if meter is None:
            out.append({"meter": name, "state": "unknown",
                        "label": "Not a meter profile on record: no range or check to compare."})
            continue
        taken = meters._taken_utc(first[name])
        check = store.last_calibration(db, meter["id"],
                                       before_utc=taken.isoformat(timespec="seconds"))
        out.append({"meter": meter["name"], **meters.check_status(check, max_age_days, taken)})
    return out


@bp.get("/sites/<int:site_id>/report")
def report(site_id):
    """A printable page for one visit (``?visit=<id>``; the latest by default)."""
    db = get_db()
    site = site_by_id(db, site_id)
    site = dict(site)
    visits = store.visits_for_site(db, site_id)
    visit = None
    arg = request.args.get("visit")
    if arg:
        try:
            visit = store.get_visit(db, int(arg))
        except ValueError:
            visit = None
        if visit is None or visit["site_id"] != site_id:
            abort(404)
    elif visits:
        visit = store.get_visit(db, visits[0]["id"])
    readings, summary, figures, profile, checks = [], None, [], None, []
    if visit is not None:
        rows = store.readings_for_visit(db, visit["id"])
        readings = [store.reading_dict(r) for r in rows]
        acks = store.acks_for_readings(db, [r["id"] for r in readings])
        for r in readings:
            r["acks"] = {a["code"]: a for a in acks.get(r["id"], [])}
            r["sample_label"] = extracts.SAMPLE_KINDS.get(r["sample"]).label \
                if r["sample"] in extracts.SAMPLE_KINDS else r["sample"]
        crop = interpret.site_crop(site)
        targets = store.list_targets(db, crop.name) if crop else []
        day = visit["visit_date"]
        # "this visit" is drawn at the time of the visit's first reading, not at its midnight
        summary, specs, prof = interpretation(db, site, targets, as_of=day, highlight=day,
                                              highlight_at=rows[0]["taken_at"] if rows else None)
        figures = _chart_figures(specs, site_id)
        profile = prof and {"title": prof["title"], "svg": _svg(charts.profile_svg(prof))}
        checks = meter_checks(db, readings, max_age_days())
    sv = None
    if summary is not None:
        sv = {"s": summary, "charts": figures, "profile": profile, "targets": [],
              "measures": interpret.TARGET_MEASURES, "crop": None, "in_report": True,
              "heading": "Interpretation at this visit",
              "water_bounds": tolerance.WATER_HAZARD_BOUNDS_dS_m}
    return render_template(
        "report.html", site=site, visit=visit, visits=visits, readings=readings,
        summary=sv,
        cautions=_report_cautions(readings),
        printed_at=sitecfg.local_time_text(), kind_label=sitecfg.kind_label(site["kind"]),
        meter_checks=checks, max_age_days=max_age_days(),
        status_counts={k: sum(1 for r in readings if r["status"] == k)
                       for k in ("current", "corrected", "void")})


# --------------------------------------------------------------------------
# map
# --------------------------------------------------------------------------

def map_data(site_rows) -> dict:
    placed, unplaced = [], []
    for s in site_rows:
        if s["latitude"] is not None and s["longitude"] is not None:
            placed.append({"id": s["id"], "name": s["name"], "lat": s["latitude"],
                           "lon": s["longitude"], "n": len(placed) + 1, "kind": s["kind"],
                           "url": url_for("sites.site_log", site_id=s["id"])})
        else:
            unplaced.append({"id": s["id"], "name": s["name"],
                             "url": url_for("sites.site_log", site_id=s["id"])})
    matrix = charts.distance_matrix(placed)
    nearest = []
    for i, s in enumerate(placed):
        # by distance, then by number: two sites may share a position
        others = sorted(((matrix[i][j], placed[j]) for j in range(len(placed)) if j != i),
                        key=lambda e: (e[0], e[1]["n"]))
        nearest.append([{"name": o["name"], "n": o["n"], "km": d,
                         "text": charts.format_distance(d)} for d, o in others[:3]])
    return {
        "placed": placed, "unplaced": unplaced,
        "svg": _svg(charts.map_svg(placed)),
        "matrix": [[charts.format_distance(d) for d in row] for row in matrix],
        "show_matrix": 1 < len(placed) <= MATRIX_MAX_SITES,
        "nearest": nearest,
        "wide": (max((max(r) for r in matrix), default=0.0) > 200.0),
    }


@bp.get("/map")
def map_page():
    db = get_db()
    sites = store.list_sites(db, counts=False)      # the map shows no counts
    data = map_data(sites)
    return render_template("map.html", m=data, all_sites=sites,
                           points=[{k: p[k] for k in ("n", "name", "lat", "lon", "id")}
                                   for p in data["placed"]])


# --------------------------------------------------------------------------
# JSON
# --------------------------------------------------------------------------

@bp.get("/api/sites/<int:site_id>/summary")
def summary_json(site_id):
    """Where the site stands (interpretation of its current readings) and the
    data of its charts. ``?as_of=YYYY-MM-DD`` for the state at an earlier day."""
    db = get_db()
    site = site_by_id(db, site_id, page=False)
    site = dict(site)
    as_of = request.args.get("as_of") or None
    if as_of:
        try:
            dt.date.fromisoformat(as_of)
        except ValueError:
            raise InputError("as_of must be a date like 2026-05-14.", "as_of") from None
    crop = interpret.site_crop(site)
    targets = store.list_targets(db, crop.name) if crop else []
    out, specs, out["profile"] = interpretation(db, site, targets, as_of=as_of)
    out["charts"], out["point_fields"] = compact_charts(specs), list(POINT_FIELDS)
    visits = store.visits_for_site(db, site_id)
    out["visits"] = [dict(v) for v in visits[:SUMMARY_VISITS]]   # newest first
    out["visits_total"] = len(visits)
    return jsonify(out)


#: A chart point in the summary API: one array of these, in this order (the
#: API says so in ``point_fields``). A point's label is not sent: the series
#: name, the day, the value and the reading (``key``) say all it says.
POINT_FIELDS = ("t", "y", "key", "flagged")


def compact_charts(specs: list[dict]) -> list[dict]:
    """The chart data of the summary API: each series' points as arrays of
    :data:`POINT_FIELDS` (a long series of flagged points stays small)."""
    return [dict(c, series=[dict(x, points=[[p.get(f) for f in POINT_FIELDS]
                                            for p in x["points"]]) for x in c["series"]])
            for c in specs]


#: The summary API lists this many latest visits (``visits_total`` says how
#: many there are); a report names any visit by its id.
SUMMARY_VISITS = 50


@bp.get("/api/targets")
def list_targets():
    crop = request.args.get("crop") or None
    if crop:
        crop = tolerance.find_crop(crop).name
    return jsonify(store.list_targets(get_db(), crop))


@bp.post("/api/targets")
def save_target():
    """Keep (or replace) the user's target range for a crop and a measure."""
    body = request.get_json(silent=True)
    if body is None:
        raise InputError("Send the target as a JSON object.", "body")
    t = interpret.validate_target(body)
    row, created = store.save_target(get_db(), t)
    return jsonify(row), 201 if created else 200


@bp.delete("/api/targets/<int:target_id>")
def delete_target(target_id):
    if not store.delete_target(get_db(), target_id):
        raise store.StoreError("No such target.", "target", 404)
    return jsonify(deleted=target_id)
