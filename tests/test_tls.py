"""https for tablets (serve --lan): the log folder's certificate authority,
the server certificate and its renewal, pairing over https, and the issue's
case end to end: a tablet that trusts the CA keeps working through a reload
while the laptop is away, and its readings arrive once.

The certificate checks use Python's own ssl module (OpenSSL's verifier) and,
in the browser test, Chromium's verifier with the CA in an NSS database the
way Linux Chromium trusts a CA: two verifiers outside fieldapp."""
from __future__ import annotations

import datetime as dt
import http.client
import os
import shutil
import socket
import ssl
import stat
import subprocess
from pathlib import Path

import pytest

from conftest import CHROMIUM, CHROMIUM_ARGS, PHONE, TABLET, ServerProcess, free_port

TEST_NAME = "fieldlaptop.test"       # a tablet's name for the laptop, mapped to 127.0.0.1


# ------------------------------------------------------------ helpers

def _verified_peer(port: int, ca_file: Path, server_hostname: str) -> dict:
    """TLS handshake with 127.0.0.1:port, verifying the chain against the CA
    and the name against the certificate (Python's ssl; OpenSSL verifies)."""
    ctx = ssl.create_default_context(cafile=str(ca_file))
    with socket.create_connection(("127.0.0.1", port), timeout=5) as raw:
        with ctx.wrap_socket(raw, server_hostname=server_hostname) as s:
            return s.getpeercert()


def _https_get(port: int, ca_file: Path, path: str, host: str = TEST_NAME, cookie=None):
    ctx = ssl.create_default_context(cafile=str(ca_file))
    ctx.check_hostname = False        # the name is checked by _verified_peer; here: the Host
    conn = http.client.HTTPSConnection("127.0.0.1", port, context=ctx, timeout=10)
    headers = {"Host": f"{host}:{port}"}
    if cookie:
        headers["Cookie"] = cookie
    conn.request("GET", path, headers=headers)
    r = conn.getresponse()
    body = r.read()
    conn.close()
    return r.status, dict(r.getheaders()), body


@pytest.fixture
def https_app(tmp_path):
    """The app with its https server running in this process on 127.0.0.1."""
    from fieldapp import create_app, tls
    data = tmp_path / "data"
    app = create_app({"TESTING": True, "DATA_DIR": str(data), "LAN": True})
    h = tls.start_https(app, "127.0.0.1", free_port(), data, [TEST_NAME])
    assert h.server is not None
    yield app, h, data
    h.stop()


# ------------------------------------------------------------ the authority

def test_the_ca_is_made_once_per_log_folder_and_its_key_is_for_its_owner_only(tmp_path):
    from fieldapp import tls
    cert, _ = tls.ensure_ca(tmp_path)
    d = tmp_path / "tls"
    key_mode = stat.S_IMODE(os.stat(d / "ca.key").st_mode)
    assert key_mode == 0o600, oct(key_mode)
    assert stat.S_IMODE(os.stat(d).st_mode) & 0o077 == 0          # the folder too
    # a second start keeps the same CA: a tablet installs it once
    again, _ = tls.ensure_ca(tmp_path)
    assert again.fingerprint(again.signature_hash_algorithm) == \
        cert.fingerprint(cert.signature_hash_algorithm)
    fp = tls.ca_fingerprint(tmp_path)
    assert fp == tls.ca_fingerprint(tmp_path)
    # the fingerprint is SHA-256 of the DER that is served (what Android and iPad show)
    import hashlib
    assert fp.replace(":", "").lower() == hashlib.sha256(tls.ca_der(tmp_path)).hexdigest()
    # it is a CA (basic constraints, key cert sign), as tablets require before installing
    from cryptography import x509
    bc = cert.extensions.get_extension_for_class(x509.BasicConstraints)
    assert bc.critical and bc.value.ca
    assert cert.extensions.get_extension_for_class(x509.KeyUsage).value.key_cert_sign
    # the server key is private as well
    tls.ensure_server_cert(tmp_path, ["localhost"], ["127.0.0.1"])
    assert stat.S_IMODE(os.stat(d / "server.key").st_mode) == 0o600


