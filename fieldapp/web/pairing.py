"""Pairing: who may use a log shared on the network (``serve --lan``,
``app.config["LAN"]``).

Every page, file and API call then needs the session cookie of a paired
device and answers 401 without it; only the pairing page and the files it
loads are open. The laptop itself (a request from 127.0.0.1 naming localhost)
needs no pairing. A tablet pairs once with a short code the laptop shows on
its terminal and on ``/pair/devices`` (reachable from the laptop only), as
text and as a QR code; codes expire after a day, can be revoked or renewed,
and wrong codes are rate-limited per address and overall (``limiter.py``).

The plain http address is not encrypted: on a hotspot, use one with a password
(WPA2 or better) so that nobody outside the crew can listen in. ``serve --lan``
also serves https (``fieldapp/tls.py``) for tablets that installed the log
folder's CA certificate (``/pair/ca.crt``, open without pairing).
"""
from __future__ import annotations

import datetime as dt
import secrets
import sqlite3

from flask import (Blueprint, Response, abort, current_app, g, jsonify, render_template,
                   request)

from .. import store
from ..lan import lan_addresses
from .db import get_db
from .limiter import FailureLimiter
from .pairing_codes import (current_code, format_code, matching_code, new_code,  # noqa: F401
                            normalize_code, token_digest)   # (others import them from here)
from .security import host_name, is_laptop, safe_next, wants_json

SESSION_COOKIE = "fieldapp_device"
SESSION_MAX_AGE_S = 400 * 24 * 3600          # the longest Chromium keeps a cookie (from memory)
TOUCH_EVERY_S = 300                          # how often "last seen" is written
#: Devices one code may pair before a new code is needed (config
#: PAIRING_DEVICES_PER_CODE): a crew's tablets, not the whole hotspot.
DEVICES_PER_CODE = 10
#: A pairing not used for this long stops working (config PAIRING_IDLE_DAYS).
PAIRING_IDLE_DAYS = 90
#: What an unpaired device may load: the pairing page and its two files.
#: The CA certificate carries no data (a public key and a name) and must be
#: installed before the https address can be trusted, so it is open too.
OPEN_PATHS = {("GET", "/pair"), ("POST", "/pair"), ("GET", "/static/pair.js"),
              ("GET", "/static/style.css"), ("GET", "/pair/ca.crt")}

bp = Blueprint("pairing", __name__)


def _limiter() -> FailureLimiter:
    return current_app.extensions["fieldapp_pairing_limiter"]


def start_lan(app, host: str, port: int) -> list[str]:
    """Get the server ready to share the log: a valid pairing code, the
    addresses tablets use. Returns the lines to print on the laptop's terminal
    (with a QR code when the terminal is one)."""
    import sys

    from .. import qr
    addrs = [host] if host not in ("0.0.0.0", "::", "") else lan_addresses()
    urls = [f"http://{a}:{port}" for a in addrs]
    app.config["LAN_URLS"] = urls
    https_port = app.config.get("HTTPS_PORT")     # set by tls.start_https, if running
    secure = [f"https://{a}:{https_port}" for a in addrs] if https_port else []
    app.config["LAN_HTTPS_URLS"] = secure
    from .db import open_connection
    conn = open_connection(app)
    try:
        code = current_code(conn, create=True)
    finally:
        conn.close()
    shown = format_code(code["code"])
    lines = ["The log is shared on the network. A tablet pairs once with this code:",
             f"  code   {shown}   (valid until {code['expires_at'][:16].replace('T', ' ')} UTC)"]
    for u in urls or [f"http://<this laptop's address>:{port}"]:
        lines.append(f"  open   {u}/pair")
    if https_port:
        lines.append("  once a tablet has installed this log's certificate (it works offline then,")
        lines.append("  also after a reload):")
        for u in urls:
            lines.append(f"  1. certificate  {u}/pair/ca.crt")
        lines.append(f"     fingerprint  {app.config.get('CA_FINGERPRINT', '')}")
        for u in secure or [f"https://<this laptop's address>:{https_port}"]:
            lines.append(f"  2. open         {u}/pair")
    lines.append(f"  manage codes and tablets on this laptop: http://localhost:{port}/pair/devices")
    if not https_port:
        lines.append("  Use a hotspot with a password: the connection itself is not encrypted.")
    target = (secure or urls or [None])[0]
    if target and sys.stdout.isatty():
        lines.append(qr.to_text(qr.encode(f"{target}/pair#{shown}", "M")))
    return lines


# ------------------------------------------------------------ the pairing gate

