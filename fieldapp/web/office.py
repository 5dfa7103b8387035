"""The office and the devices that sync with it (``fieldapp/sync.py``).

At the office (the same application, serving the team's log):

* ``POST /api/sync/pair``: a device trades the pairing code the office shows
  (``/pair/devices``, ``serve --lan``'s terminal, ``fieldapp office code``)
  for a device token; only the token's SHA-256 is kept (``office_devices``).
  Wrong codes count against the pairing limiter like a tablet's.
* ``POST /api/sync/push`` and ``POST /api/sync/pull``: the exchange, with
  ``Authorization: Bearer TOKEN``; a revoked or unknown token answers 401.
  These paths skip the LAN cookie gate: the token is their pairing.
* ``/office``: every site across devices with its latest state and who sent
  it last, the scouts' activity, the devices paired for sync (revocable from
  the office machine itself); ``/office/sites/<id>``: a site's readings by
  person or device, and the corrections marked for review.

On a device (a laptop's page): ``/send`` pairs with an office, chooses the
sites to follow, and sends to the office in the background with progress.
"""
from __future__ import annotations

import secrets
import threading

from flask import Blueprint, abort, current_app, jsonify, render_template, request

from .. import store
from ..lazy import Later
from .db import get_db
from .helpers import json_body, site_by_id
from .pairing import (DEVICES_PER_CODE, _limiter, current_code, format_code, matching_code,
                      new_code, normalize_code, token_digest)
from .security import is_laptop

syncmod = Later("fieldapp.sync")      # http.client, ssl: at the first sync, not at the start

bp = Blueprint("office", __name__)

#: At most this many items per pull batch (a device may ask for fewer).
PULL_MAX = 500


def _refuse(status: int, message: str, field: str | None = None):
    resp = jsonify(error=message, field=field)
    resp.status_code = status
    if status == 401:
        resp.headers["WWW-Authenticate"] = 'Bearer realm="fieldapp-office"'
    return resp


# ------------------------------------------------------------ the exchange

def _device_from_token():
    auth = request.headers.get("Authorization", "")
    if not auth.lower().startswith("bearer "):
        return None, _refuse(401, "This device is not paired with the office: pair it with "
                                  "the code the office shows (fieldapp sync URL --code CODE).")
    token = auth[7:].strip()
    if not token or len(token) > 200:
        return None, _refuse(401, "The device token is not valid; pair the device again.")
    db = get_db()
    device = store.office_device_by_token(db, token_digest(token))
    if device is None:
        return None, _refuse(401, "The office does not know this device's token; pair the "
                                  "device again with the code the office shows.")
    if device["revoked_at"]:
        return None, _refuse(401, f"This device was unpaired at the office on "
                                  f"{device['revoked_at'][:16].replace('T', ' ')} UTC. Nothing "
                                  "was sent; ask the office for a new code and pair again.")
    return device, None


def _hello(body: dict) -> tuple[str | None, str | None]:
    person = body.get("person")
    name = body.get("name")
    person = store.clean_person(person) or None if isinstance(person, str) else None
    name = store.clean_person(name) or None if isinstance(name, str) else None
    return person, name


@bp.post("/api/sync/pair")
def sync_pair():
    body = json_body()
    addr = request.remote_addr or ""
    typed = normalize_code(body.get("code"))
    log = body.get("log_uuid")
    if not isinstance(log, str) or not (8 <= len(log) <= 80):
        return _refuse(400, "The device sent no log identity.", "log_uuid")
    if not typed:
        return _refuse(400, "Type the code the office shows.", "code")
    person, name = _hello(body)
    db = get_db()
    limiter = _limiter()
    with limiter.lock:
        wait = limiter.retry_after(db, addr)
        if wait:
            resp = _refuse(429, f"Too many wrong codes from this address. Wait "
                                f"{max(1, round(wait / 60))} minute(s), then type the code the "
                                "office shows now.", "code")
            resp.headers["Retry-After"] = str(wait)
            return resp
        match = matching_code(db, typed)
        if match is None:
            limiter.fail(db, addr)
            return _refuse(403, "That code is not valid. Type the code the office shows now "
                                "(codes expire after a day or when renewed).", "code")
        limit = current_app.config.get("PAIRING_DEVICES_PER_CODE", DEVICES_PER_CODE)
        used = store.devices_paired_with(db, match["id"]) + \
            store.count_office_devices_of_code(db, match["id"])
        if used >= limit:
            return _refuse(409, f"This code has paired {limit} devices already; make a new "
                                "code at the office.", "code")
    token = secrets.token_urlsafe(32)
    device = store.insert_office_device(db, token_digest(token), log, name or "", person or "",
                                        addr, match["id"])
    return jsonify(ok=True, token=token, device_id=device["id"],
                   office_log=store.log_uuid(db)), 201


