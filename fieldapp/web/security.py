"""What every request must show and every response says about itself.

``init_app(app)`` adds, to every request and response:

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
* Headers: a Content-Security-Policy that allows nothing from another origin
  and no inline script, X-Content-Type-Options, Referrer-Policy,
  X-Frame-Options and frame-ancestors, Cross-Origin-Opener/Resource-Policy,
  Permissions-Policy, and no caching of API answers.
* ``safe_next``: an address to go back to (after pairing) stays on this
  server, read as a browser reads it (no open redirect).
* A JSON reader that refuses NaN and Infinity literals and absurdly long
  integers and turns a too-deeply nested body into a plain 400, so no hostile
  body reaches the code as something it cannot handle.

Who may use a log shared on the network (``serve --lan``) is ``pairing.py``;
the wrong-code limiter is ``limiter.py``; the error answers are ``errors.py``.
"""
from __future__ import annotations

import ipaddress
import json
import re
import socket
from urllib.parse import urlsplit

from flask import Response, current_app, jsonify, render_template, request
from flask.json.provider import DefaultJSONProvider

JSON_BODY_MAX = 1024 * 1024                  # a reading is a few hundred bytes

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


# ------------------------------------------------------------ JSON reading

_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")


class TooDeep(ValueError):
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
            raise TooDeep("nested too deeply") from None
        text = s.decode("utf-8", "replace") if isinstance(s, (bytes, bytearray)) else s
        if _SURROGATE_ESCAPE.search(text):
            try:    # "\ud800" alone is JSON but not text: no database can store it
                json.dumps(data, ensure_ascii=False).encode("utf-8")
            except UnicodeEncodeError:
                raise ValueError("lone surrogate in a string") from None
        return data


# ------------------------------------------------------------ hosts and answers

def is_loopback_ip(addr: str | None) -> bool:
    try:
        ip = ipaddress.ip_address((addr or "").split("%")[0])
    except ValueError:
        return False
    if isinstance(ip, ipaddress.IPv6Address) and ip.ipv4_mapped:
        ip = ip.ipv4_mapped
    return ip.is_loopback


def host_name(host: str) -> str:
    """The name part of a Host header: 'localhost:8080' -> 'localhost'."""
    host = (host or "").strip().lower()
    if host.startswith("["):
        return host[1:host.find("]")] if "]" in host else host
    return host.rsplit(":", 1)[0] if host.count(":") == 1 else host


def host_is_local(host: str) -> bool:
    name = host_name(host)
    if name == "localhost" or name.endswith(".localhost"):
        return True
    if is_loopback_ip(name):
        return True
    try:
        return name in {socket.gethostname().lower(), socket.getfqdn().lower()}
    except OSError:
        return False


def is_laptop() -> bool:
    """The request comes from the machine the server runs on, by a local name."""
    return is_loopback_ip(request.remote_addr) and host_is_local(request.host)


def binds_to_network(host: str) -> bool:
    """Listening on ``host`` lets other machines connect (anything but loopback)."""
    return not (host == "localhost" or is_loopback_ip(host))


def wants_json() -> bool:
    return (request.path.startswith("/api/") or request.path.endswith(".csv")
            or request.method in UNSAFE_METHODS or request.path.startswith("/pair/"))


def refuse(status: int, message: str, field: str | None = None):
    if wants_json():
        resp = jsonify(error=message, field=field)
    else:
        resp = Response(render_template("pair.html", mode="refused", message=message),
                        mimetype="text/html")
    resp.status_code = status
    return resp


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


def check_request():
    """Host check, cross-site check and the body's type and size, before any view runs."""
    cfg = current_app.config
    if not cfg.get("LAN") and not host_is_local(request.host):
        return refuse(403, "This server answers on this machine only (localhost). To share "
                           "the log with tablets, start it with serve --lan.")
    problem = csrf_problem()
    if problem:
        return refuse(403, problem)
    if request.method in UNSAFE_METHODS:
        # A form on another site can POST a body of these types unasked, never JSON.
        # PUT, PATCH and DELETE cannot be sent across sites without consent at all.
        has_body = (request.content_length or 0) > 0 or "chunked" in \
            request.headers.get("Transfer-Encoding", "").lower()
        if (request.method == "POST" or has_body) and request.mimetype != "application/json":
            return refuse(415, "Send the data as JSON (Content-Type: application/json).",
                          "body")
        if (request.content_length or 0) > JSON_BODY_MAX:
            return refuse(413, "The request is too large.", "body")
    return None


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


def _add_headers(resp):
    for k, v in SECURITY_HEADERS.items():
        resp.headers.setdefault(k, v)
    if request.path.startswith("/api/") or request.path.startswith("/pair"):
        resp.headers["Cache-Control"] = "no-store"
    return resp


def init_app(app) -> None:
    """Install the strict JSON reader, the request checks and the headers on ``app``."""
    app.json = StrictJSONProvider(app)
    app.before_request(check_request)
    app.after_request(_add_headers)
