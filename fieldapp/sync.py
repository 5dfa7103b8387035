"""Device <-> office exchange: pairing, push, pull (DEVELOPERS.md, "Sync protocol").

A device (a laptop's or tablet's log) pairs once with an office server (the
same application, serving the whole team's log) with a pairing code shown
at the office, and keeps the office's address and its device token in its
own log (``sync_settings``). A sync then:

1. pushes what the office lacks, in batches (``store.push_batch``): site
   settings changes, meters, calibration checks, readings (every version),
   voids, flag acknowledgements. The push cursor advances only once the
   office confirms a batch, which it applies in one transaction; a batch
   sent again after a dropped connection changes nothing there (by uuid).
2. pulls, per followed site, what colleagues recorded there, from that
   site's own cursor, each batch applied with its cursor in one transaction
   and marked as received so it is never pushed back.

The token travels only over https, or plain http to this machine itself
(127.0.0.1, ::1, localhost): on any other network a listener could copy it.
TLS is verified (the system's CAs, or ``ca_file`` for an office's own CA).
"""
from __future__ import annotations

import http.client
import ipaddress
import json
import ssl
import time
from urllib.parse import urlsplit

from . import store

#: Readings per batch at most, and the JSON size a batch stays under (the
#: server refuses bodies over 1 MiB: web/security.JSON_BODY_MAX).
BATCH_ITEMS = 500
BATCH_BYTES = 700_000
TIMEOUT_S = 60
USER_AGENT = "fieldapp-sync"


class SyncError(Exception):
    """A sync that could not go on; ``message`` says why in plain words.
    Nothing already stored is lost: cursors advance only on confirmation."""

    def __init__(self, message: str, status: int | None = None, retry: bool = False,
                 bad_input: bool = False):
        super().__init__(message)
        self.message = message
        self.status = status
        self.retry = retry       # a dropped connection: the next sync carries on
        self.bad_input = bad_input   # what the person typed cannot be used (exit 2)


# ---------------------------------------------------------------- addresses

def is_local_host(host: str) -> bool:
    """This machine itself: a loopback address or localhost."""
    host = (host or "").strip("[]").lower()
    if host == "localhost" or host.endswith(".localhost"):
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def check_office_url(url: str) -> str:
    """The office's base address, cleaned; refuses what would expose the token."""
    url = str(url or "").strip().rstrip("/")
    try:
        p = urlsplit(url)
        host = p.hostname
        p.port          # noqa: B018 - raises on a port that is not a number
    except ValueError:
        raise SyncError(f"{url!r} is not an address like https://office.example:8443.",
                        bad_input=True) from None
    if p.scheme not in ("http", "https") or not host:
        raise SyncError(f"{url!r} is not an address like https://office.example:8443.",
                        bad_input=True)
    if p.username or p.password or p.query or p.fragment:
        raise SyncError("Give the office's address without a user name, query or #part.",
                        bad_input=True)
    if p.scheme == "http" and not is_local_host(host):
        raise SyncError(
            f"Refused: {host} is reached over plain http, so anyone on that network could "
            "copy this device's token. Use the office's https address (a TLS reverse proxy, "
            "or serve --lan's https port with --ca-file); plain http is only for this "
            "machine itself (127.0.0.1, localhost).", bad_input=True)
    return url


# ---------------------------------------------------------------- transport

