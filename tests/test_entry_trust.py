"""The path from the scout's tap to the log, in headless Chromium at phone
and tablet sizes: nothing lost, doubled or misdated, no serious doubt unseen,
and no code or internal key on any screen."""
from __future__ import annotations

import json
import socket
import threading
import time
import urllib.request

import pytest

from conftest import TABLET, ServerProcess

pytestmark = pytest.mark.browser

PHONE_390 = {"width": 390, "height": 844}
SIZES = pytest.mark.parametrize("size", [PHONE_390, TABLET], ids=["phone", "tablet"])


def new_page(browser, size):
    ctx = browser.new_context(viewport=size)
    page = ctx.new_page()
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.js_errors = errors
    return ctx, page


def in_view(page, selector):
    """The element's box lies inside the viewport (no scrolling needed to see it)."""
    return page.evaluate("""(sel) => {
        const r = document.querySelector(sel).getBoundingClientRect();
        return r.height > 0 && r.top >= 0 && r.bottom <= window.innerHeight + 1;
    }""", selector)


def api(url, path, body=None):
    req = urllib.request.Request(url + path, data=None if body is None else json.dumps(body).encode(),
                                 headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=10) as r:
        return json.load(r)


def readings(url, site):
    return api(url, "/api/readings?site=" + urllib.request.quote(site))


def wait_text(page, selector, text, timeout=15000):
    page.wait_for_function("([s, t]) => { const e = document.querySelector(s);"
                           " return e && e.textContent.includes(t); }", arg=[selector, text],
                           timeout=timeout)


def type_site(page, name):
    page.fill("#site", name)
    page.dispatch_event("#site", "change")


def type_reading(page, site, sample, unit):
    """Site, sample kind and unit of a reading from a meter that compensates (ATC)."""
    type_site(page, site)
    page.select_option("#sample", sample)
    page.select_option("#unit", unit)
    page.check("#compensated")


@SIZES
def test_a_refused_save_stays_beside_its_field_until_it_changes(browser, server, size):
    ctx, page = new_page(browser, size)
    page.goto(server.url + "/")
    type_site(page, "Block 3")
    page.select_option("#sample", "extract")
    page.select_option("#unit", "mS/cm")
    page.fill("#ratio", "1:5")
    page.fill("#value", "0.84")
    page.fill("#depth_cm", "0-30")
    page.click("#save")
    wait_text(page, "#err-depth_cm", "bottom of the layer")
    # focus moved to the field, and field and message are on the screen
    assert page.evaluate("document.activeElement.id") == "depth_cm"
    assert in_view(page, "#err-depth_cm") and in_view(page, "#depth_cm")
    assert in_view(page, "#saved") and "Not saved" in page.inner_text("#saved")
    # the field loses focus and the preview refreshes: the message stays
    page.focus("#value")
    page.click("#form-title")
    page.wait_for_timeout(1200)
    assert "bottom of the layer" in page.inner_text("#err-depth_cm")
    assert "invalid" in page.get_attribute("#depth_cm", "class")
    # every typed value is kept, nothing was stored
    assert page.input_value("#value") == "0.84" and page.input_value("#ratio") == "1:5"
    assert page.input_value("#site") == "Block 3"
    assert api(server.url, "/api/readings") == []
    # the scout changes that field: the message goes, Save goes through
    page.fill("#depth_cm", "30")
    page.wait_for_function("() => document.querySelector('#err-depth_cm').textContent === ''")
    page.click("#save")
    wait_text(page, "#saved", "Saved to the log")
    assert [r["depth_cm"] for r in readings(server.url, "Block 3")] == [30]
    assert page.js_errors == []
    ctx.close()


@SIZES
def test_an_empty_site_is_refused_in_view_and_keeps_the_reading(browser, server, size):
    ctx, page = new_page(browser, size)
    page.goto(server.url + "/")
    page.select_option("#sample", "water")
    page.fill("#value", "1.2")
    page.click("#save")
    wait_text(page, "#err-site", "site name")
    assert page.evaluate("document.activeElement.id") == "site"
    assert in_view(page, "#err-site")
    page.click("#form-title")
    page.wait_for_timeout(1000)
    assert "site name" in page.inner_text("#err-site")       # still there after the preview
    assert page.input_value("#value") == "1.2"
    ctx.close()


class HungLaptop:
    """A socket on the server's port that accepts connections and never answers:
    a laptop at the edge of the hotspot."""

    def __init__(self, port):
        self.sock = socket.socket()
        self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self.sock.bind(("127.0.0.1", port))
        self.sock.listen(64)
        self.conns = []
        self.stop = False
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self):
        self.sock.settimeout(0.2)
        while not self.stop:
            try:
                c, _ = self.sock.accept()
                self.conns.append(c)
            except OSError:
                continue

    def close(self):
        self.stop = True
        time.sleep(0.3)
        for c in self.conns:
            c.close()
        self.sock.close()