@bp.post("/api/sync/push")
def sync_push():
    device, refusal = _device_from_token()
    if refusal:
        return refusal
    body = json_body()
    person, name = _hello(body)
    db = get_db()
    applied = store.apply_push(db, body.get("items"), device)
    store.touch_office_device(db, device["id"], request.remote_addr or "", person, name,
                              applied["readings"]["new"], synced=True)
    return jsonify(ok=True, applied=applied)


@bp.post("/api/sync/pull")
def sync_pull():
    device, refusal = _device_from_token()
    if refusal:
        return refusal
    body = json_body()
    site = body.get("site")
    if not isinstance(site, str) or not site.strip():
        return _refuse(400, "Say which site to pull.", "site")
    cursor = body.get("cursor") if isinstance(body.get("cursor"), dict) else {}
    for k, v in cursor.items():
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            return _refuse(400, "The pull cursor is not valid.", "cursor")
    n = body.get("max_items")
    n = n if isinstance(n, int) and not isinstance(n, bool) and 1 <= n <= PULL_MAX else PULL_MAX
    db = get_db()
    out = store.pull_site(db, store.clean_site_name(site), cursor, device["log_uuid"], n)
    store.touch_office_device(db, device["id"], request.remote_addr or "")
    return jsonify(out)


# ------------------------------------------------------------ office views

def _laptop_only():
    if not is_laptop():
        abort(403)


@bp.get("/office")
def office_page():
    db = get_db()
    laptop = is_laptop()
    code = current_code(db) if laptop else None
    return render_template("office.html", sites=store.sites_across_devices(db),
                           scouts=store.scout_activity(db),
                           devices=store.list_office_devices(db), laptop=laptop,
                           code=format_code(code["code"]) if code else None,
                           code_expires=code["expires_at"] if code else None)


@bp.get("/office/sites/<int:site_id>")
def office_site(site_id):
    db = get_db()
    site = site_by_id(db, site_id)
    person = request.args.get("person") or None
    device = request.args.get("device") or None
    people, devices = store.people_and_devices(db, site_id)
    return render_template("office_site.html", site=site, person=person, device=device,
                           people=people, devices=devices,
                           readings=store.site_readings_by(db, site_id, person, device),
                           review=store.review_pairs(db, site_id))


@bp.get("/api/office/activity")
def office_activity():
    db = get_db()
    return jsonify(scouts=store.scout_activity(db),
                   devices=[{k: d[k] for k in ("id", "name", "person", "paired_at",
                                               "last_seen_at", "last_sync_at", "readings_in",
                                               "revoked_at")}
                            for d in store.list_office_devices(db)])


@bp.post("/office/code")
def office_new_code():
    _laptop_only()
    json_body()                  # a JSON object, as every change takes (web/security.py)
    code = new_code(get_db())
    return jsonify(code=format_code(code["code"]), expires_at=code["expires_at"]), 201


@bp.post("/office/devices/<int:device_id>/revoke")
def office_revoke(device_id):
    _laptop_only()
    json_body()
    return jsonify(revoked=store.revoke_office_device(get_db(), device_id))


# ------------------------------------------------------------ the device's page

