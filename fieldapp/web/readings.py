"""Readings: the entry page and what it calls (the form's choices, the
preview, the save), a reading's corrections, voids and acknowledgements, the
list of readings, and the log's downloads (CSV, workbook)."""
from __future__ import annotations

from flask import (Blueprint, Response, current_app, g, jsonify, render_template, request,
                   send_from_directory, stream_with_context)

from .. import labels, store
from .. import sites as sitecfg
from ..science import extracts, tolerance, units
from ..results import CAUTIONS
from . import Later
from .db import get_db, open_read_connection
from .helpers import api_date, json_body, max_age_days, paged

csvio = Later("fieldapp.csvio")
records = Later("fieldapp.records")
osmotic = Later("fieldapp.science.osmotic")     # its tables are numpy arrays

bp = Blueprint("readings", __name__)


def _form_meta() -> dict:
    return {
        "units": units.DISPLAY_UNITS,
        "samples": [{"key": k.key, "label": k.label, "takes_ratio": k.takes_ratio,
                     "default_ratio": k.default_ratio, "is_soil": k.is_soil}
                    for k in extracts.SAMPLE_KINDS.values()],
        "textures": sorted(extracts.TEXTURES),
        "crops": sorted(c.name for c in tolerance.CROPS.values()),
    }


# ------------------------------------------------------------------ the page

@bp.get("/")
def entry():
    db = get_db()
    # Each site with its latest current reading's sample kind and unit: a
    # reading at an existing site starts from those, a new site from nothing.
    sites = [{"name": s["name"], "sample": s["last_sample"], "unit": s["last_unit"],
              "kind": s["kind"]} for s in store.list_sites(db, counts=False)]
    meter_names = [m["name"] for m in store.list_meters(db)]
    return render_template("entry.html", meta=_form_meta(), sites=sites, meters=meter_names,
                           cautions=CAUTIONS)


@bp.get("/sw.js")
def service_worker():
    """Served from the root so that it may keep the entry page for offline use."""
    resp = send_from_directory(current_app.static_folder, "sw.js", max_age=0)
    resp.headers["Cache-Control"] = "no-cache"
    return resp


@bp.get("/api/meta")
def meta():
    """What the entry form offers: units, sample kinds, textures, crops, methods."""
    return jsonify(
        **_form_meta(),
        ece_methods=list(extracts.REGRESSIONS),
        psi_s_routes=list(osmotic.PSI_S_ROUTES),
        site_kinds=[{"key": k, "label": lab} for k, lab in sitecfg.SITE_KINDS.items()],
    )


# ------------------------------------------------------------------ JSON

def _device_id():
    """The paired tablet sending this request (serve --lan), or None."""
    device = g.get("device")
    return device["id"] if device is not None else None


def _record(row) -> dict:
    """A stored reading for the page: the record, its result with plain labels."""
    d = store.reading_dict(row)
    d["result"] = labels.label_result(d["result"])
    return d


@bp.post("/api/preview")
def preview():
    """A reading in, the computed result out; nothing stored."""
    body = json_body()
    site = None
    if body.get("site"):
        try:
            site = store.get_site(get_db(), store.clean_site_name(body["site"]))
        except store.StoreError:
            site = None
    return jsonify(labels.label_result(records.preview(body, site, get_db(), max_age_days())))


@bp.post("/api/readings")
def save_reading():
    """Store a reading; the same uuid again returns the stored record (200)."""
    row, created = records.save_reading(get_db(), json_body(), max_age_days(), _device_id())
    return jsonify(_record(row)), 201 if created else 200


#: A page of GET /api/readings ends early rather than pass this size: its
#: next link names the rest, so a client that follows the links gets every
#: reading once (``limit`` is the most a page holds). 100 readings of the
#: usual kinds take about 250 KB; one with many flags and a long note, more.
PAGE_BYTES = 240 * 1024


def _within_bytes(items: list[dict], rows, nxt: str | None) -> tuple[list[dict], str | None]:
    """The first readings of a page whose JSON stays under :data:`PAGE_BYTES`
    (at least one), and the cursor after the last of them."""
    total = 2
    for k, item in enumerate(items):
        total += len(current_app.json.dumps(item, separators=(",", ":"))) + 1
        if total > PAGE_BYTES and k > 0:
            return items[:k], store.encode_cursor(rows[k - 1]["taken_at"], rows[k - 1]["id"])
    return items, nxt


@bp.get("/api/readings")
def list_readings():
    db = get_db()
    site_id = None
    if request.args.get("site"):
        name = request.args["site"]
        site = store.get_site(db, store.clean_site_name(name))
        if site is None:
            raise store.StoreError(f"No site called {name!r}.", "site", 404)
        site_id = site["id"]
    rows, nxt = store.readings_page(
        db, site_id=site_id, sample=request.args.get("sample") or None,
        date_from=api_date(request.args.get("from"), "from"),
        date_to=api_date(request.args.get("to"), "to"),
        limit=store.page_limit(request.args.get("limit")),
        after=request.args.get("after") or None)
    return paged(*_within_bytes([store.reading_dict(r) for r in rows], rows, nxt))


@bp.get("/api/readings/<rid>")
def get_reading(rid):
    row = store.get_reading(get_db(), rid)
    if row is None:
        raise store.StoreError("No such reading.", "uuid", 404)
    return jsonify(store.reading_dict(row))


@bp.post("/api/readings/<rid>/void")
def void_reading(rid):
    body = json_body()
    row = store.void_reading(get_db(), rid, body.get("reason"))
    return jsonify(store.reading_dict(row))


@bp.post("/api/readings/<rid>/correct")
def correct_reading(rid):
    """A corrected version: a new reading that points at the one it replaces."""
    row, created = records.correct_reading(get_db(), rid, json_body(), max_age_days(),
                                           _device_id())
    return jsonify(_record(row)), 201 if created else 200


@bp.post("/api/readings/<rid>/ack")
def ack_flag(rid):
    """Acknowledge a flag with a note: the flag stays, the note says why it is fine."""
    body = json_body()
    return jsonify(records.ack_flag(get_db(), rid, body.get("code"), body.get("note"))), 201


# ------------------------------------------------------------------ downloads

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
