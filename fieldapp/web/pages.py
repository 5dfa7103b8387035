"""HTML pages and the CSV download."""
from __future__ import annotations

import datetime as dt

from flask import (Blueprint, Response, abort, current_app, render_template, request,
                   stream_with_context, url_for)

from .. import csvio, store
from .. import sites as sitecfg
from ..science import extracts, tolerance, units
from ..science.convert import CAUTIONS
from .db import get_db

bp = Blueprint("pages", __name__)


def _form_meta() -> dict:
    return {
        "units": units.DISPLAY_UNITS,
        "samples": [{"key": k.key, "label": k.label, "takes_ratio": k.takes_ratio,
                     "default_ratio": k.default_ratio, "is_soil": k.is_soil}
                    for k in extracts.SAMPLE_KINDS.values()],
        "textures": sorted(extracts.TEXTURES),
        "crops": sorted(c.name for c in tolerance.CROPS.values()),
    }


@bp.get("/")
def entry():
    db = get_db()
    # Each site with its latest current reading's sample kind and unit: a
    # reading at an existing site starts from those, a new site from nothing.
    sites = [{"name": s["name"], "sample": s["last_sample"], "unit": s["last_unit"],
              "kind": s["kind"]} for s in store.list_sites(db)]
    meter_names = [m["name"] for m in store.list_meters(db)]
    return render_template("entry.html", meta=_form_meta(), sites=sites, meters=meter_names,
                           cautions=CAUTIONS)


@bp.get("/meters")
def meters_page():
    from .. import meters
    db = get_db()
    max_age = float(current_app.config.get("CALIBRATION_MAX_AGE_DAYS",
                                           meters.DEFAULT_MAX_AGE_DAYS))
    ms = store.list_meters(db)
    for m in ms:
        m["check"] = meters.check_status(m["last_check"], max_age)
    return render_template("meters.html", meters=ms, presets=meters.presets(), max_age_days=max_age,
                           units=units.DISPLAY_UNITS, cautions=CAUTIONS,
                           default_tolerance=meters.DEFAULT_TOLERANCE_PCT)


@bp.get("/sw.js")
def service_worker():
    """Served from the root so that it may keep the entry page for offline use."""
    from flask import current_app, send_from_directory
    resp = send_from_directory(current_app.static_folder, "sw.js", max_age=0)
    resp.headers["Cache-Control"] = "no-cache"
    return resp


@bp.get("/sites")
def sites():
    db = get_db()
    after = request.args.get("after") or None
    try:
        rows, nxt = store.sites_page(db, limit=SITES_PER_PAGE, after=after)
    except store.PageError:
        abort(404)
    return render_template("sites.html", sites=rows, kind_label=sitecfg.kind_label,
                           to_check=store.open_flag_counts(db, [s["id"] for s in rows]),
                           next_url=nxt and url_for("pages.sites", after=nxt),
                           first_url=after and url_for("pages.sites"))


#: Sites on one page of the sites list, readings on one page of a site log.
SITES_PER_PAGE = 100
READINGS_PER_PAGE = 50


def _settings_meta() -> dict:
    return {"kinds": sitecfg.SITE_KINDS,
            "crops": sorted(c.name for c in tolerance.CROPS.values()),
            "textures": list(extracts.TEXTURES)}


@bp.get("/sites/new")
def site_new():
    """Set up a new site with its settings (POST /api/sites from static/site_settings.js)."""
    return render_template("site_settings.html", site=None, history=[], meta=_settings_meta())


@bp.get("/sites/<int:site_id>/settings")
def site_settings(site_id):
    """The settings form of a site (PATCH /api/sites/<id>) and the kept history
    of its settings, newest first."""
    db = get_db()
    site = store.get_site(db, site_id)
    if site is None:
        abort(404)
    history = sitecfg.history_changes(store.site_history(db, site_id))[::-1]
    return render_template("site_settings.html", site=site, history=history,
                           meta=_settings_meta(), kind_label=sitecfg.kind_label)


@bp.get("/sites/<int:site_id>")
def site_log(site_id):
    db = get_db()
    site = store.get_site(db, site_id)
    if site is None:
        abort(404)
    sample = request.args.get("sample") or None
    date_from = _date_arg("from")
    date_to = _date_arg("to")
    after = request.args.get("after") or None
    try:
        rows, nxt = store.readings_page(db, site_id=site_id, sample=sample, date_from=date_from,
                                        date_to=date_to, limit=READINGS_PER_PAGE, after=after)
    except store.PageError:
        abort(404)
    readings = [store.reading_dict(r) for r in rows]
    keep = {k: v for k, v in (("sample", sample), ("from", date_from), ("to", date_to)) if v}
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
    from .views import site_view  # the summary and charts at the top of the log
    return render_template("site.html", site=site, readings=readings, cautions=CAUTIONS,
                           kind_label=sitecfg.kind_label,
                           saved=request.args.get("saved") == "1",
                           summary=site_view(db, site),
                           samples=list(extracts.SAMPLE_KINDS.values()), sample=sample,
                           date_from=date_from or "", date_to=date_to or "",
                           older_url=nxt and url_for("pages.site_log", site_id=site_id,
                                                     after=nxt, **keep) + "#log",
                           newest_url=after and url_for("pages.site_log", site_id=site_id,
                                                        **keep) + "#log")


def _date_arg(name):
    v = request.args.get(name) or None
    if v:
        try:
            dt.date.fromisoformat(v)
        except ValueError:
            return None
    return v


def _export_target(ext: str) -> tuple[int | None, str]:
    """The site an export is for (``?site=NAME``, or the whole log) and the
    download's file name."""
    name = request.args.get("site")
    if not name:
        return None, f"fieldapp-log.{ext}"
    site = store.get_site(get_db(), store.clean_site_name(name))
    if site is None:
        raise store.StoreError(f"No site called {name!r}.", "site", 404)
    safe = "".join(c if c.isalnum() else "-" for c in site["name"]).strip("-") or "site"
    return site["id"], f"fieldapp-{safe}.{ext}"


@bp.get("/export.csv")
def export_csv():
    site_id, filename = _export_target("csv")
    # The generator keeps its own connection: the request's one closes at teardown.
    from .db import open_read_connection
    conn = open_read_connection()

    def generate():
        try:
            yield from csvio.export_lines(conn, site_id)
        finally:
            conn.close()

    return Response(stream_with_context(generate()), mimetype="text/csv",
                    headers={"Content-Disposition": f'attachment; filename="{filename}"'})


@bp.get("/export.xlsx")
def export_xlsx():
    """The log (or ?site=NAME) as a workbook: readings, sites, sources. The
    workbook is built in a temporary file (write-only mode, memory flat) and
    sent from there."""
    import tempfile
    from flask import send_file
    from .. import xlsx
    site_id, filename = _export_target("xlsx")
    from .db import open_read_connection
    conn = open_read_connection()
    tmp = tempfile.TemporaryFile()
    try:
        xlsx.export_xlsx(conn, tmp, site_id)
    except BaseException:
        tmp.close()
        raise
    finally:
        conn.close()
    tmp.seek(0)
    return send_file(tmp, as_attachment=True, download_name=filename,
                     mimetype="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet")


def db_path():
    from flask import current_app
    return current_app.config["DATABASE"]