def test_a_hung_laptop_and_three_taps_store_one_reading(browser, tmp_path):
    srv = ServerProcess(tmp_path / "log").start()
    ctx, page = new_page(browser, PHONE_390)
    hung = None
    try:
        page.goto(srv.url + "/")
        type_reading(page, "Farm A well 2", "water", "dS/m")
        page.fill("#value", "1.2")
        page.wait_for_selector("#preview dl.results")
        srv.stop()
        hung = HungLaptop(srv.port)
        page.click("#save")
        page.click("#save")                       # an impatient second tap
        wait_text(page, "#saved", "waits on this device", timeout=15000)
        assert "did not answer" in page.inner_text("#saved")
        assert page.input_value("#value") == ""   # the form is free for the next reading
        assert in_view(page, "#saved")
        page.click("#save")                       # a third tap on the empty form stores nothing
        assert page.evaluate("window.fieldappOutbox.pending().length") == 1
        hung.close()
        hung = None
        srv.start()
        page.wait_for_function("() => window.fieldappOutbox.pending().length === 0", timeout=40000)
        page.evaluate("window.fieldappOutbox.flush()")
        recs = readings(srv.url, "Farm A well 2")
        assert [r["value"] for r in recs] == [1.2]
    finally:
        if hung:
            hung.close()
        ctx.close()
        srv.stop()


@SIZES
def test_a_correction_keeps_the_sampling_time_and_shows_both_versions(browser, server, size):
    rec = api(server.url, "/api/readings", {
        "site": "Block 3", "sample": "water", "value": "1.2", "unit": "dS/m",
        "compensated": True, "taken_at": "2026-11-30T09:20:00+01:00", "visited_by": "J.K."})
    ctx, page = new_page(browser, size)
    page.goto(f"{server.url}/?correct={rec['uuid']}")
    wait_text(page, "#correcting", "taken 2026-11-30 09:20")
    assert page.input_value("#taken_at") == "2026-11-30T09:20"
    page.fill("#value", "1.3")
    page.wait_for_selector("#preview dl.results")
    page.click("#save")
    page.wait_for_url(f"{server.url}/sites/{rec['site_id']}")
    recs = readings(server.url, "Block 3")
    new = next(r for r in recs if r["supersedes_uuid"] == rec["uuid"])
    assert new["taken_at"] == "2026-11-30T09:20:00+01:00"
    assert new["visit_date"] == "2026-11-30" and new["visited_by"] == "J.K."
    versions = page.inner_text(f"article[data-uuid='{new['uuid']}'] .versions")
    assert "Earlier version" in versions and "1.2 dS/m" in versions and "1.3 dS/m" in versions
    assert "(time changed)" not in versions
    ctx.close()


def test_a_correction_may_change_the_time_on_purpose(browser, server):
    rec = api(server.url, "/api/readings", {
        "site": "Block 3", "sample": "water", "value": "1.2", "unit": "dS/m",
        "compensated": True, "taken_at": "2026-11-30T09:20:00+01:00"})
    ctx, page = new_page(browser, TABLET)
    page.goto(f"{server.url}/?correct={rec['uuid']}")
    wait_text(page, "#correcting", "taken")
    page.fill("#taken_at", "2026-11-30T10:05")
    page.click("#save")
    page.wait_for_url(f"{server.url}/sites/{rec['site_id']}")
    new = next(r for r in readings(server.url, "Block 3") if r["supersedes_uuid"] == rec["uuid"])
    assert new["taken_at"] == "2026-11-30T10:05:00+01:00"     # in the reading's own offset
    ctx.close()


@SIZES
def test_an_error_flag_needs_one_deliberate_tap_and_is_recorded(browser, server, size):
    ctx, page = new_page(browser, size)
    page.goto(server.url + "/")
    type_reading(page, "Farm A well 2", "water", "mS/cm")
    page.fill("#value", "350")            # tap water typed with the wrong unit
    page.wait_for_selector("#preview li.flag.error[data-code='unit_slip']")
    page.click("#save")
    page.wait_for_selector("#confirm:not([hidden])")
    assert "Unit looks wrong" in page.inner_text("#confirm")
    assert in_view(page, "#save-anyway")
    page.wait_for_timeout(500)
    assert api(server.url, "/api/readings") == []        # nothing stored yet
    page.click("#save-anyway")
    wait_text(page, "#saved", "Saved to the log")
    [rec] = readings(server.url, "Farm A well 2")
    assert "unit_slip" in rec["flags"]
    page.goto(f"{server.url}/sites/{rec['site_id']}")
    ack = page.inner_text("li.flag[data-code='unit_slip'] .ack")
    assert "Seen before saving; saved anyway" in ack
    ctx.close()


