"""Pairing, second round (issue 11, points 4, 5 and 9): the address a tablet
returns to after pairing stays on this server, the wrong-code limiter cannot
lock out the right code, and pairings are bounded and expire."""
from __future__ import annotations

import html
import re
from urllib.parse import urljoin, urlsplit

import pytest

from fieldapp import create_app
from fieldapp.web import limiter as limits
from fieldapp.web import pairing, security

TABLET_HOST = {"Host": "192.0.2.10:8080"}            # TEST-NET-1 (RFC 5737): never contacted
HOSTILE_NEXT = ["/\t/evil.example/", "/%09/evil.example/", "/\n/evil.example", "//evil.example",
                "/\\evil.example", "/\\\\evil.example", "\\\\evil.example", "http://evil.example/",
                "javascript:alert(1)", "/\r\n/evil.example", " //evil.example", "",
                "/./\t/evil.example", "https:evil.example", "/%2F/evil.example"]


@pytest.fixture
def lan_app(tmp_path):
    return create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "lan"), "LAN": True,
                       "LAN_URLS": ["http://192.0.2.10:8080"]})


def browser_like_resolve(target: str, base="http://192.0.2.10:8080/pair") -> str:
    """How a browser follows an address: the URL standard drops tabs and line
    breaks and reads a backslash as a slash in http(s) URLs."""
    t = "".join(c for c in target if c not in "\t\n\r").strip().replace("\\", "/")
    return urljoin(base, t)


@pytest.mark.parametrize("target", HOSTILE_NEXT)
def test_safe_next_keeps_the_return_address_on_this_server(target):
    out = security.safe_next(target)
    assert out.startswith("/") and not out.startswith("//")
    assert urlsplit(browser_like_resolve(out)).netloc == "192.0.2.10:8080"


@pytest.mark.parametrize("good", ["/sites/3", "/sites?site=Block%203", "/", "/map"])
def test_safe_next_keeps_ordinary_paths(good):
    assert security.safe_next(good) == good


@pytest.mark.parametrize("path", ["/%09/evil.example/", "/%0a/evil.example", "/%5Cevil.example",
                                  "/%0d%0a/evil.example", "/%2F%2Fevil.example"])
def test_the_pairing_form_of_an_unpaired_tablet_returns_only_here(lan_app, path):
    c = lan_app.test_client()
    r = c.get(path, headers=TABLET_HOST, environ_overrides={"REMOTE_ADDR": "192.0.2.20"})
    assert r.status_code == 401
    m = re.search(r'data-next="([^"]*)"', r.get_data(as_text=True))
    target = html.unescape(m.group(1))
    assert urlsplit(browser_like_resolve(target)).netloc == "192.0.2.10:8080", target


@pytest.mark.browser
def test_a_tablet_that_pairs_from_a_hostile_address_lands_on_this_server(browser, tmp_path):
    """Chromium is the tablet; laptop.test maps to 127.0.0.1 and every other
    name to nothing, so a redirect elsewhere would show as a failed load."""
    from conftest import CHROMIUM, CHROMIUM_ARGS, PHONE, ServerProcess
    srv = ServerProcess(tmp_path / "lan", extra=["--lan", "--host", "127.0.0.1"]).start()
    lan_url = f"http://laptop.test:{srv.port}"
    tablet_browser = browser.browser_type.launch(
        executable_path=CHROMIUM, headless=True,
        args=CHROMIUM_ARGS + ["--host-resolver-rules=MAP laptop.test 127.0.0.1, "
                              "MAP * ~NOTFOUND"])
    lap_ctx = browser.new_context()
    try:
        lap = lap_ctx.new_page()
        lap.goto(srv.url + "/pair/devices")
        code = lap.inner_text("#pair-code").strip()
        for path in ["/%09/evil.example/", "/%0A/evil.example/", "/%5Cevil.example/",
                     "/%09%09/evil.example/sites"]:
            ctx = tablet_browser.new_context(viewport=PHONE)
            tab = ctx.new_page()
            resp = tab.goto(lan_url + path)
            assert resp.status == 401 and tab.is_visible("#pair-form")
            tab.fill("#code", code)
            with tab.expect_navigation(wait_until="commit"):
                tab.click("#pair")
            assert tab.url.startswith(lan_url + "/"), (path, tab.url)
            ctx.close()
    finally:
        lap_ctx.close()
        tablet_browser.close()
        srv.stop()