def require_pairing():
    """With serve --lan, every request but the pairing page's needs a paired
    device's cookie (the laptop itself needs none); else a 401."""
    if not current_app.config.get("LAN"):
        return None
    if (request.method, request.path) in OPEN_PATHS:
        return None
    if request.path.startswith("/api/sync/"):
        return None           # devices syncing with the office: a bearer token (office.py)
    if is_laptop():
        g.device = None
        return None
    device = _paired_device()
    if device is None:
        return _not_paired()
    g.device = device
    return None


def _paired_device():
    token = request.cookies.get(SESSION_COOKIE)
    if not token or len(token) > 200:
        return None
    db = get_db()
    row = store.device_by_token(db, token_digest(token))
    if row is None:
        return None
    idle_days = float(current_app.config.get("PAIRING_IDLE_DAYS", PAIRING_IDLE_DAYS))
    try:
        seen = dt.datetime.fromisoformat(row["last_seen_at"])
    except ValueError:
        return None
    if (dt.datetime.now(dt.timezone.utc) - seen).total_seconds() > idle_days * 86400:
        g.pairing_expired = True
        return None
    try:
        if (dt.datetime.now(dt.timezone.utc) - seen).total_seconds() > TOUCH_EVERY_S \
                or row["address"] != (request.remote_addr or ""):
            store.touch_device(db, row["id"], request.remote_addr or "")
    except (sqlite3.Error, ValueError):
        current_app.logger.warning("could not note when device %s was last seen", row["id"])
    return row


def _return_path() -> str:
    """The address asked for, percent-encoded as it came (full_path is decoded)."""
    from urllib.parse import quote
    path = quote(request.path, safe="/-._~!$&'()*+,;=:@")
    qs = request.query_string.decode("latin-1")
    return safe_next(path + ("?" + qs if qs else ""))


def _not_paired():
    msg = ("This device is not paired with the field laptop. Open /pair and type the code "
           "the laptop shows.")
    if g.get("pairing_expired"):
        msg = ("This device's pairing expired: it was not used for "
               f"{current_app.config.get('PAIRING_IDLE_DAYS', PAIRING_IDLE_DAYS):g} days. "
               "Open /pair and type the code the laptop shows.")
    if wants_json():
        resp = jsonify(error=msg, field=None, pair="/pair")
    else:
        resp = Response(render_template("pair.html", mode="pair", lan=True, paired=None,
                                        next=_return_path(), tls=_tls_for_tablet()),
                        mimetype="text/html")
    resp.status_code = 401
    resp.headers["WWW-Authenticate"] = 'FieldPairing realm="fieldapp"'
    return resp


# ------------------------------------------------------------ pairing pages

def _laptop_only():
    if not is_laptop():
        abort(403)


def _device_label(row) -> str:
    return row["label"] or f"device {row['id']}"


def _tls_for_tablet() -> dict | None:
    """What the pairing page says about https: None when the laptop serves no
    https; else whether this page came over https, the https address of this
    same page and the CA's fingerprint to compare."""
    port = current_app.config.get("HTTPS_PORT")
    if not port:
        return None
    name = host_name(request.host)
    host = f"[{name}]" if ":" in name else name
    return {"secure": request.is_secure, "url": f"https://{host}:{port}/pair",
            "fingerprint": current_app.config.get("CA_FINGERPRINT", "")}


@bp.get("/pair")
def pair_page():
    lan = bool(current_app.config.get("LAN"))
    paired = None
    if lan:
        paired = _paired_device()
    return render_template("pair.html", mode="pair", lan=lan, paired=paired,
                           laptop=is_laptop(), next="/", tls=_tls_for_tablet())


@bp.get("/pair/ca.crt")
def ca_certificate():
    """The log folder's CA certificate (DER), for a tablet to install once.
    Open without pairing: it holds a public key and a name, no data."""
    if not current_app.config.get("HTTPS_PORT"):
        return jsonify(error="This laptop serves no https, so there is no certificate to "
                             "install. Start it with serve --lan.", field=None), 404
    from .. import tls
    resp = Response(tls.ca_der(current_app.config["DATA_DIR"]),
                    mimetype="application/x-x509-ca-cert")
    resp.headers["Content-Disposition"] = 'attachment; filename="fieldapp-ca.crt"'
    return resp