def test_the_fix_button_avoids_the_extra_tap(browser, server):
    ctx, page = new_page(browser, PHONE_390)
    page.goto(server.url + "/")
    type_reading(page, "Farm A well 2", "water", "mS/cm")
    page.fill("#value", "350")
    page.click("#preview button[data-fix-unit]")
    page.wait_for_function("() => !document.querySelector(\"#preview li.flag[data-code='unit_slip']\")"
                           " && document.querySelector('#preview dl.results')")
    page.click("#save")
    wait_text(page, "#saved", "Saved to the log")
    assert page.is_hidden("#confirm")
    ctx.close()


def test_a_reading_saved_offline_that_arrives_flagged_is_shown_until_settled(browser, tmp_path):
    srv = ServerProcess(tmp_path / "log").start()
    ctx, page = new_page(browser, PHONE_390)
    answers = iter(["checked on a second meter: it really is 350 µS/cm"])
    page.on("dialog", lambda d: d.accept(next(answers)))
    try:
        page.goto(srv.url + "/")
        assert page.evaluate("navigator.serviceWorker.ready.then(() => true)")
        srv.stop()
        type_reading(page, "Farm A well 2", "water", "mS/cm")
        page.fill("#value", "350")
        page.click("#save")                  # no server: no checks now, kept on the device
        wait_text(page, "#saved", "waits on this device")
        srv.start()
        page.wait_for_selector("#arrived:not([hidden])", timeout=30000)
        text = page.inner_text("#arrived")
        assert "Unit looks wrong" in text and "350 mS/cm" in text
        assert in_view(page, "#arrived") or page.evaluate(
            "document.querySelector('#arrived').getBoundingClientRect().top < 2000")
        page.goto(srv.url + "/sites")
        assert "1 reading to check" in page.inner_text(".open-flags")
        page.goto(srv.url + "/")
        page.wait_for_selector("#arrived:not([hidden])")
        page.click("#arrived-list button:has-text('It is right')")
        page.wait_for_selector("#arrived", state="hidden")
        page.goto(srv.url + "/sites")
        assert page.query_selector(".open-flags") is None
    finally:
        ctx.close()
        srv.stop()


@SIZES
def test_carried_values_are_marked_and_the_temperature_does_not_travel(browser, server, size):
    api(server.url, "/api/readings", {"site": "Bench 4", "sample": "feed", "value": "2.1",
                                      "unit": "mS/cm", "compensated": True})
    ctx, page = new_page(browser, size)
    page.goto(server.url + "/")
    type_site(page, "Block 3")
    assert page.input_value("#sample") == ""           # a new site: the scout chooses
    page.select_option("#sample", "water")
    page.select_option("#unit", "dS/m")
    page.fill("#temp_c", "9")
    page.fill("#value", "1.1")
    page.wait_for_selector("#preview dl.results")
    page.click("#save")
    wait_text(page, "#saved", "Saved to the log")
    # what stays for the next reading is marked as carried
    for f in ("temp_c", "sample", "unit", "site"):
        assert "carried" in page.get_attribute(f"#{f}", "class"), f
    assert "carried over" in page.inner_text("label[for=temp_c]")
    # another existing site: its own last sample and unit, no temperature
    type_site(page, "Bench 4")
    assert page.input_value("#temp_c") == ""
    assert page.input_value("#sample") == "feed" and page.input_value("#unit") == "mS/cm"
    assert "as last time here" in page.inner_text("label[for=sample]")
    # a new site: no sample kind chosen
    type_site(page, "Block 9")
    assert page.input_value("#sample") == ""
    # typing in a carried field takes the mark away
    page.select_option("#sample", "water")
    assert "carried" not in (page.get_attribute("#sample", "class") or "")
    # after 30 minutes the last sample's temperature is not offered again
    type_site(page, "Block 3")
    page.evaluate("""() => { const k = 'fieldapp.form.v2';
        const v = JSON.parse(localStorage.getItem(k)); v.temp_c = '9';
        v.at = Date.now() - 31 * 60 * 1000; localStorage.setItem(k, JSON.stringify(v)); }""")
    page.reload()
    assert page.input_value("#temp_c") == ""
    assert page.input_value("#site") == "Block 3"
    page.evaluate("""() => { const k = 'fieldapp.form.v2';
        const v = JSON.parse(localStorage.getItem(k)); v.at = Date.now() - 5 * 60 * 1000;
        localStorage.setItem(k, JSON.stringify(v)); }""")
    page.reload()
    assert page.input_value("#temp_c") == "9"
    assert "carried" in page.get_attribute("#temp_c", "class")
    ctx.close()


