"""fieldapp: an offline field log for EC readings.

``create_app(config=None)`` is the Flask application factory; the science
lives in ``fieldapp.science`` and knows nothing of Flask or SQL.
"""
from __future__ import annotations

from pathlib import Path

__version__ = "0.1.0"

_PACKAGE = Path(__file__).resolve().parent
#: The repository's top level in a checkout (templates/ and static/ live there).
REPO_ROOT = _PACKAGE.parent


def resource_dir(name: str) -> Path:
    """The folder of the page's ``templates`` or ``static`` files.

    An installed fieldapp (wheel, ``pip install .``, pipx) carries them inside
    the package, where the build puts the repository's top-level folders; a
    checkout or an editable install finds them at the repository's top level."""
    inside = _PACKAGE / name
    if inside.is_dir():
        return inside
    return REPO_ROOT / name


def default_data_dir() -> Path:
    """The user's data folder for fieldapp, where each system keeps it
    (platformdirs): ~/.local/share/fieldapp (or $XDG_DATA_HOME) on Linux,
    ~/Library/Application Support/fieldapp on macOS,
    %LOCALAPPDATA%\\fieldapp on Windows."""
    from platformdirs import user_data_dir
    return Path(user_data_dir("fieldapp", appauthor=False))


def create_app(config: dict | None = None):
    """Build the Flask application.

    ``config`` may set DATA_DIR (folder holding the SQLite file), TESTING, and
    anything Flask knows. The database is opened and migrated here, so a
    corrupt or foreign file stops the start with a clear message.
    """
    from flask import Flask

    from . import web

    app = Flask(__name__, template_folder=str(resource_dir("templates")),
                static_folder=str(resource_dir("static")), static_url_path="/static")
    app.config.update(
        DATA_DIR=str(default_data_dir()),
        MAX_CONTENT_LENGTH=8 * 1024 * 1024,
        JSON_SORT_KEYS=False,
    )
    if config:
        app.config.update(config)
    # the log (checked, migrated), error answers, request checks and headers,
    # LAN pairing (config LAN=True) and one blueprint per concern
    web.init_app(app)
    return app
