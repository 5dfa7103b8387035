"""Web layer: blueprints for pages and the JSON API. Thin: they call
``records``/``science`` and ``store``, nothing else computes here.

``db`` holds the request's connection (get_db/close_db) and opens the log at
start; ``errors`` every error answer."""
from __future__ import annotations

from ..interpret import short_number
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


def register_common(app) -> None:
    """The log (checked and migrated at start), the template filters and the
    error answers."""
    from . import db, errors
    db.init_app(app)
    register_filters(app)
    errors.register(app)


def register_blueprints(app) -> None:
    """One blueprint per concern, each serving its pages and its JSON:
    readings (the entry page, /api/preview, /api/readings, the downloads),
    sites (the sites list, a site's log and settings, /api/sites), meters
    (/meters, /api/meters, /api/calibrations) and views (a site's summary,
    its report, the map, /api/targets). Pairing (/pair) comes with the
    request checks in ``security``."""
    from . import meters, readings, sites, views
    for module in (readings, sites, meters, views):
        app.register_blueprint(module.bp)
