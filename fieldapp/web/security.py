"""Who may read and change the log, and what every response says about itself.

``register_security(app)`` adds, to every request and response:

* Host check. When the server is for this machine only (the default, bound to
  127.0.0.1), a request naming another host is refused: a web page elsewhere
  cannot reach the log by pointing its own domain at 127.0.0.1 (DNS
  rebinding).
* Cross-site request forgery. A request that changes something (POST, PUT,
  PATCH, DELETE) must come from a page of this server: the browser's
  Sec-Fetch-Site, Origin or Referer, whichever it sends, must name this
  server, and the body must be JSON (``Content-Type: application/json``), a
  type a page elsewhere cannot send without the server's consent (CORS
  preflight, which this server never grants). Scripts and the command line
  send neither header and are not concerned: forgery needs a browser. These
  are the header checks and the "no simple request" rule of OWASP's CSRF
  prevention guidance (recalled from memory, not re-read).
* Pairing, when the log is shared on the network (``serve --lan``,
  ``app.config["LAN"]``). Every page, file and API call then needs the
  session cookie of a paired device and answers 401 without it; only the
  pairing page and the two files it loads are open. The laptop itself
  (a request from 127.0.0.1 naming localhost) needs no pairing. A tablet pairs
  once with a short code the laptop shows on its terminal and on
  ``/pair/devices`` (reachable from the laptop only), as text and as a QR
  code; codes expire after a day, can be revoked or renewed, and wrong codes
  are rate-limited per address and overall.
* Headers: a Content-Security-Policy that allows nothing from another origin
  and no inline script, X-Content-Type-Options, Referrer-Policy,
  X-Frame-Options and frame-ancestors, Cross-Origin-Opener/Resource-Policy,
  Permissions-Policy, and no caching of API answers.
* A JSON reader that refuses NaN and Infinity literals and absurdly long
  integers and turns a too-deeply nested body into a plain 400, so no hostile
  body reaches the code as something it cannot handle.

The plain http address is not encrypted: on a hotspot, use one with a password
(WPA2 or better) so that nobody outside the crew can listen in. ``serve --lan``
also serves https (``fieldapp/tls.py``) for tablets that installed the log
folder's CA certificate (``/pair/ca.crt``, open without pairing).
"""
from __future__ import annotations

import datetime as dt
import hashlib
import hmac
import ipaddress
import json
import re
import secrets
import socket
import sqlite3
import threading
import time
from collections import deque
from urllib.parse import urlsplit

from flask import (Blueprint, Response, abort, current_app, g, jsonify, render_template,
                   request)
from flask.json.provider import DefaultJSONProvider

from .. import store
from ..lan import lan_addresses  # noqa: F401 - the addresses serve --lan shows

SESSION_COOKIE = "fieldapp_device"
SESSION_MAX_AGE_S = 400 * 24 * 3600          # the longest Chromium keeps a cookie (from memory)
#: Letters and digits that cannot be mistaken for one another when read off a
#: screen and typed on a tablet (no 0/O, 1/I/L).
CODE_ALPHABET = "23456789ABCDEFGHJKMNPQRSTUVWXYZ"
CODE_LENGTH = 8                              # 31^8, about 8.5e11 codes
CODE_LIFETIME = dt.timedelta(hours=24)
#: Wrong pairing codes allowed within FAIL_WINDOW_S, per address and overall.
FAILS_PER_ADDRESS = 5
FAILS_OVERALL = 20
FAIL_WINDOW_S = 600
JSON_BODY_MAX = 1024 * 1024                  # a reading is a few hundred bytes
TOUCH_EVERY_S = 300                          # how often "last seen" is written
#: Devices one code may pair before a new code is needed (config
#: PAIRING_DEVICES_PER_CODE): a crew's tablets, not the whole hotspot.
DEVICES_PER_CODE = 10
#: A pairing not used for this long stops working (config PAIRING_IDLE_DAYS).
PAIRING_IDLE_DAYS = 90

#: Nothing from another origin, no inline script or style, no eval, no
#: plugins, no framing. (Browser tests wait with "() => expression" functions,
#: which need no eval.)
CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self'; img-src 'self' data:; "
    "object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'")
