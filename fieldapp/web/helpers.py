"""What the blueprints share: a site by id or a 404, the JSON body, the calibration age limit, dates
in query strings, paged lists, and the site views' cache."""
from __future__ import annotations

import datetime as dt
from urllib.parse import urlencode

from flask import abort, current_app, jsonify, request

from .. import meters, store
from ..science import InputError


def json_body() -> dict:
    """The request's JSON object, or a 400 naming the body."""
    data = request.get_json(silent=True)
    if not isinstance(data, dict):
        raise InputError("Send the reading as a JSON object.", "body")
    return data


def site_by_id(db, site_id: int, page: bool = True):
    """The site, or a 404: the HTML error page for a page (``page=True``), a
    JSON ``{error, field}`` answer for the API."""
    site = store.get_site(db, site_id)
    if site is None:
        if page:
            abort(404)
        raise store.StoreError("No such site.", "site", 404)
    return site


def max_age_days() -> float:
    """How old a meter's last calibration check may be (serve --check-days)."""
    return float(current_app.config.get("CALIBRATION_MAX_AGE_DAYS",
                                        meters.DEFAULT_MAX_AGE_DAYS))


def site_cache():
    """The app's :class:`store.SiteCache`: the day totals of recently viewed
    sites, kept between requests (checked against the log on every use)."""
    ext = current_app.extensions
    if "fieldapp.site_cache" not in ext:
        ext.setdefault("fieldapp.site_cache", store.SiteCache())
    return ext["fieldapp.site_cache"]


def api_date(v, field):
    """A date argument of the API: None, or an ISO date; anything else is a 400."""
    if not v:
        return None
    try:
        dt.date.fromisoformat(v)
    except ValueError:
        raise InputError(f"{field} must be a date like 2026-05-14.", field) from None
    return v


def page_date(name):
    """A date argument of a page: an ISO date, or None (ignored) for anything else."""
    v = request.args.get(name) or None
    if v:
        try:
            dt.date.fromisoformat(v)
        except ValueError:
            return None
    return v


def paged(items: list, nxt: str | None):
    """A page of a list: the body stays a JSON array (older callers keep
    working); the next page, if any, is named by a ``Link: <...>; rel="next"``
    header and by ``X-Next-Cursor`` (pass it back as ``after``)."""
    resp = jsonify(items)
    if nxt is not None:
        args = {k: v for k, v in request.args.items() if k != "after"}
        args["after"] = nxt
        resp.headers["Link"] = f'<{request.path}?{urlencode(args)}>; rel="next"'
        resp.headers["X-Next-Cursor"] = nxt
    return resp