def test_the_server_certificate_names_the_laptop_and_verifies(https_app):
    from fieldapp import tls
    app, h, data = https_app
    dns, ips = tls.laptop_names([TEST_NAME])
    assert "localhost" in dns and TEST_NAME in dns and "127.0.0.1" in ips
    host = socket.gethostname().lower()
    assert host in dns
    from fieldapp.lan import lan_addresses
    assert set(lan_addresses()) <= set(ips)
    ca = data / "tls" / "ca.crt"
    for name in (TEST_NAME, "localhost", "127.0.0.1"):           # OpenSSL checks chain and name
        peer = _verified_peer(h.port, ca, name)
        assert peer["subjectAltName"]
    with pytest.raises(ssl.SSLCertVerificationError):            # a name it does not carry
        _verified_peer(h.port, ca, "elsewhere.test")
    other = data.parent / "other"                                 # another log folder's CA
    tls.ensure_ca(other)
    with pytest.raises(ssl.SSLCertVerificationError):
        _verified_peer(h.port, other / "tls" / "ca.crt", TEST_NAME)


def test_the_server_certificate_is_renewed_before_it_expires_and_when_names_change(tmp_path):
    from cryptography import x509
    from fieldapp import tls
    cert_path, _, made = tls.ensure_server_cert(tmp_path, ["localhost"], ["127.0.0.1"])
    assert made
    first = x509.load_pem_x509_certificate(cert_path.read_bytes())
    end = tls._not_after(first)
    # the same day, the same names: kept
    assert not tls.ensure_server_cert(tmp_path, ["localhost"], ["127.0.0.1"])[2]
    # still 31 days to go: kept; 29 days to go: a new one, valid from then on
    assert not tls.ensure_server_cert(tmp_path, ["localhost"], ["127.0.0.1"],
                                      now=end - dt.timedelta(days=31))[2]
    later = end - dt.timedelta(days=29)
    assert tls.ensure_server_cert(tmp_path, ["localhost"], ["127.0.0.1"], now=later)[2]
    second = x509.load_pem_x509_certificate(cert_path.read_bytes())
    assert second.serial_number != first.serial_number
    assert tls._not_after(second) > end
    # the hotspot gave the laptop a new address: a new certificate names it
    assert tls.ensure_server_cert(tmp_path, ["localhost"], ["127.0.0.1", "192.0.2.7"])[2]
    assert "192.0.2.7" in tls.cert_names(
        x509.load_pem_x509_certificate(cert_path.read_bytes()))[1]


def test_the_running_server_loads_the_renewed_certificate(https_app):
    from fieldapp import tls
    app, h, data = https_app
    ca = data / "tls" / "ca.crt"
    before = _verified_peer(h.port, ca, TEST_NAME)["serialNumber"]
    assert not h.renew_if_due()                                   # nothing due today
    assert _verified_peer(h.port, ca, TEST_NAME)["serialNumber"] == before
    # the certificate on disk was made 170 days ago: 10 days left, due
    (data / "tls" / "server.crt").unlink()
    dns, ips = tls.laptop_names([TEST_NAME])
    made_then = dt.datetime.now(dt.timezone.utc) - tls.SERVER_LIFETIME + dt.timedelta(days=10)
    tls.ensure_server_cert(data, dns, ips, now=made_then)
    assert h.renew_if_due()
    peer = _verified_peer(h.port, ca, TEST_NAME)                 # the next connection
    assert peer["serialNumber"] != before
    not_after = dt.datetime.fromtimestamp(ssl.cert_time_to_seconds(peer["notAfter"]),
                                          dt.timezone.utc)
    assert not_after - dt.datetime.now(dt.timezone.utc) > dt.timedelta(days=170)


# ------------------------------------------------------------ pairing over https

def test_an_unpaired_client_over_https_gets_401_but_may_fetch_the_certificate(https_app):
    app, h, data = https_app
    ca = data / "tls" / "ca.crt"
    for path in ("/", "/sites", "/api/readings", "/export.csv", "/static/entry.js"):
        status, headers, _ = _https_get(h.port, ca, path)
        assert status == 401, path
    status, headers, body = _https_get(h.port, ca, "/pair")
    assert status == 200 and b"pair-form" in body and b"tls-ok" in body   # secure page says so
    status, headers, body = _https_get(h.port, ca, "/pair/ca.crt")
    assert status == 200 and headers["Content-Type"] == "application/x-x509-ca-cert"
    from cryptography import x509
    from cryptography.hazmat.primitives import serialization
    served = x509.load_der_x509_certificate(body)
    assert served.public_bytes(serialization.Encoding.PEM) == ca.read_bytes()
    # a made-up cookie does not pass either
    assert _https_get(h.port, ca, "/api/readings", cookie="fieldapp_device=x" * 3)[0] == 401


