"""End to end in headless Chromium at phone and tablet sizes, against a real
server process started as a user starts it."""
from __future__ import annotations

import csv
import io

import pytest

from conftest import PHONE, TABLET, ServerProcess

pytestmark = pytest.mark.browser


def new_page(browser, size):
    ctx = browser.new_context(viewport=size, accept_downloads=True)
    return ctx, ctx.new_page()


def no_horizontal_scroll(page):
    return page.evaluate("document.documentElement.scrollWidth <= window.innerWidth + 1")


@pytest.mark.parametrize("size", [PHONE, TABLET], ids=["phone", "tablet"])
def test_enter_preview_save_log_and_csv(browser, server, size, tmp_path):
    ctx, page = new_page(browser, size)
    external = []
    page.on("request", lambda r: None if r.url.startswith(server.url) or r.url.startswith("data:")
            else external.append(r.url))
    page.goto(server.url + "/")
    assert no_horizontal_scroll(page)
    page.fill("#site", "Block 3")
    page.select_option("#sample", "extract")
    page.fill("#ratio", "1:5")
    page.select_option("#texture", "clay loam")
    page.fill("#temp_c", "18")
    page.select_option("#unit", "mS/cm")
    page.fill("#value", "0.84")
    # the live preview: EC at 25 °C, ECe and solute potential
    page.wait_for_selector("#preview dl.results")
    text = page.inner_text("#preview")
    assert "EC at 25 °C" in text and "ECe" in text and "Solute potential" in text
    assert "laboratory" in text
    assert page.get_attribute("#value", "inputmode") == "decimal"
    page.click("#save")
    page.wait_for_function("() => document.querySelector('#saved').textContent.includes('Saved to the log')")
    # the form keeps site, kind and unit for the next reading, clears the value
    assert page.input_value("#site") == "Block 3"
    assert page.input_value("#sample") == "extract"
    assert page.input_value("#unit") == "mS/cm"
    assert page.input_value("#value") == ""
    # the site log shows it
    page.click("text=Sites")
    page.click("text=Block 3")
    page.wait_for_selector("article.reading")
    log = page.inner_text("#log")
    assert "0.84" in log and "mS/cm" in log and "ECe" in log
    assert no_horizontal_scroll(page)
    # the CSV download
    with page.expect_download() as dl:
        page.click("text=CSV of this site")
    path = dl.value.path()
    rows = list(csv.DictReader(io.StringIO(open(path, encoding="utf-8-sig").read())))
    assert len(rows) == 1 and rows[0]["value"] == "0.84" and rows[0]["unit"] == "mS/cm"
    assert float(rows[0]["ece_dS_m"]) > 0
    assert external == []          # nothing loaded from another host
    ctx.close()


def test_bad_value_shows_message_beside_field_and_keeps_typing(browser, server):
    ctx, page = new_page(browser, PHONE)
    page.goto(server.url + "/")
    page.fill("#site", "Block 3")
    page.fill("#value", "12abc")
    page.wait_for_function("() => document.querySelector('#err-value').textContent.length > 0")
    assert "not a number" in page.inner_text("#err-value")
    page.click("#save")
    page.wait_for_function("() => document.querySelector('#err-value').textContent.length > 0")
    assert page.input_value("#value") == "12abc"
    assert page.input_value("#site") == "Block 3"
    ctx.close()


def test_outbox_keeps_readings_while_server_is_down(browser, tmp_path):
    srv = ServerProcess(tmp_path / "log").start()
    ctx, page = new_page(browser, PHONE)
    try:
        page.goto(srv.url + "/")
        page.fill("#site", "Bench 4")
        page.select_option("#sample", "feed")
        page.check("#compensated")
        # the service worker has kept the page for offline use
        assert page.evaluate("navigator.serviceWorker.ready.then(() => true)")
        srv.stop()                                  # the laptop's server goes away
        for v in ("2.1", "2.4"):
            page.fill("#value", v)
            page.click("#save")
            page.wait_for_function(
                "() => document.querySelector('#saved').textContent.includes('waits on this device')")
        assert "2 readings wait" in page.inner_text("#outbox-badge")
        page.reload(wait_until="domcontentloaded")  # the page's own copy survives a reload
        page.wait_for_function("() => document.querySelector('#outbox-badge').textContent.includes('2 readings wait')")
        srv.start()                                 # same port, same log
        page.wait_for_function("() => document.querySelector('#outbox-badge').hidden", timeout=20000)
        recs = page.evaluate("fetch('/api/readings?site=Bench 4').then(r => r.json())")
        assert sorted(r["value"] for r in recs) == [2.1, 2.4]
        # a second flush sends nothing twice
        page.evaluate("window.fieldappOutbox.flush()")
        recs = page.evaluate("fetch('/api/readings?site=Bench 4').then(r => r.json())")
        assert len(recs) == 2
    finally:
        ctx.close()
        srv.stop()


