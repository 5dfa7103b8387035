"""Sites: the list of sites, a site's log (its readings, newest first, with
the summary at the top), a site's settings and their history, and the same
as JSON under /api/sites. What the readings mean is in ``views``."""
from __future__ import annotations

from flask import Blueprint, abort, jsonify, render_template, request, url_for

from .. import sites as sitecfg
from .. import store
from ..store.site_views import flagged_page
from ..science import extracts, tolerance
from ..results import CAUTIONS
from .db import get_db
from .helpers import json_body, page_date, paged, site_by_id, site_cache
from .views import site_view

bp = Blueprint("sites", __name__)

#: Sites on one page of the sites list, readings on one page of a site log.
SITES_PER_PAGE = 100
READINGS_PER_PAGE = 50


def _settings_meta() -> dict:
    return {"kinds": sitecfg.SITE_KINDS,
            "crops": sorted(c.name for c in tolerance.CROPS.values()),
            "textures": list(extracts.TEXTURES)}


def _with_counts(db, rows) -> list[dict]:
    """Sites listed without their reading counts, with the counts kept
    between requests (``store.SiteCache.reading_counts``)."""
    counts = site_cache().reading_counts(db)
    return [{**dict(r), "n_readings": counts.get(r["id"], 0)} for r in rows]


# ------------------------------------------------------------------ pages

@bp.get("/sites")
def sites_page():
    db = get_db()
    after = request.args.get("after") or None
    try:
        rows, nxt = store.sites_page(db, limit=SITES_PER_PAGE, after=after, counts=False)
    except store.PageError:
        abort(404)
    rows = _with_counts(db, rows)
    return render_template("sites.html", sites=rows, kind_label=sitecfg.kind_label,
                           to_check=site_cache().open_flags(db, [s["id"] for s in rows]),
                           next_url=nxt and url_for("sites.sites_page", after=nxt),
                           first_url=after and url_for("sites.sites_page"))


@bp.get("/sites/new")
def site_new():
    """Set up a new site with its settings (POST /api/sites from static/site_settings.js)."""
    return render_template("site_settings.html", site=None, history=[], meta=_settings_meta())


@bp.get("/sites/<int:site_id>/settings")
def site_settings(site_id):
    """The settings form of a site (PATCH /api/sites/<id>) and the kept history
    of its settings, newest first."""
    db = get_db()
    site = site_by_id(db, site_id)
    history = sitecfg.history_changes(store.site_history(db, site_id))[::-1]
    return render_template("site_settings.html", site=site, history=history,
                           meta=_settings_meta(), kind_label=sitecfg.kind_label)


@bp.get("/sites/<int:site_id>")
def site_log(site_id):
    db = get_db()
    site = site_by_id(db, site_id)
    sample = request.args.get("sample") or None
    date_from = page_date("from")
    date_to = page_date("to")
    after = request.args.get("after") or None
    flagged = request.args.get("flagged") == "1"    # the charts' flagged points, every one
    try:
        if flagged:
            rows, nxt = flagged_page(db, site_cache(), site_id, sample=sample,
                                     date_from=date_from, date_to=date_to,
                                     limit=READINGS_PER_PAGE, after=after)
        else:
            rows, nxt = store.readings_page(db, site_id=site_id, sample=sample,
                                            date_from=date_from, date_to=date_to,
                                            limit=READINGS_PER_PAGE, after=after)
    except store.PageError:
        abort(404)
    readings = [store.reading_dict(r) for r in rows]
    keep = {k: v for k, v in (("sample", sample), ("from", date_from), ("to", date_to),
                              ("flagged", "1" if flagged else None)) if v}
    acks = store.acks_for_readings(db, [r["id"] for r in readings])
    by_uuid = {r["uuid"]: r for r in readings}
    for r in readings:
        r["acks"] = {a["code"]: a for a in acks[r["id"]]}
        # a correction is shown beside the version it replaces
        prev = r.get("supersedes_uuid")
        r["previous"] = by_uuid.get(prev) if prev else None
        if prev and r["previous"] is None:
            old = store.get_reading(db, prev)
            r["previous"] = store.reading_dict(old) if old is not None else None
    return render_template("site.html", site=site, readings=readings, cautions=CAUTIONS,
                           review=store.review_pairs(db, site_id),   # two corrections (sync)
                           kind_label=sitecfg.kind_label,
                           saved=request.args.get("saved") == "1",
                           summary=site_view(db, site),     # summary and charts at the top
                           samples=list(extracts.SAMPLE_KINDS.values()), sample=sample,
                           date_from=date_from or "", date_to=date_to or "", flagged=flagged,
                           older_url=nxt and url_for("sites.site_log", site_id=site_id,
                                                     after=nxt, **keep) + "#log",
                           newest_url=after and url_for("sites.site_log", site_id=site_id,
                                                        **keep) + "#log")


# ------------------------------------------------------------------ JSON

@bp.get("/api/sites")
def list_sites():
    db = get_db()
    rows, nxt = store.sites_page(db, limit=store.page_limit(request.args.get("limit")),
                                 after=request.args.get("after") or None, counts=False)
    return paged([sitecfg.site_dict(r) for r in _with_counts(db, rows)], nxt)


@bp.post("/api/sites")
def create_site():
    """Set up a new site with its settings; its creation opens its history."""
    return jsonify(sitecfg.create_site(get_db(), json_body())), 201


@bp.get("/api/sites/<int:site_id>")
def get_site(site_id):
    return jsonify(sitecfg.site_dict(site_by_id(get_db(), site_id, page=False)))


@bp.patch("/api/sites/<int:site_id>")
def update_site(site_id):
    """Change some settings of a site (only the keys sent; validated by
    ``fieldapp.sites.validate_settings``, a wrong JSON type or value answers
    400 naming the field); the change is kept in the site's history in the
    same transaction. Later readings use the new SP, texture and crop; stored
    readings keep the numbers they were saved with."""
    db = get_db()
    site_by_id(db, site_id, page=False)
    row, change_no = store.change_site_settings(db, site_id,
                                                sitecfg.validate_settings(json_body()))
    return jsonify({**sitecfg.site_dict(row), "change_no": change_no})


@bp.get("/api/sites/<int:site_id>/history")
def site_history(site_id):
    """The kept changes of a site's settings, oldest first, each with its rows
    (field, old_value, new_value) and a plain sentence."""
    db = get_db()
    site_by_id(db, site_id, page=False)
    return jsonify(sitecfg.history_changes(store.site_history(db, site_id)))
