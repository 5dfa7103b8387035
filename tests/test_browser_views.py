"""Site views in headless Chromium against a real server with the demo log:
the chart renders at phone size without horizontal scrolling, the report
fits A4 and US Letter when printed, the map works with and without the
device's position, and a target range is kept from the page."""
from __future__ import annotations

import struct

import pytest

from conftest import PHONE, TABLET, ServerProcess

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    s = ServerProcess(tmp_path_factory.mktemp("views") / "log", extra=["--demo"]).start()
    yield s
    s.stop()


def site_ids(page):
    return {s["name"]: s["id"] for s in page.evaluate("fetch('/api/sites').then(r => r.json())")}


def watch(page, base):
    """Collect console errors (a blocked inline script shows up here) and any
    request to another host."""
    problems = []
    page.on("console", lambda m: problems.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: problems.append(str(e)))
    page.on("request", lambda r: None if r.url.startswith(base) or r.url.startswith("data:")
            else problems.append("external: " + r.url))
    return problems


def png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", data[16:24])


def no_horizontal_scroll(page):
    return page.evaluate("document.documentElement.scrollWidth <= window.innerWidth + 1")


def test_site_chart_at_phone_size_without_horizontal_scroll(browser, demo, tmp_path):
    ctx = browser.new_context(viewport=PHONE)
    page = ctx.new_page()
    problems = watch(page, demo.url)
    page.goto(demo.url + "/sites")
    ids = site_ids(page)
    page.goto(f"{demo.url}/sites/{ids['Farm A Block 3']}")
    chart = page.locator("#chart-soil svg")
    chart.wait_for()
    current = [r for r in page.evaluate("fetch('/api/readings?site=Farm A Block 3').then(r => r.json())")
               if r["status"] == "current" and r["ece_dS_m"] is not None]
    assert chart.locator("path.mark").count() == len(current) == 6
    assert chart.locator("rect.band").count() >= 4
    assert no_horizontal_scroll(page)
    box = chart.bounding_box()
    assert box["x"] >= 0 and box["x"] + box["width"] <= PHONE["width"]
    assert box["height"] > 150                     # drawn, not collapsed
    shot = chart.screenshot(path=str(tmp_path / "chart-phone.png"))
    w, h = png_size(shot)
    assert 250 <= w <= PHONE["width"] and h > 150
    page.screenshot(path=str(tmp_path / "site-phone.png"), full_page=True)
    # the greenhouse bench: feed and leachate chart and the ratio
    page.goto(f"{demo.url}/sites/{ids['Greenhouse B bench 4']}")
    page.locator("#chart-solution svg").wait_for()
    assert "leachate/feed EC ratio" in page.inner_text("#site-state")
    assert no_horizontal_scroll(page)
    assert problems == []
    ctx.close()


@pytest.mark.parametrize("paper,width_px", [("A4", 703), ("Letter", 725)])
def test_report_fits_the_printed_page(browser, demo, paper, width_px):
    # printable width: A4 210 mm and Letter 215.9 mm less the 2 × 12 mm margins
    # of the print stylesheet, at 96 px per inch
    ctx = browser.new_context(viewport={"width": width_px, "height": 1000})
    page = ctx.new_page()
    problems = watch(page, demo.url)
    page.goto(demo.url + "/sites")
    ids = site_ids(page)
    page.goto(f"{demo.url}/sites/{ids['Farm A Block 3']}/report")
    page.emulate_media(media="print")
    assert no_horizontal_scroll(page)
    assert not page.locator(".top").is_visible()               # no navigation on paper
    assert page.locator("#cautions").is_visible()
    assert page.locator("svg.chart").first.is_visible()
    pdf = page.pdf(format=paper, margin={"top": "14mm", "bottom": "14mm", "left": "12mm",
                                         "right": "12mm"})
    assert pdf[:5] == b"%PDF-" and len(pdf) > 5000
    assert problems == []
    ctx.close()


def test_map_without_device_position_accepts_typed_coordinates(browser, demo):
    ctx = browser.new_context(viewport=PHONE)
    # as on a tablet opening the laptop's page over plain http on the hotspot
    ctx.add_init_script("Object.defineProperty(window, 'isSecureContext', {get: () => false})")
    page = ctx.new_page()
    problems = watch(page, demo.url)
    page.goto(demo.url + "/map")
    assert page.locator("#map svg .site-point").count() == 3
    status = page.locator("#geo-status")
    assert status.is_visible() and "localhost or https" in status.inner_text()
    assert not page.locator("#geo-btn").is_visible()
    page.fill("#lat", "abc")
    page.fill("#lon", "20.0010")
    page.click("text=Show on the map")
    assert "Decimal degrees" in page.inner_text("#err-lat")
    assert page.input_value("#lat") == "abc"                  # what was typed stays
    page.fill("#lat", "10,0021 N")                            # decimal comma, hemisphere
    page.click("text=Show on the map")
    page.wait_for_selector("#here .nearest")
    assert "Farm A well 2" in page.inner_text("#here .nearest")
    assert page.locator("#map svg g.you").count() == 1
    assert no_horizontal_scroll(page)
    # the typed position becomes the coordinates of the site that had none
    page.select_option("#save-site", label="Greenhouse B bench 4 (none yet)")
    with page.expect_navigation():
        page.click("text=Save to site")
    assert page.locator("#map svg .site-point").count() == 4
    assert "Greenhouse B bench 4" in page.inner_text(".map-legend")
    assert problems == []
    ctx.close()


def test_map_uses_the_device_position_when_allowed(browser, demo):
    ctx = browser.new_context(viewport=TABLET, permissions=["geolocation"],
                              geolocation={"latitude": 10.0040, "longitude": 20.0075})
    page = ctx.new_page()
    page.goto(demo.url + "/map")
    assert page.locator("#geo-status").is_hidden()
    page.click("#geo-btn")
    page.wait_for_selector("#here .nearest")
    assert "Farm A Block 7, 0 m" in page.inner_text("#here .nearest")
    assert page.input_value("#lat").startswith("10.004")
    ctx.close()


def test_target_range_kept_from_the_site_page(browser, demo):
    ctx = browser.new_context(viewport=PHONE)
    page = ctx.new_page()
    problems = watch(page, demo.url)
    page.goto(demo.url + "/sites")
    ids = site_ids(page)
    page.goto(f"{demo.url}/sites/{ids['Greenhouse B bench 4']}")
    page.click("text=Your target ranges for cucumber")
    page.select_option("#t-measure", "feed")
    page.fill("#t-lo", "2.0")
    page.fill("#t-hi", "1.5")
    page.click("text=Save target")
    page.wait_for_function("() => document.querySelector('#err-target').textContent.length > 0")
    assert "upper limit" in page.inner_text("#err-target")
    assert page.input_value("#t-lo") == "2.0" and page.input_value("#t-hi") == "1.5"
    page.fill("#t-hi", "2.2")
    page.click("text=Save target")
    # the save sets #targets and reloads: wait for the reloaded page's scripts
    # (a same-document hash change alone would end a wait for "a navigation")
    page.wait_for_function("() => document.readyState === 'complete' && "
                           "!!document.querySelector('.sv-target-list')")
    assert "Feed EC: 2 – 2.2 dS/m" in page.inner_text(".sv-target-list")
    assert "above your target" in page.inner_text("#site-state")  # latest feed 2.3 dS/m
    with page.expect_navigation():
        page.click(".target-del")
    assert page.locator(".sv-target-list").count() == 0
    # the refused save logs its 400 answer; nothing else may go wrong
    assert [p for p in problems if "status of 400" not in p] == []
    ctx.close()