def test_unit_slip_flagged_in_preview_and_fixed_with_one_tap(browser, server):
    ctx, page = new_page(browser, PHONE)
    page.goto(server.url + "/")
    page.fill("#site", "Farm A well 2")
    page.select_option("#sample", "water")
    page.check("#compensated")
    page.select_option("#unit", "mS/cm")
    page.fill("#value", "350")          # irrigation water: surely 350 µS/cm
    page.wait_for_selector("#preview li.flag[data-code='unit_slip']")
    fix = page.locator("#preview button[data-fix-unit]")
    assert fix.inner_text() == "Use µS/cm"
    fix.click()
    assert page.input_value("#unit") == "µS/cm"
    page.wait_for_function("() => !document.querySelector(\"#preview li.flag[data-code='unit_slip']\")"
                           " && document.querySelector('#preview dl.results')")
    assert "0.35" in page.inner_text("#preview")   # 350 µS/cm = 0.35 dS/m
    page.click("#save")
    page.wait_for_function("() => document.querySelector('#saved').textContent.includes('Saved to the log')")
    recs = page.evaluate("fetch('/api/readings?site=Farm A well 2').then(r => r.json())")
    assert recs[0]["unit"] == "µS/cm" and "unit_slip" not in recs[0]["flags"]
    ctx.close()


def test_meter_profile_check_and_remembered_meter(browser, server):
    ctx, page = new_page(browser, TABLET)
    page.goto(server.url + "/meters")
    page.select_option("#m-preset", label="EC meter, 3½ digits, 1 decade, ±2 %, ATC")
    page.fill("#m-name", "tester A")
    page.click("#meter-form button[type=submit]")
    page.wait_for_selector("li[data-meter='tester A']")
    page.fill("#c-value", "1290")
    page.fill("#c-temp_c", "20")
    page.uncheck("#c-compensated")
    page.click("#check-form button[type=submit]")
    page.wait_for_function("() => document.querySelector('#check-result').textContent.length > 0")
    assert page.inner_text("#check-result").startswith("Passed")
    page.goto(server.url + "/")
    page.fill("#site", "Block 3")
    page.select_option("#sample", "water")
    page.fill("#meter", "tester A")
    page.check("#compensated")
    page.fill("#value", "1999")
    page.wait_for_selector("#preview li.flag[data-code='over_range']")
    page.click("#save")
    # an error-level flag asks for one deliberate tap before anything is stored
    page.wait_for_selector("#confirm:not([hidden])")
    assert "Above the meter's range" in page.inner_text("#confirm")
    assert page.evaluate("fetch('/api/readings').then(r => r.json())") == []
    page.click("#save-anyway")
    page.wait_for_function("() => document.querySelector('#saved').textContent.includes('Saved to the log')")
    page.reload()
    assert page.input_value("#meter") == "tester A"     # remembered for the next reading
    ctx.close()


def test_void_and_acknowledge_from_the_site_log(browser, server):
    import json
    import urllib.request
    body = json.dumps({"site": "Block 3", "sample": "water", "value": "1.2",
                       "unit": "dS/m"}).encode()
    req = urllib.request.Request(server.url + "/api/readings", data=body,
                                 headers={"Content-Type": "application/json"})
    rec = json.load(urllib.request.urlopen(req))
    assert "temperature_unknown" in rec["flags"]
    ctx, page = new_page(browser, PHONE)
    answers = iter(["sample was at air temperature, about 25", "wrong bottle"])
    page.on("dialog", lambda d: d.accept(next(answers)))
    page.goto(f"{server.url}/sites/{rec['site_id']}")
    page.click(".ack-btn[data-code='temperature_unknown']")
    page.wait_for_selector(".ack")
    assert "about 25" in page.inner_text(".ack")
    page.click(".void-btn")
    page.wait_for_selector("article.status-void")
    assert "wrong bottle" in page.inner_text(".void-reason")
    ctx.close()