class SendJob:
    """The one sync this server runs in the background, and how far it got."""

    def __init__(self):
        self.lock = threading.Lock()
        self.thread: threading.Thread | None = None
        self.state: dict = {"running": False, "outcome": None, "ok": None, "progress": None}

    def snapshot(self) -> dict:
        with self.lock:
            return {**self.state, "progress": dict(self.state["progress"] or {})}

    def start(self, db_path: str, transport_factory) -> bool:
        with self.lock:
            if self.state["running"]:
                return False
            self.state = {"running": True, "outcome": None, "ok": None,
                          "progress": {"stage": "starting"}}
            self.thread = threading.Thread(target=self._run, args=(db_path, transport_factory),
                                           name="fieldapp-send", daemon=True)
            self.thread.start()
            return True

    def _set(self, progress: dict):
        with self.lock:
            self.state["progress"] = progress

    def _run(self, db_path, transport_factory):
        conn = transport = None
        ok, outcome = False, ""
        try:
            conn = store.connect(db_path, upgrade=False)
            st = syncmod.settings(conn)
            transport = transport_factory(st["office_url"], st["ca_file"])
            result = syncmod.sync_until_done(conn, transport, attempts=3,
                                             progress=syncmod.Progress(self._set))
            ok, outcome = True, syncmod.describe(result)
        except syncmod.SyncError as e:
            outcome = e.message
        except store.StoreError as e:
            outcome = e.message
        except Exception as e:       # the page must hear of it in words, not hang
            current_app_logger().exception("sync failed")
            outcome = f"The sync stopped on an unexpected problem ({e.__class__.__name__}). " \
                      "Nothing confirmed is lost; try again."
        finally:
            if transport is not None:
                transport.close()
            if conn is not None:
                conn.close()
            with self.lock:
                self.state.update(running=False, ok=ok, outcome=outcome)


def current_app_logger():
    import logging
    return logging.getLogger("fieldapp.sync")


def _job() -> SendJob:
    return current_app.extensions["fieldapp_send_job"]


def _transport_factory():
    return current_app.config.get("SYNC_TRANSPORT") or (
        lambda url, ca: syncmod.HttpTransport(url, ca_file=ca))


def _send_state() -> dict:
    db = get_db()
    st = syncmod.settings(db)
    st.pop("ca_file", None)
    return {**st, "job": _job().snapshot(),
            "sites": [s["name"] for s in store.list_sites(db)]}


@bp.get("/send")
def send_page():
    return render_template("send.html", state=_send_state())


@bp.get("/api/send/state")
def send_state():
    return jsonify(_send_state())


@bp.post("/api/send/pair")
def send_pair():
    """Pair this log with an office: its address and the code it shows."""
    body = json_body()
    url = body.get("url")
    if not isinstance(url, str) or not url.strip():
        return _refuse(400, "Type the office's address, e.g. https://office.example:8443.",
                       "url")
    try:
        transport = _transport_factory()(url.strip(), None)
    except syncmod.SyncError as e:
        return _refuse(400, e.message, "url")
    try:
        syncmod.pair(get_db(), transport, str(body.get("code") or ""),
                     str(body.get("name") or ""), str(body.get("person") or ""))
    except syncmod.SyncError as e:
        return _refuse(e.status if e.status in (400, 401, 403, 409, 429) else 502, e.message,
                       "code" if e.status in (403, 409, 429) else "url")
    finally:
        transport.close()
    return jsonify(_send_state())


@bp.post("/api/send/settings")
def send_settings():
    """Who takes the readings on this device, and its name at the office."""
    body = json_body()
    db = get_db()
    changes = {}
    for key, setting in (("person", store.sync.PERSON), ("name", store.sync.DEVICE_NAME)):
        if key in body:
            v = body[key]
            if v is not None and not isinstance(v, str):
                return _refuse(400, f"{key} must be text.", key)
            try:
                changes[setting] = store.clean_person(v) or None
            except store.StoreError as e:
                return _refuse(400, e.message, key)
    with store.transaction(db):          # both names or neither
        for setting, v in changes.items():
            store.set_setting(db, setting, v)
    return jsonify(_send_state())


@bp.post("/api/send/follow")
def send_follow():
    body = json_body()
    db = get_db()
    site = body.get("site")
    if not isinstance(site, str):
        return _refuse(400, "Type a site name, e.g. Block 3.", "site")
    if body.get("follow", True):
        store.follow_site(db, site)
    else:
        store.unfollow_site(db, site)
    return jsonify(_send_state())


@bp.post("/api/send/start")
def send_start():
    json_body()
    db = get_db()
    st = syncmod.settings(db)
    if not st["paired"]:
        return _refuse(409, "This device is not paired with an office yet: type the office's "
                            "address and the code it shows first.")
    started = _job().start(current_app.config["DATABASE"], _transport_factory())
    return jsonify(started=started, job=_job().snapshot()), 202


def init_app(app) -> None:
    app.extensions["fieldapp_send_job"] = SendJob()
    app.register_blueprint(bp)
