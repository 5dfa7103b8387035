"""What the server answers when a request fails: a JSON ``{error, field}`` to
the API and the CSV download, a plain page to a person, never a traceback
(that goes to the server's log). ``register(app)`` installs every handler:
the log's (damaged, unwritable), bad input's, and the request checks'."""
from __future__ import annotations

import os
import shutil
import sqlite3
from pathlib import Path

from flask import current_app, jsonify, render_template, request

from .. import store
from ..science import InputError
from .security import TooDeep, refuse


def _wants_json() -> bool:
    return request.path.startswith("/api/") or request.path.endswith(".csv")


def damaged(e):
    """Part of the log cannot be read: serve it read-only from now on, and say so."""
    if isinstance(e, sqlite3.OperationalError) or _on_postgresql():
        return db_error(e)          # PostgreSQL keeps its own pages: no file to rescue
    current_app.logger.exception("damaged log")
    problem = (f"Part of the log cannot be read ({e}): the file is damaged. Nothing more "
               "is written to it. " + store._restore_hint(
                   Path(current_app.config["DATABASE"])))
    current_app.config["LOG_READ_ONLY"] = problem
    if _wants_json():
        return jsonify(error=problem, field=None, read_only=True), 503
    return render_template("error.html", message=problem), 503


def _on_postgresql() -> bool:
    return current_app.config.get("DB_DIALECT") == "postgresql"


def input_error(e):
    return jsonify(error=e.message, field=e.field), 400


def store_error(e):
    return jsonify(error=e.message, field=e.field), e.status


def db_error(e):
    """The log could not be written: say why (read-only folder, full disk) and
    that the tablet keeps the reading."""
    current_app.logger.exception("database error")
    if _on_postgresql():
        return jsonify(error="The office database did not answer or refused the change; "
                             "your reading is kept and will be sent again.", field=None), 503
    msg, cause = str(e), e.__context__
    while cause is not None:     # a failed ROLLBACK hides the error that caused it
        msg, cause = msg + " " + str(cause), cause.__context__
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


def not_found(e):
    if _wants_json():
        return jsonify(error="Not found.", field=None), 404
    return render_template("error.html", message="That page does not exist."), 404


def bad_method(e):
    return jsonify(error="Method not allowed.", field=None), 405


def too_large(e):
    return jsonify(error="The request is too large.", field=None), 413


def bad_request(e):
    return jsonify(error="The request could not be read; send JSON.", field="body"), 400


def server_error(e):
    # No traceback reaches the user; it is in the server's log.
    if _wants_json():
        return jsonify(error="Something went wrong on the server; nothing was changed.",
                       field=None), 500
    return render_template("error.html", message="Something went wrong on the server."), 500


# Refusals of the request checks (security.py): JSON to a script, the
# refusal page to a person.

def forbidden(e):
    return refuse(403, "This page is for the laptop the server runs on.")


def unsupported(e):
    return refuse(415, "Send the data as JSON (Content-Type: application/json).", "body")


def too_deep(e):
    return refuse(400, "The request could not be read; send JSON.", "body")


def not_text(e):
    return refuse(400, "The request holds text that is not valid Unicode.")


def overflow(e):
    return refuse(400, "A number in the request is too large; check the digits.")


def register(app) -> None:
    for key, handler in ((sqlite3.DatabaseError, damaged), (InputError, input_error),
                         (store.StoreError, store_error), (sqlite3.OperationalError, db_error),
                         (404, not_found), (405, bad_method), (413, too_large),
                         (400, bad_request), (500, server_error),
                         (403, forbidden), (415, unsupported), (TooDeep, too_deep),
                         (RecursionError, too_deep), (UnicodeError, not_text),
                         (OverflowError, overflow)):
        app.register_error_handler(key, handler)