class HttpTransport:
    """JSON over one kept-alive HTTP(S) connection to the office."""

    def __init__(self, base_url: str, ca_file: str | None = None, timeout: float = TIMEOUT_S):
        self.base = check_office_url(base_url)
        p = urlsplit(self.base)
        self.scheme, self.host, self.port = p.scheme, p.hostname, p.port
        self.prefix = p.path.rstrip("/")
        self.timeout = timeout
        self.context = None
        if self.scheme == "https":
            try:
                self.context = ssl.create_default_context()
                if ca_file:
                    self.context.load_verify_locations(cadata=_ca_data(ca_file))
            except (OSError, ssl.SSLError, ValueError) as e:
                raise SyncError(f"The office's certificate file {ca_file} cannot be used "
                                f"({e}).") from None
        self.conn = None

    def _connect(self):
        if self.conn is None:
            if self.scheme == "https":
                self.conn = http.client.HTTPSConnection(self.host, self.port or 443,
                                                        timeout=self.timeout,
                                                        context=self.context)
            else:
                self.conn = http.client.HTTPConnection(self.host, self.port or 80,
                                                       timeout=self.timeout)
        return self.conn

    def close(self):
        if self.conn is not None:
            self.conn.close()
            self.conn = None

    def post(self, path: str, body: dict, token: str | None = None) -> tuple[int, dict]:
        data = json.dumps(body, ensure_ascii=False, separators=(",", ":")).encode("utf-8")
        headers = {"Content-Type": "application/json", "User-Agent": USER_AGENT,
                   "Accept": "application/json"}
        if token:
            headers["Authorization"] = f"Bearer {token}"
        try:
            conn = self._connect()
            conn.request("POST", self.prefix + path, body=data, headers=headers)
            resp = conn.getresponse()
            raw = resp.read()
            status = resp.status
        except ssl.SSLCertVerificationError as e:
            self.close()
            raise SyncError(f"The office's certificate could not be verified ({e.verify_message}"
                            "). If the office uses its own certificate authority, give its "
                            "certificate with --ca-file.") from None
        except (OSError, http.client.HTTPException) as e:
            self.close()
            raise SyncError(f"The connection to the office was lost ({e.__class__.__name__}: "
                            f"{e}). Nothing is lost; sync again to carry on.",
                            retry=True) from None
        try:
            answer = json.loads(raw.decode("utf-8")) if raw else {}
        except ValueError:
            answer = {"error": f"The office answered something that is not JSON (HTTP "
                               f"{status}); is {self.base} a fieldapp office?"}
        if not isinstance(answer, dict):
            answer = {"error": "The office answered something unexpected."}
        return status, answer


def _ca_data(path: str):
    """A CA certificate file, PEM or DER, as ssl's cadata."""
    with open(path, "rb") as f:
        raw = f.read()
    if b"-----BEGIN" in raw:
        return raw.decode("ascii", "replace")
    return raw


def _check(status: int, answer: dict) -> dict:
    if 200 <= status < 300:
        return answer
    msg = answer.get("error") or f"The office refused the request (HTTP {status})."
    raise SyncError(msg, status=status, retry=status in (502, 503, 504))


# ---------------------------------------------------------------- pairing

def pair(conn, transport, code: str, name: str = "", person: str = "") -> dict:
    """Pair this log with the office once: the office checks the code and
    answers with a device token, kept in this log with the office's address."""
    name = store.clean_person(name)
    person = store.clean_person(person)
    me = store.log_uuid(conn)
    status, answer = transport.post("/api/sync/pair", {"code": code, "name": name,
                                                       "person": person, "log_uuid": me})
    answer = _check(status, answer)
    token = answer.get("token")
    if not isinstance(token, str) or not token:
        raise SyncError("The office did not send a device token.")
    with store.transaction(conn):
        store.set_setting(conn, store.sync.OFFICE_URL, transport.base)
        store.set_setting(conn, store.sync.OFFICE_TOKEN, token)
        store.set_setting(conn, store.sync.PUSH_CURSOR, "{}")
        if name:
            store.set_setting(conn, store.sync.DEVICE_NAME, name)
        if person:
            store.set_setting(conn, store.sync.PERSON, person)
    return answer


def settings(conn) -> dict:
    s = store.sync
    return {"office_url": store.get_setting(conn, s.OFFICE_URL),
            "paired": bool(store.get_setting(conn, s.OFFICE_TOKEN)),
            "device_name": store.get_setting(conn, s.DEVICE_NAME) or "",
            "person": store.get_setting(conn, s.PERSON) or "",
            "ca_file": store.get_setting(conn, s.OFFICE_CA_FILE),
            "follows": [f["site_name"] for f in store.list_follows(conn)]}


# ---------------------------------------------------------------- sync

