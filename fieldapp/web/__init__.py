"""Web layer: blueprints for pages and the JSON API. Thin: they call
``records``/``science`` and ``store``, nothing else computes here."""
from __future__ import annotations

import sqlite3

from flask import current_app, g, jsonify, render_template, request

from .. import store
from ..fmt import number as short_number
from ..science import InputError


def get_db() -> sqlite3.Connection:
    """The request's connection, opened on first use and closed at teardown.

    A log served read-only (damaged, or found unwritable at start) gets a
    connection that cannot write. A reading request (GET, HEAD) whose normal
    connection cannot even read (a folder made read-only or a disk filled
    while the server runs) falls back to a read-only one, so every page and
    the export keep working for rescue; a save then answers 503."""
    if "db" not in g:
        if request.method in ("GET", "HEAD") or current_app.config.get("LOG_READ_ONLY"):
            g.db = open_read_connection()
        else:
            g.db = store.connect(current_app.config["DATABASE"], upgrade=False)
    return g.db


def open_read_connection() -> sqlite3.Connection:
    """A connection for reading: the normal one when it can read, else one that
    cannot write (a damaged log, a read-only folder, a full disk)."""
    path = current_app.config["DATABASE"]
    if current_app.config.get("LOG_READ_ONLY"):
        return store.connect_readonly(path)
    conn = None
    try:
        conn = store.connect(path, upgrade=False)
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
        return conn
    except sqlite3.OperationalError:
        if conn is not None:
            conn.close()
        return store.connect_readonly(path)


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

    @app.before_request
    def _refuse_writes_when_read_only():
        problem = current_app.config.get("LOG_READ_ONLY")
        if problem and request.method in ("POST", "PUT", "PATCH", "DELETE"):
            return jsonify(error=problem + " Your reading is kept on this device.",
                           field=None, read_only=True), 503

    @app.context_processor
    def _log_problem():
        return {"log_problem": current_app.config.get("LOG_READ_ONLY")}

    @app.errorhandler(sqlite3.DatabaseError)
    def _damaged(e):
        if isinstance(e, sqlite3.OperationalError):
            return _db_error(e)
        app.logger.exception("damaged log")
        problem = (f"Part of the log cannot be read ({e}): the file is damaged. Nothing more "
                   "is written to it. " + store._restore_hint(
                       __import__("pathlib").Path(current_app.config["DATABASE"])))
        current_app.config["LOG_READ_ONLY"] = problem
        if _wants_json():
            return jsonify(error=problem, field=None, read_only=True), 503
        return render_template("error.html", message=problem), 503

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
