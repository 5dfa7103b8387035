"""Web layer: one blueprint per concern (readings, sites, meters, views,
pairing), each serving its HTML and its JSON. Thin: they call
``records``/``science`` and ``store``, nothing else computes here.
``init_app(app)`` installs it all; ``db`` holds the request's connection."""
from __future__ import annotations

from ..fmt import number as short_number
from ..lazy import Later  # noqa: F401 - charts, interpret, csvio, records at first use
from .db import get_db, open_read_connection  # noqa: F401 - the request's connection


def num(x, digits: int = 4) -> str:
    """Jinja filter: a number with a few significant digits, never 1e-05."""
    try:
        return short_number(x, digits)
    except (TypeError, ValueError):
        return str(x)


def register_filters(app) -> None:
    app.add_template_filter(num, "num")
    # Plain words for codes on every page and the report (the codes stay in
    # the API and the CSV).
    from .. import labels
    app.add_template_filter(labels.flag_label, "flag_label")
    app.add_template_filter(labels.method_label, "method_label")
    app.add_template_filter(labels.route_label, "route_label")
    app.add_template_filter(labels.readable_source, "cite")
    app.add_template_filter(lambda s: labels.SEVERITY_LABELS.get(s, s), "severity_label")
    app.add_template_filter(labels.sample_label, "sample_label")


def init_app(app) -> None:
    """Install the web layer on ``app``, in this order: the log (``db``:
    checked and migrated at start, one connection per request, writes refused
    while it is read-only), the template filters, the error answers
    (``errors``), the request checks and headers (``security``), pairing
    (``pairing``: the LAN gate and /pair), then one blueprint per concern,
    each serving its pages and its JSON: readings (the entry page,
    /api/preview, /api/readings, the downloads), sites (the sites list, a
    site's log and settings, /api/sites), meters (/meters, /api/meters,
    /api/calibrations) and views (a site's summary, its report, the map,
    /api/targets), and office (sync: /api/sync/* at the office, /office, and
    /send on a device)."""
    from . import db
    check = db.start(app)     # SQLite's check of the file runs while the rest is built
    from . import errors, meters, office, pairing, readings, security, sites, views
    register_filters(app)
    errors.register(app)
    security.init_app(app)
    pairing.init_app(app)
    for module in (readings, sites, meters, views):
        app.register_blueprint(module.bp)
    office.init_app(app)      # sync with an office: /api/sync (office), /send (device)
    db.finish(app, check)     # a refused log stops the start here
