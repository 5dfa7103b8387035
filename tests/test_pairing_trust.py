"""Pairing, second round (issue 11, points 4, 5 and 9): the address a tablet
returns to after pairing stays on this server, the wrong-code limiter cannot
lock out the right code, and pairings are bounded and expire."""
from __future__ import annotations

import html
import re
from urllib.parse import urljoin, urlsplit

import pytest

from fieldapp import create_app
from fieldapp.web import security

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