def test_pairing_over_https_gives_a_secure_cookie_and_the_http_page_shows_the_steps(https_app):
    app, h, data = https_app
    from fieldapp.web import pairing
    c = app.test_client()
    code = c.post("/pair/codes", json={}).get_json()["code"]
    tab = app.test_client()
    r = tab.post("/pair", json={"code": code}, base_url=f"https://{TEST_NAME}:{h.port}",
                 environ_overrides={"REMOTE_ADDR": "192.0.2.20"})
    assert r.status_code == 200
    assert "Secure" in r.headers["Set-Cookie"]
    # a tablet on the plain address: the steps, the https address, the fingerprint
    page = app.test_client().get("/pair", base_url=f"http://{TEST_NAME}:8080",
                                 environ_overrides={"REMOTE_ADDR": "192.0.2.21"})
    html = page.get_data(as_text=True)
    assert page.status_code == 200 and 'id="tls-steps"' in html
    assert f"https://{TEST_NAME}:{h.port}/pair" in html
    assert app.config["CA_FINGERPRINT"] in html
    assert "Android" in html and "iPad" in html and "reload" in html
    # the laptop's page: the same fingerprint, the QR code carries the https address
    app.config["LAN_URLS"] = ["http://192.0.2.10:8080"]
    lines = pairing.start_lan(app, "192.0.2.10", 8080)
    assert any(f"https://192.0.2.10:{h.port}/pair" in x for x in lines)
    admin = c.get("/pair/devices").get_data(as_text=True)
    assert app.config["CA_FINGERPRINT"] in admin
    import re
    from test_security import decode_svg
    secure = re.search(r'<figure class="qr secure">(<svg.*?</svg>)', admin, re.S).group(1)
    assert decode_svg(secure) == f"https://192.0.2.10:{h.port}/pair#{code}"
    ca_qr = re.search(r'<figure class="qr ca">(<svg.*?</svg>)', admin, re.S).group(1)
    assert decode_svg(ca_qr) == "http://192.0.2.10:8080/pair/ca.crt"


def test_https_is_not_offered_without_lan_and_a_busy_port_keeps_http(tmp_path, capsys):
    from fieldapp import create_app, tls
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "d")})
    assert app.test_client().get("/pair/ca.crt").status_code == 404
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        h = tls.start_https(app, "127.0.0.1", busy.getsockname()[1], tmp_path / "d")
    assert h.server is None and "HTTPS_PORT" not in app.config
    assert "https not started" in capsys.readouterr().out


# ------------------------------------------------------------ the case, in Chromium

def _nss_home(tmp_path: Path, ca_file: Path) -> Path:
    """A HOME whose NSS database trusts the CA, as Linux Chromium reads it."""
    certutil = shutil.which("certutil")
    if not certutil:
        pytest.skip("no certutil (tests/run.sh installs Debian's libnss3-tools as root)")
    home = tmp_path / "home"
    db = home / ".pki" / "nssdb"
    db.mkdir(parents=True)
    subprocess.run([certutil, "-d", f"sql:{db}", "-N", "--empty-password"], check=True)
    subprocess.run([certutil, "-d", f"sql:{db}", "-A", "-t", "C,,", "-n", "fieldapp test CA",
                    "-i", str(ca_file)], check=True)
    return home


def _save(page, value):
    page.fill("#value", value)
    page.click("#save")


