"""The printed visit report and the meter checks in headless Chromium: the
interpretation starts on page 1 on A4 and on US Letter (the header is compact
in print), "Printed" shows the time zone, and a meter check older than the
limit reads "due", not "passed", on the report and on the meters page.

Page 1 is checked on the PDF Chromium prints (page.pdf), read back with pypdf."""
from __future__ import annotations

import datetime as dt
import io
import os
import re

import pytest

from conftest import PHONE, TABLET, ServerProcess

pytestmark = pytest.mark.browser
MARGINS = {"top": "14mm", "bottom": "14mm", "left": "12mm", "right": "12mm"}
# POSIX TZ string: a zone one hour east of UTC, with no tz database needed
ZONE = ("XYZ-1", "UTC+01:00")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    old = os.environ.get("TZ")
    os.environ["TZ"] = ZONE[0]
    try:
        s = ServerProcess(tmp_path_factory.mktemp("report") / "log", extra=["--demo"]).start()
    finally:
        if old is None:
            os.environ.pop("TZ", None)
        else:
            os.environ["TZ"] = old
    yield s
    s.stop()


def site_ids(page, base):
    page.goto(base + "/sites")
    return {s["name"]: s["id"] for s in page.evaluate("fetch('/api/sites').then(r => r.json())")}


def page_texts(pdf: bytes) -> list[str]:
    from pypdf import PdfReader
    return [" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(pdf)).pages]


@pytest.mark.parametrize("paper", ["A4", "Letter"])
@pytest.mark.parametrize("site,first_line", [
    ("Farm A Block 3", "Soil ECe"),
    ("Greenhouse B bench 4", "Leachate/feed EC"),
    ("Farm A well 2", "Leaching requirement for tomato"),
])
def test_interpretation_on_page_one(browser, demo, paper, site, first_line):
    ctx = browser.new_context(viewport=TABLET)
    page = ctx.new_page()
    ids = site_ids(page, demo.url)
    page.goto(f"{demo.url}/sites/{ids[site]}/report")
    headline = page.locator(".sv-headline li").all_inner_texts()
    assert headline and headline[0]
    page.emulate_media(media="print")
    pages = page_texts(page.pdf(format=paper, margin=MARGINS))
    one = pages[0]
    assert "Visit report: " + site in one
    assert "Interpretation at this visit" in one
    # every headline sentence of the interpretation is on page 1
    assert first_line in " ".join(pages[0:1])
    for line in headline:
        assert " ".join(line.split())[:40] in one, (line, one)
    # the printed time carries its zone
    m = re.search(r"Printed: (\d{4}-\d\d-\d\d \d\d:\d\d) (UTC[+-]\d\d:\d\d)", one)
    assert m and m.group(2) == ZONE[1]
    printed = dt.datetime.strptime(m.group(1), "%Y-%m-%d %H:%M").replace(
        tzinfo=dt.timezone(dt.timedelta(hours=1)))
    assert abs((dt.datetime.now(dt.timezone.utc) - printed).total_seconds()) < 600
    # the page-1 header stays short: site facts in one block, no navigation
    head = page.locator(".report-head").bounding_box()
    assert head["height"] < 160
    ctx.close()


def _stale_meter(base_url, data_dir, days):
    """A meter whose only check passed ``days`` ago (written into the log as
    the check would have been then), and a reading taken with it now."""
    from fieldapp import meters, store
    import urllib.request
    import json

    def post(path, body):
        req = urllib.request.Request(base_url + path, data=json.dumps(body).encode(),
                                     headers={"Content-Type": "application/json"})
        with urllib.request.urlopen(req) as r:
            return json.loads(r.read())

    m = post("/api/meters", {"name": "tester old", "units": ["µS/cm"],
                             "ranges": [{"min": 0, "max": 1999, "resolution": 1,
                                         "unit": "µS/cm"}], "atc": True})
    conn = store.connect(data_dir / store.DB_NAME, upgrade=False)
    try:
        meter = store.get_meter(conn, m["name"])
        c = meters.calibration_check({"standard": "kcl_0.01", "value": 1410, "unit": "µS/cm",
                                      "compensated": True}, meter)
        assert c["passed"]
        c["checked_at"] = (dt.datetime.now(dt.timezone.utc) - dt.timedelta(days=days)
                           ).isoformat(timespec="seconds")
        store.insert_calibration(conn, c)
    finally:
        conn.close()
    rec = post("/api/readings", {"site": "Bench 9", "sample": "water", "value": "900",
                                 "unit": "µS/cm", "compensated": True, "meter": "tester old"})
    return rec


@pytest.mark.parametrize("size", [PHONE, TABLET], ids=["phone", "tablet"])
def test_a_stale_meter_check_shows_as_due(browser, server, size):
    rec = _stale_meter(server.url, server.data_dir, days=100)
    assert "calibration_stale" in rec["flags"]
    ctx = browser.new_context(viewport=size)
    page = ctx.new_page()
    page.goto(server.url + "/meters")
    item = page.locator("#meter-list li[data-meter='tester old'] .check")
    assert item.get_attribute("class") == "check check-due"
    text = item.inner_text()
    assert "due" in text and "100 days" in text and "passed" in text.lower()
    assert "Passed on" not in text
    # not green: the text colour of a due check is the warning colour, not the "ok" one
    colour = item.evaluate("e => getComputedStyle(e).color")
    ok = page.evaluate("() => { const s = document.createElement('span'); s.className = 'check check-passed';"
                       " document.body.appendChild(s); return getComputedStyle(s).color; }")
    assert colour != ok
    page.goto(f"{server.url}/sites/{rec['site_id']}/report")
    check = page.locator("#meter-checks li[data-meter='tester old']")
    assert "check-due" in check.get_attribute("class")
    assert "Check due" in check.inner_text() and "7 days" in check.inner_text()
    assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth + 1")
    ctx.close()