SECURITY_HEADERS = {
    "Content-Security-Policy": CONTENT_SECURITY_POLICY,
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "same-origin",
    "X-Frame-Options": "DENY",
    "Cross-Origin-Opener-Policy": "same-origin",
    "Cross-Origin-Resource-Policy": "same-origin",
    "Permissions-Policy": "camera=(), microphone=(), payment=(), usb=(), geolocation=(self)",
}
UNSAFE_METHODS = {"POST", "PUT", "PATCH", "DELETE"}
#: What an unpaired device may load: the pairing page and its two files.
#: The CA certificate carries no data (a public key and a name) and must be
#: installed before the https address can be trusted, so it is open too.
OPEN_PATHS = {("GET", "/pair"), ("POST", "/pair"), ("GET", "/static/pair.js"),
              ("GET", "/static/style.css"), ("GET", "/pair/ca.crt")}

bp = Blueprint("pairing", __name__)


# ------------------------------------------------------------ JSON reading

_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")


class _TooDeep(ValueError):
    pass


def _refuse_constant(name):
    raise ValueError(f"{name} is not a number in JSON")


def _parse_int(text: str):
    if len(text.lstrip("-")) > 300:
        raise ValueError("integer too long")
    return int(text)


class StrictJSONProvider(DefaultJSONProvider):
    """Flask's JSON, reading strictly: NaN/Infinity literals, integers of more
    than 300 digits and bodies nested too deeply are not JSON a page sends;
    they become a 400 like any unreadable body."""

    def loads(self, s, **kwargs):
        kwargs.setdefault("parse_constant", _refuse_constant)
        kwargs.setdefault("parse_int", _parse_int)
        try:
            data = super().loads(s, **kwargs)
        except RecursionError:
            raise _TooDeep("nested too deeply") from None
        text = s.decode("utf-8", "replace") if isinstance(s, (bytes, bytearray)) else s
        if _SURROGATE_ESCAPE.search(text):
            try:    # "\ud800" alone is JSON but not text: no database can store it
                json.dumps(data, ensure_ascii=False).encode("utf-8")
            except UnicodeEncodeError:
                raise ValueError("lone surrogate in a string") from None
        return data


# ------------------------------------------------------------ small helpers

def _is_loopback_ip(addr: str | None) -> bool:
    try:
        ip = ipaddress.ip_address((addr or "").split("%")[0])
    except ValueError:
        return False
    if isinstance(ip, ipaddress.IPv6Address) and ip.ipv4_mapped:
        ip = ip.ipv4_mapped
    return ip.is_loopback


def _host_name(host: str) -> str:
    """The name part of a Host header: 'localhost:8080' -> 'localhost'."""
    host = (host or "").strip().lower()
    if host.startswith("["):
        return host[1:host.find("]")] if "]" in host else host
    return host.rsplit(":", 1)[0] if host.count(":") == 1 else host


def _host_is_local(host: str) -> bool:
    name = _host_name(host)
    if name == "localhost" or name.endswith(".localhost"):
        return True
    if _is_loopback_ip(name):
        return True
    try:
        return name in {socket.gethostname().lower(), socket.getfqdn().lower()}
    except OSError:
        return False


def is_laptop() -> bool:
    """The request comes from the machine the server runs on, by a local name."""
    return _is_loopback_ip(request.remote_addr) and _host_is_local(request.host)


def _wants_json() -> bool:
    return (request.path.startswith("/api/") or request.path.endswith(".csv")
            or request.method in UNSAFE_METHODS or request.path.startswith("/pair/"))


def _refuse(status: int, message: str, field: str | None = None):
    if _wants_json():
        resp = jsonify(error=message, field=field)
    else:
        resp = Response(render_template("pair.html", mode="refused", message=message),
                        mimetype="text/html")
    resp.status_code = status
    return resp