class Progress:
    """What a sync did so far; ``on_change`` is called after every batch."""

    def __init__(self, on_change=None):
        self.on_change = on_change
        self.batches_sent = self.readings_sent = self.readings_new = 0
        self.batches_received = self.readings_received = 0
        self.review_office = self.review_here = 0
        self.refused: list[str] = []
        self.stage = "starting"

    def as_dict(self) -> dict:
        return {"stage": self.stage, "batches_sent": self.batches_sent,
                "readings_sent": self.readings_sent, "readings_new_at_office": self.readings_new,
                "batches_received": self.batches_received,
                "readings_received": self.readings_received,
                # one pair is marked at the office on push and here on pull: count it once
                "marked_for_review": max(self.review_office, self.review_here),
                "refused": list(self.refused)}

    def changed(self, stage: str | None = None):
        if stage:
            self.stage = stage
        if self.on_change:
            self.on_change(self.as_dict())


def sync(conn, transport, progress: Progress | None = None, max_items: int = BATCH_ITEMS,
         max_bytes: int = BATCH_BYTES, person: str | None = None) -> dict:
    """Push everything the office lacks, then pull the followed sites. Raises
    SyncError on a refusal or a dropped connection; what was confirmed stays
    confirmed, and the next sync carries on from there."""
    s = store.sync
    token = store.get_setting(conn, s.OFFICE_TOKEN)
    if not token:
        raise SyncError("This device is not paired with an office yet: run fieldapp sync URL "
                        "--code CODE with the code the office shows.")
    progress = progress or Progress()
    me = store.log_uuid(conn)
    hello = {"log_uuid": me, "person": person or store.get_setting(conn, s.PERSON) or None,
             "name": store.get_setting(conn, s.DEVICE_NAME) or None}
    progress.changed("sending")
    while True:
        cursor = json.loads(store.get_setting(conn, s.PUSH_CURSOR) or "{}")
        items, new_cursor, more = store.push_batch(conn, cursor, max_items, max_bytes)
        if store.is_empty(items):
            if new_cursor != cursor:
                store.set_setting(conn, s.PUSH_CURSOR, json.dumps(new_cursor))
            break
        status, answer = transport.post("/api/sync/push", {**hello, "items": items}, token)
        answer = _check(status, answer)
        store.set_setting(conn, s.PUSH_CURSOR, json.dumps(new_cursor))   # confirmed
        got = answer.get("applied", {}).get("readings", {})
        progress.batches_sent += 1
        progress.readings_sent += len(items["readings"])
        progress.readings_new += int(got.get("new", 0))
        progress.review_office += int(got.get("review", 0))
        progress.refused += list(got.get("refused", []))[:100]
        progress.changed()
        if not more:
            break
    progress.changed("receiving")
    for f in store.list_follows(conn):
        cursor = f["cursor"]
        while True:
            status, answer = transport.post("/api/sync/pull", {
                **hello, "site": f["site_name"], "cursor": cursor, "max_items": max_items}, token)
            batch = _check(status, answer)
            counts = store.apply_pull(conn, f["site_name"], batch)
            cursor = batch.get("cursor") or cursor
            progress.batches_received += 1
            progress.readings_received += counts["readings"]
            progress.review_here += counts["review"]
            progress.changed()
            if not batch.get("more"):
                break
    progress.changed("done")
    return progress.as_dict()


def sync_until_done(conn, transport, attempts: int = 5, pause_s: float = 1.0, **kw) -> dict:
    """Sync, carrying on after a dropped connection (at most ``attempts`` tries)."""
    for n in range(attempts):
        try:
            return sync(conn, transport, **kw)
        except SyncError as e:
            if not e.retry or n == attempts - 1:
                raise
            time.sleep(pause_s)
    raise AssertionError("unreachable")


def describe(result: dict) -> str:
    """A finished sync in plain words."""
    parts = [f"Sent {result['readings_sent']} reading version(s) in {result['batches_sent']} "
             f"batch(es); {result['readings_new_at_office']} were new at the office."]
    parts.append(f"Received {result['readings_received']} reading(s) of the sites this device "
                 "follows.")
    if result.get("marked_for_review"):
        parts.append(f"{result['marked_for_review']} correction(s) were made twice to the same "
                     "reading on two devices: both are kept and marked for review on the site's "
                     "page.")
    if result.get("refused"):
        parts.append(f"{len(result['refused'])} reading id(s) are used at the office for a "
                     "different reading and were not sent; they stay in this log.")
    return " ".join(parts)


__all__ = ["SyncError", "HttpTransport", "check_office_url", "pair", "sync", "sync_until_done",
           "describe", "settings", "Progress"]