# ------------------------------------------------------------ limiter, bounds, expiry

def new_code(app) -> str:
    r = app.test_client().post("/pair/codes", json={})
    assert r.status_code == 201
    return r.get_json()["code"]


def pair(app, code, ip, name="Tablet"):
    return app.test_client().post("/pair", json={"code": code, "name": name},
                                  headers=TABLET_HOST, environ_overrides={"REMOTE_ADDR": ip})


def test_the_issue_case_a_right_code_passes_while_four_addresses_are_locked_out(lan_app):
    code = new_code(lan_app)
    for k in range(20):                                   # 20 wrong codes from 4 addresses
        pair(lan_app, "WRNG-CODE", ip=f"192.0.2.{30 + k % 4}")
    for k in range(4):
        r = pair(lan_app, code, ip=f"192.0.2.{30 + k}")
        assert r.status_code == 429 and int(r.headers["Retry-After"]) > 0
    assert pair(lan_app, code, ip="192.0.2.77").status_code == 200


def test_the_limiter_survives_a_restart(tmp_path):
    cfg = {"TESTING": True, "DATA_DIR": str(tmp_path / "lan"), "LAN": True}
    app = create_app(cfg)
    code = new_code(app)
    for _ in range(limits.FAILS_PER_ADDRESS):
        assert pair(app, "WRNG-CODE", ip="192.0.2.40").status_code == 403
    again = create_app(cfg)                               # the laptop restarts
    assert pair(again, code, ip="192.0.2.40").status_code == 429


def test_a_parallel_burst_is_counted_one_by_one(lan_app):
    import threading
    new_code(lan_app)
    answers = []

    def one():
        answers.append(pair(lan_app, "WRNG-CODE", ip="192.0.2.50").status_code)
    threads = [threading.Thread(target=one) for _ in range(12)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert answers.count(403) == limits.FAILS_PER_ADDRESS       # checked: exactly 5
    assert answers.count(429) == 12 - limits.FAILS_PER_ADDRESS


def test_a_code_pairs_a_bounded_number_of_devices(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "lan"), "LAN": True,
                      "PAIRING_DEVICES_PER_CODE": 3})
    code = new_code(app)
    for k in range(3):
        assert pair(app, code, ip=f"192.0.2.{60 + k}").status_code == 200
    r = pair(app, code, ip="192.0.2.70")
    assert r.status_code == 409 and "new code" in r.get_json()["error"]
    assert pair(app, new_code(app), ip="192.0.2.70").status_code == 200
    assert pairing.DEVICES_PER_CODE == 10


def test_an_idle_pairing_expires_and_the_devices_page_shows_last_seen(lan_app):
    import sqlite3
    code = new_code(lan_app)
    c = lan_app.test_client()
    r = c.post("/pair", json={"code": code, "name": "Old tablet"}, headers=TABLET_HOST,
               environ_overrides={"REMOTE_ADDR": "192.0.2.80"})
    assert r.status_code == 200
    env = {"REMOTE_ADDR": "192.0.2.80"}
    assert c.get("/api/sites", headers=TABLET_HOST, environ_overrides=env).status_code == 200
    db = sqlite3.connect(lan_app.config["DATABASE"])
    db.execute("UPDATE paired_devices SET last_seen_at = '2020-01-01T00:00:00+00:00'")
    db.commit()
    db.close()
    r = c.get("/api/sites", headers=TABLET_HOST, environ_overrides=env)
    assert r.status_code == 401 and "expired" in r.get_json()["error"]
    r = c.post("/api/readings", json={"site": "Block 3", "sample": "water", "value": "1",
                                      "unit": "dS/m"}, headers=TABLET_HOST,
               environ_overrides=env)
    assert r.status_code == 401
    page = lan_app.test_client().get("/pair/devices").get_data(as_text=True)
    assert "last seen" in page and "2020-01-01 00:00" in page
    assert pairing.PAIRING_IDLE_DAYS == 90