def token_digest(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8", "replace")).hexdigest()


def normalize_code(text) -> str:
    """What a person typed -> the stored form: upper case, no spaces or dashes."""
    return "".join(c for c in str(text or "").upper() if c.isalnum())


def format_code(code: str) -> str:
    """K7QM4TXZ -> K7QM-4TXZ, easier to read aloud and type."""
    return code[:4] + "-" + code[4:] if len(code) == CODE_LENGTH else code


def _utc(delta: dt.timedelta = dt.timedelta(0)) -> str:
    return (dt.datetime.now(dt.timezone.utc) + delta).isoformat(timespec="seconds")


def new_code(conn) -> sqlite3.Row:
    """Make a fresh pairing code (revoking the previous one) and store it."""
    code = "".join(secrets.choice(CODE_ALPHABET) for _ in range(CODE_LENGTH))
    return store.insert_pairing_code(conn, code, _utc(CODE_LIFETIME))


def current_code(conn, create: bool = False) -> sqlite3.Row | None:
    """The code tablets can pair with now; with ``create`` a new one when
    none is valid."""
    rows = store.active_pairing_codes(conn, _utc())
    if rows:
        return rows[0]
    return new_code(conn) if create else None


class FailureLimiter:
    """Counts wrong pairing codes in a sliding window, per address and overall,
    in the log itself (``pairing_failures``), so a restart does not clear it.

    Throttle by address first: an address with ``per_address`` wrong codes in
    the window waits. Past the ``overall`` limit every address that has typed
    a wrong code at all waits too, but an address with no wrong code of its
    own is still heard: the tablet with the right code pairs, whatever others
    on the network send. Checks and counts run under one lock, so a parallel
    burst is counted one by one (waitress is one process with threads)."""

    def __init__(self, per_address=FAILS_PER_ADDRESS, overall=FAILS_OVERALL,
                 window_s=FAIL_WINDOW_S, clock=time.time):
        self.per_address, self.overall, self.window_s = per_address, overall, window_s
        self.clock = clock
        self.lock = threading.Lock()

    def retry_after(self, conn, addr: str) -> int:
        """Seconds this address must wait before a code is even looked at (0: now).
        Call with ``self.lock`` held."""
        now = self.clock()
        c = store.pairing_failure_counts(conn, addr, now - self.window_s)
        if c["address"] >= self.per_address or (c["overall"] >= self.overall
                                                and c["address"] > 0):
            oldest = c["address_oldest"] if c["address"] >= self.per_address \
                else max(c["address_oldest"], c["overall_oldest"])
            return max(1, int(oldest + self.window_s - now) + 1)
        return 0

    def fail(self, conn, addr: str) -> None:
        now = self.clock()
        store.add_pairing_failure(conn, addr, now, now - self.window_s)


def _limiter() -> FailureLimiter:
    return current_app.extensions["fieldapp_pairing_limiter"]


def binds_to_network(host: str) -> bool:
    """Listening on ``host`` lets other machines connect (anything but loopback)."""
    return not (host == "localhost" or _is_loopback_ip(host))


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
    conn = store.connect(app.config["DATABASE"], upgrade=False)
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


# ------------------------------------------------------------ request checks

def _origin_of(url: str) -> str | None:
    try:
        p = urlsplit(url)
    except ValueError:
        return None
    if not p.scheme or not p.netloc:
        return None
    return f"{p.scheme}://{p.netloc}".lower()


def csrf_problem() -> str | None:
    """Why an unsafe request is refused as cross-site, or None."""
    if request.method not in UNSAFE_METHODS:
        return None
    own = f"{request.scheme}://{request.host}".lower()
    site = request.headers.get("Sec-Fetch-Site")
    if site is not None and site not in ("same-origin", "none"):
        return "This request came from another site and was refused."
    origin = request.headers.get("Origin")
    if origin is not None:
        if origin.lower() != own:
            return "This request came from another site and was refused."
    else:
        referer = request.headers.get("Referer")
        if referer and _origin_of(referer) != own:
            return "This request came from another site and was refused."
    return None


def _check_request():
    cfg = current_app.config
    if not cfg.get("LAN") and not _host_is_local(request.host):
        return _refuse(403, "This server answers on this machine only (localhost). To share "
                            "the log with tablets, start it with serve --lan.")
    problem = csrf_problem()
    if problem:
        return _refuse(403, problem)
    if request.method in UNSAFE_METHODS:
        # A form on another site can POST a body of these types unasked, never JSON.
        # PUT, PATCH and DELETE cannot be sent across sites without consent at all.
        has_body = (request.content_length or 0) > 0 or "chunked" in \
            request.headers.get("Transfer-Encoding", "").lower()
        if (request.method == "POST" or has_body) and request.mimetype != "application/json":
            return _refuse(415, "Send the data as JSON (Content-Type: application/json).",
                           "body")
        if (request.content_length or 0) > JSON_BODY_MAX:
            return _refuse(413, "The request is too large.", "body")
    if not cfg.get("LAN"):
        return None
    if (request.method, request.path) in OPEN_PATHS:
        return None
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
    from .db import get_db
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


def safe_next(target) -> str:
    """A path on this server to return to after pairing, or "/".

    Read as a browser reads an address: tabs and line breaks are dropped
    (the URL standard strips them), a backslash counts as a slash; what is
    left must parse with no scheme and no host and start with one "/".
    The page's script checks again with the browser's own URL parser."""
    s = "".join(c for c in str(target or "") if c not in "\t\n\r").replace("\\", "/")
    if len(s) > 2000 or not s.startswith("/") or s.startswith("//"):
        return "/"
    try:
        p = urlsplit(s)
    except ValueError:
        return "/"
    if p.scheme or p.netloc or any(ord(c) < 32 for c in s):
        return "/"
    return s


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
    if _wants_json():
        resp = jsonify(error=msg, field=None, pair="/pair")
    else:
        resp = Response(render_template("pair.html", mode="pair", lan=True, paired=None,
                                        next=_return_path(), tls=_tls_for_tablet()),
                        mimetype="text/html")
    resp.status_code = 401
    resp.headers["WWW-Authenticate"] = 'FieldPairing realm="fieldapp"'
    return resp


def _add_headers(resp):
    for k, v in SECURITY_HEADERS.items():
        resp.headers.setdefault(k, v)
    if request.path.startswith("/api/") or request.path.startswith("/pair"):
        resp.headers["Cache-Control"] = "no-store"
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
    name = _host_name(request.host)
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
    from .db import get_db
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
        match = None
        for row in store.active_pairing_codes(db, _utc()):
            if hmac.compare_digest(row["code"].encode(), typed[:64].encode()):
                match = row
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
    from .db import get_db
    device = g.get("device")
    if device is not None:
        store.revoke_devices(get_db(), device["id"])
    resp = jsonify(ok=True)
    resp.delete_cookie(SESSION_COOKIE, path="/", samesite="Strict")
    return resp


def _admin_state() -> dict:
    from .db import get_db
    from .. import qr
    db = get_db()
    code = current_code(db)
    urls = current_app.config.get("LAN_URLS") or []
    shown = format_code(code["code"]) if code else None
    qrs = []
    if code:
        for u in urls:
            target = f"{u}/pair#{shown}"
            qrs.append({"url": target,
                        "svg": qr.to_svg(qr.encode(target, "M"), label=f"QR code of {target}",
                                         px=240)})
    secure = current_app.config.get("LAN_HTTPS_URLS") or []
    if code:
        for u in secure:
            target = f"{u}/pair#{shown}"
            qrs.insert(0, {"url": target, "secure": True,
                           "svg": qr.to_svg(qr.encode(target, "M"),
                                            label=f"QR code of {target}", px=240)})
    ca_qrs = [{"url": f"{u}/pair/ca.crt",
               "svg": qr.to_svg(qr.encode(f"{u}/pair/ca.crt", "M"),
                                label=f"QR code of {u}/pair/ca.crt", px=200)}
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
    from .db import get_db
    new_code(get_db())
    st = _admin_state()
    return jsonify(code=st["code"], expires_at=st["expires_at"]), 201


@bp.post("/pair/codes/revoke")
def revoke_codes():
    _laptop_only()
    from .db import get_db
    return jsonify(revoked=store.revoke_pairing_codes(get_db()))


@bp.post("/pair/devices/<int:device_id>/revoke")
def revoke_device(device_id):
    _laptop_only()
    from .db import get_db
    return jsonify(revoked=store.revoke_devices(get_db(), device_id))


@bp.post("/pair/devices/revoke")
def revoke_all_devices():
    _laptop_only()
    from .db import get_db
    return jsonify(revoked=store.revoke_devices(get_db()))


# ------------------------------------------------------------ registration

def register_security(app) -> None:
    """Install the checks, headers, JSON reader and pairing routes on ``app``."""
    app.config.setdefault("LAN", False)
    app.config.setdefault("LAN_URLS", [])
    app.json = StrictJSONProvider(app)
    app.extensions["fieldapp_pairing_limiter"] = FailureLimiter()
    app.before_request(_check_request)
    app.after_request(_add_headers)
    app.register_blueprint(bp)

    @app.errorhandler(403)
    def _forbidden(e):
        return _refuse(403, "This page is for the laptop the server runs on.")

    @app.errorhandler(415)
    def _unsupported(e):
        return _refuse(415, "Send the data as JSON (Content-Type: application/json).", "body")

    @app.errorhandler(_TooDeep)
    @app.errorhandler(RecursionError)
    def _too_deep(e):
        return _refuse(400, "The request could not be read; send JSON.", "body")

    @app.errorhandler(UnicodeError)
    def _not_text(e):
        return _refuse(400, "The request holds text that is not valid Unicode.")

    @app.errorhandler(OverflowError)
    def _overflow(e):
        return _refuse(400, "A number in the request is too large; check the digits.")