@pytest.mark.browser
@pytest.mark.parametrize("viewport", [PHONE, TABLET], ids=["phone", "tablet"])
def test_a_tablet_over_https_keeps_working_through_a_reload_while_the_laptop_is_away(
        browser, tmp_path, viewport):
    hport = free_port()
    srv = ServerProcess(tmp_path / "lan", extra=[
        "--lan", "--host", "127.0.0.1", "--https-port", str(hport), "--tls-name", TEST_NAME])
    srv.start()
    home = _nss_home(tmp_path, tmp_path / "lan" / "tls" / "ca.crt")
    origin = f"https://{TEST_NAME}:{hport}"
    # without the CA in its NSS database the same Chromium refuses the address:
    # it is the installed certificate, nothing else, that makes https work
    bare = tmp_path / "bare-home"
    bare.mkdir()
    untrusting = browser.browser_type.launch(
        executable_path=CHROMIUM, headless=True, env=dict(os.environ, HOME=str(bare)),
        args=CHROMIUM_ARGS + [f"--host-resolver-rules=MAP {TEST_NAME} 127.0.0.1"])
    try:
        with pytest.raises(Exception, match="ERR_CERT_AUTHORITY_INVALID"):
            untrusting.new_page().goto(origin + "/pair")
    finally:
        untrusting.close()
    tablet_browser = browser.browser_type.launch(
        executable_path=CHROMIUM, headless=True, env=dict(os.environ, HOME=str(home)),
        args=CHROMIUM_ARGS + [f"--host-resolver-rules=MAP {TEST_NAME} 127.0.0.1"])
    lap_ctx = browser.new_context()
    tab_ctx = tablet_browser.new_context(viewport=viewport)   # no ignore_https_errors
    shots = tmp_path / "shots"
    try:
        lap = lap_ctx.new_page()
        lap.goto(srv.url + "/pair/devices")
        code = lap.inner_text("#pair-code").strip()
        fingerprint = lap.inner_text("#tls-fingerprint").strip()

        tab = tab_ctx.new_page()
        # the plain address first: the steps, the same fingerprint, the certificate
        tab.goto(f"http://{TEST_NAME}:{srv.port}/pair")
        assert tab.inner_text("#tls-steps #tls-fingerprint").strip() == fingerprint
        assert "reload" in tab.inner_text("#tls-steps")
        tab.screenshot(path=str(shots / f"pair_plain_{viewport['width']}.png"), full_page=True)
        # the QR code's https address pairs at once; Chromium trusts the chain by itself
        resp = tab.goto(origin + "/pair#" + code)
        assert resp.ok and tab.url.startswith("https://")
        tab.wait_for_url(origin + "/")
        assert tab.evaluate("() => window.isSecureContext")
        tab.wait_for_function("() => navigator.serviceWorker.controller !== null", timeout=15000)
        tab.fill("#site", "Block 3")
        tab.select_option("#sample", "water")
        tab.select_option("#unit", "dS/m")
        tab.check("#compensated")
        for v in ("1.1", "1.2"):
            _save(tab, v)
            tab.wait_for_function("(v) => document.querySelector('#saved').textContent"
                                  ".includes('Saved to the log')", arg=v)
            tab.wait_for_function("() => !document.querySelector('#value').value")
        recs = lap.evaluate("() => fetch('/api/readings').then(r => r.json())")
        assert sorted(r["value"] for r in recs) == [1.1, 1.2]

        srv.stop()                                   # the tablet walks out of range
        for v in ("1.3", "1.4", "1.5"):
            _save(tab, v)
            tab.wait_for_function("() => document.querySelector('#saved').textContent"
                                  ".includes('waits on this device')")
            tab.wait_for_function("() => !document.querySelector('#value').value")
        badge = tab.inner_text("#outbox-badge")
        assert "3 readings wait since" in badge
        tab.reload(wait_until="domcontentloaded")   # from the service worker's cache
        tab.wait_for_function("() => document.querySelector('#outbox-badge').textContent"
                              ".includes('3 readings wait since')")
        assert tab.is_visible("#value") and tab.is_visible("#save")
        tab.screenshot(path=str(shots / f"offline_reload_{viewport['width']}.png"),
                       full_page=True)

        srv.start()                                  # back in range: same ports, same log
        tab.wait_for_function("() => document.querySelector('#outbox-badge').textContent"
                              ".includes('readings sent')", timeout=30000)
        recs = lap.evaluate("() => fetch('/api/readings').then(r => r.json())")
        values = sorted(r["value"] for r in recs)
        assert values == [1.1, 1.2, 1.3, 1.4, 1.5]   # all five, each once
        assert len({r["uuid"] for r in recs}) == 5
        tab.evaluate("() => window.fieldappOutbox.flush()")   # nothing goes twice
        assert len(lap.evaluate("() => fetch('/api/readings').then(r => r.json())")) == 5
        # the laptop's devices page: last seen and five readings sent by this tablet
        lap.goto(srv.url + "/pair/devices")
        assert "5 readings sent" in lap.inner_text("#devices")
        lap.screenshot(path=str(shots / f"devices_{viewport['width']}.png"), full_page=True)
    finally:
        tab_ctx.close()
        lap_ctx.close()
        tablet_browser.close()
        srv.stop()
