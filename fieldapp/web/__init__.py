"""Web layer: blueprints for pages and the JSON API. Thin: they call
``records``/``science`` and ``store``, nothing else computes here."""
from __future__ import annotations

import sqlite3

from flask import current_app, g, jsonify, render_template, request

from .. import store
from ..interpret import short_number
from ..science import InputError


def get_db() -> sqlite3.Connection:
    """The request's connection, opened on first use and closed at teardown."""
    if "db" not in g:
        g.db = store.connect(current_app.config["DATABASE"], upgrade=False)
    return g.db


def close_db(exc=None):
    db = g.pop("db", None)
    if db is not None:
        db.close()


def _wants_json() -> bool:
    return request.path.startswith("/api/") or request.path.endswith(".csv")


def num(x, digits: int = 4) -> str:
    """Jinja filter: a number with a few significant digits, never 1e-05."""
    try:
        return short_number(x, digits)
    except (TypeError, ValueError):
        return str(x)


def register_common(app):
    app.teardown_appcontext(close_db)
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

    @app.errorhandler(InputError)
    def _input_error(e):
        return jsonify(error=e.message, field=e.field), 400

    @app.errorhandler(store.StoreError)
    def _store_error(e):
        return jsonify(error=e.message, field=e.field), e.status

    @app.errorhandler(sqlite3.OperationalError)
    def _db_error(e):
        app.logger.exception("database error")
        msg, cause = str(e), e.__context__
        while cause is not None:     # a failed ROLLBACK hides the error that caused it
            msg, cause = msg + " " + str(cause), cause.__context__
        import os
        import shutil
        folder = os.path.dirname(current_app.config["DATABASE"])
        if "readonly" in msg or not os.access(folder, os.W_OK):
            text = ("The log could not be written: its folder on the laptop is read-only. "
                    "Your reading is kept on this device and will be sent again.")
        elif "full" in msg or ("disk" in msg and shutil.disk_usage(folder).free < 1 << 22):
            # a full disk may also show as a disk I/O error while writing the journal
            text = ("The log could not be written: the laptop's disk is full. Free some space; "
                    "your reading is kept on this device and will be sent again.")
        elif "disk" in msg:
            text = ("The log could not be written (disk error). Your reading is kept on this "
                    "device and will be sent again.")
        else:
            text = "The log is busy or unavailable; your reading is kept and will be sent again."
        return jsonify(error=text, field=None), 503

    @app.errorhandler(404)
    def _not_found(e):
        if _wants_json():
            return jsonify(error="Not found.", field=None), 404
        return render_template("error.html", message="That page does not exist."), 404

    @app.errorhandler(405)
    def _bad_method(e):
        return jsonify(error="Method not allowed.", field=None), 405

    @app.errorhandler(413)
    def _too_large(e):
        return jsonify(error="The request is too large.", field=None), 413

    @app.errorhandler(400)
    def _bad_request(e):
        return jsonify(error="The request could not be read; send JSON.", field="body"), 400

    @app.errorhandler(500)
    def _server_error(e):
        # No traceback reaches the user; it is in the server's log.
        if _wants_json():
            return jsonify(error="Something went wrong on the server; nothing was changed.",
                           field=None), 500
        return render_template("error.html",
                               message="Something went wrong on the server."), 500