@SIZES
def test_save_and_its_confirmation_are_on_screen_without_scrolling(browser, server, size):
    ctx, page = new_page(browser, size)
    page.goto(server.url + "/")
    header = page.evaluate("document.querySelector('header.top').getBoundingClientRect().height")
    assert header <= 64, header                      # one compact row
    assert in_view(page, "#save")
    type_reading(page, "Bench 4", "feed", "mS/cm")
    for v in ("2.1", "2.3", "2.5"):
        page.fill("#value", v)
        page.wait_for_selector("#preview dl.results")
        page.click("#save")
        wait_text(page, "#saved", f"Saved to the log: {v} mS/cm")
        assert in_view(page, "#saved") and in_view(page, "#save")
    assert page.evaluate("document.documentElement.scrollWidth <= window.innerWidth + 1")
    ctx.close()


def test_readings_sent_later_are_announced(browser, tmp_path):
    srv = ServerProcess(tmp_path / "log").start()
    ctx, page = new_page(browser, PHONE_390)
    try:
        page.goto(srv.url + "/")
        srv.stop()
        type_reading(page, "Bench 4", "feed", "mS/cm")
        for v in ("2.1", "2.4", "2.6"):
            page.fill("#value", v)
            page.click("#save")
            wait_text(page, "#saved", f"{v} mS/cm at Bench 4 waits on this device")
        srv.start()
        wait_text(page, "#saved", "3 readings sent", timeout=30000)
        text = page.inner_text("#saved")
        assert "2.1 mS/cm" in text and "2.4 mS/cm" in text and "2.6 mS/cm" in text
        assert in_view(page, "#saved")
        assert len(readings(srv.url, "Bench 4")) == 3
    finally:
        ctx.close()
        srv.stop()


# ---- no code, internal key or "from memory" on any screen

def _codes():
    """Flag codes, route and method keys, 'from memory', and the marks of a value
    that could not be computed shown as if it were one ("— MPa", Python's None, NaN)."""
    import re
    from fieldapp import labels
    from fieldapp.science import osmotic
    words = sorted(labels.FLAG_LABELS) + sorted(osmotic.PSI_S_ROUTES) + [
        "sp_dilution", "regression:", "proportional_below_range", "iso7888", "from memory",
        "— MPa", "— dS/m"]
    return [re.compile(re.escape(w)) for w in words] + [
        re.compile(r"\bNone\b(?! yet)"), re.compile(r"\bnan\b", re.IGNORECASE)]


def _leaks(codes, text):
    return [c.pattern for c in codes if c.search(text)]


def _visible_text(page):
    return page.evaluate("document.body.innerText")


def test_no_raw_code_method_key_or_from_memory_on_any_screen(browser, tmp_path):
    srv = ServerProcess(tmp_path / "log", extra=["--demo"]).start()
    ctx, page = new_page(browser, TABLET)
    try:
        sites = api(srv.url, "/api/sites")
        assert sites, "the demo has sites"
        # readings that raise flags of every severity, and a correction
        api(srv.url, "/api/readings", {"site": sites[0]["name"], "sample": "extract",
                                       "ratio": "1:5", "texture": "clay loam", "value": "0.84",
                                       "unit": "mS/cm"})
        api(srv.url, "/api/readings", {"site": sites[0]["name"], "sample": "water",
                                       "value": "350", "unit": "mS/cm", "compensated": True})
        urls = ["/", "/sites", "/map", "/meters"]
        for s in sites:
            urls += [f"/sites/{s['id']}", f"/sites/{s['id']}/report"]
        codes = _codes()
        for u in urls:
            page.goto(srv.url + u)
            page.wait_for_load_state("networkidle")
            page.evaluate("document.querySelectorAll('details').forEach(d => d.open = true)")
            text = _visible_text(page)
            leaked = _leaks(codes, text)
            assert not leaked, (u, leaked)
        # the preview of flagged readings speaks plainly too
        page.goto(srv.url + "/")
        type_site(page, sites[0]["name"])
        page.select_option("#sample", "extract")
        page.fill("#ratio", "1:5")
        page.fill("#value", "0.84")
        page.wait_for_selector("#preview dl.results")
        page.select_option("#sample", "water")
        page.select_option("#unit", "mS/cm")
        page.fill("#value", "350")
        page.wait_for_selector("#preview li.flag[data-code='unit_slip']")
        text = page.inner_text("#preview")
        leaked = _leaks(codes, text)
        assert not leaked, leaked
    finally:
        ctx.close()
        srv.stop()