@bp.post("/pair")
def pair():
    """Trade a pairing code for a session cookie."""
    if not current_app.config.get("LAN"):
        return jsonify(error="This server is for this machine only; no pairing is needed.",
                       field=None), 409
    addr = request.remote_addr or ""
    body = request.get_json(silent=True)
    if not isinstance(body, dict):
        return jsonify(error="Send the code as JSON.", field="body"), 400
    typed = normalize_code(body.get("code"))
    if not typed:
        return jsonify(error="Type the code the laptop shows.", field="code"), 400
    label = " ".join(str(body.get("name") or "").split())[:60]
    db = get_db()
    limiter = _limiter()
    with limiter.lock:
        wait = limiter.retry_after(db, addr)
        if wait:
            resp = jsonify(error=f"Too many wrong codes from this device. Wait "
                                 f"{max(1, round(wait / 60))} minute(s), then type the code "
                                 "the laptop shows now.", field="code")
            resp.status_code = 429
            resp.headers["Retry-After"] = str(wait)
            return resp
        match = matching_code(db, typed)
        if match is None:
            limiter.fail(db, addr)
            return jsonify(error="That code is not valid. Type the code the laptop shows "
                                 "now (codes expire after a day or when renewed).",
                           field="code"), 403
        limit = current_app.config.get("PAIRING_DEVICES_PER_CODE", DEVICES_PER_CODE)
        if store.devices_paired_with(db, match["id"]) >= limit:
            return jsonify(error=f"This code has paired {limit} devices already. On the "
                                 "laptop, open Devices and make a new code.",
                           field="code"), 409
    token = secrets.token_urlsafe(32)
    device = store.insert_device(db, token_digest(token), label,
                                 (request.user_agent.string or "")[:200], addr, match["id"])
    resp = jsonify(ok=True, device={"id": device["id"], "label": _device_label(device)})
    resp.set_cookie(SESSION_COOKIE, token, max_age=SESSION_MAX_AGE_S, httponly=True,
                    samesite="Strict", secure=request.is_secure, path="/")
    return resp


@bp.post("/pair/forget")
def forget():
    """A paired device unpairs itself (a tablet handed back, a shared browser)."""
    device = g.get("device")
    if device is not None:
        store.revoke_devices(get_db(), device["id"])
    resp = jsonify(ok=True)
    resp.delete_cookie(SESSION_COOKIE, path="/", samesite="Strict")
    return resp


def _qr(target: str, px: int) -> str:
    from .. import qr
    return qr.to_svg(qr.encode(target, "M"), label=f"QR code of {target}", px=px)


def _admin_state() -> dict:
    db = get_db()
    code = current_code(db)
    urls = current_app.config.get("LAN_URLS") or []
    secure = current_app.config.get("LAN_HTTPS_URLS") or []
    shown = format_code(code["code"]) if code else None
    qrs = []                                  # the https addresses first
    if code:
        qrs = [{"url": f"{u}/pair#{shown}", "secure": True, "svg": _qr(f"{u}/pair#{shown}", 240)}
               for u in reversed(secure)]
        qrs += [{"url": f"{u}/pair#{shown}", "svg": _qr(f"{u}/pair#{shown}", 240)} for u in urls]
    ca_qrs = [{"url": f"{u}/pair/ca.crt", "svg": _qr(f"{u}/pair/ca.crt", 200)}
              for u in (urls if secure else [])]
    counts = store.device_reading_counts(db)
    devices = [{"id": d["id"], "label": _device_label(d), "user_agent": d["user_agent"],
                "address": d["address"], "paired_at": d["paired_at"],
                "last_seen_at": d["last_seen_at"], "revoked_at": d["revoked_at"],
                "readings": counts.get(d["id"], 0)}
               for d in store.list_devices(db)]
    return {"lan": bool(current_app.config.get("LAN")), "urls": urls,
            "https_urls": secure, "ca_qrs": ca_qrs,
            "fingerprint": current_app.config.get("CA_FINGERPRINT"),
            "code": shown, "code_id": code["id"] if code else None,
            "expires_at": code["expires_at"] if code else None,
            "qrs": qrs, "devices": devices}


@bp.get("/pair/devices")
def devices_page():
    _laptop_only()
    return render_template("pair.html", mode="admin", state=_admin_state())


@bp.get("/pair/state")
def devices_state():
    _laptop_only()
    st = _admin_state()
    st.pop("qrs")
    st.pop("ca_qrs")
    return jsonify(st)


@bp.post("/pair/codes")
def renew_code():
    _laptop_only()
    new_code(get_db())
    st = _admin_state()
    return jsonify(code=st["code"], expires_at=st["expires_at"]), 201


@bp.post("/pair/codes/revoke")
def revoke_codes():
    _laptop_only()
    return jsonify(revoked=store.revoke_pairing_codes(get_db()))


@bp.post("/pair/devices/<int:device_id>/revoke")
def revoke_device(device_id):
    _laptop_only()
    return jsonify(revoked=store.revoke_devices(get_db(), device_id))


@bp.post("/pair/devices/revoke")
def revoke_all_devices():
    _laptop_only()
    return jsonify(revoked=store.revoke_devices(get_db()))


def init_app(app) -> None:
    """The wrong-code limiter, the pairing gate (after the request checks) and /pair."""
    app.config.setdefault("LAN", False)
    app.config.setdefault("LAN_URLS", [])
    app.extensions["fieldapp_pairing_limiter"] = FailureLimiter()
    app.before_request(require_pairing)
    app.register_blueprint(bp)
