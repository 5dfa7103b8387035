"""The laptop's "Send to the office" page in headless Chromium at phone size
(390×844): pair with an office process, name the person, follow a site,
send, and read the progress and the outcome in words."""
from __future__ import annotations

import json
import urllib.request

import pytest

from conftest import ServerProcess
from fieldapp import store
from fieldapp.web.pairing import format_code, new_code

pytestmark = pytest.mark.browser
PHONE_390 = {"width": 390, "height": 844}


def post_json(url, body):
    req = urllib.request.Request(url, data=json.dumps(body).encode(), method="POST",
                                 headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=10) as r:
        return json.loads(r.read())


@pytest.fixture
def office_and_laptop(tmp_path):
    office = ServerProcess(tmp_path / "office").start()
    laptop = ServerProcess(tmp_path / "laptop").start()
    yield office, laptop
    laptop.stop()
    office.stop()


def test_send_to_the_office_at_phone_size(browser, office_and_laptop):
    office, laptop = office_and_laptop
    reading = {"site": "Block 3", "sample": "water", "unit": "dS/m", "temp_c": "25"}
    post_json(laptop.url + "/api/readings", {**reading, "value": "1.2"})   # before any person
    conn = store.connect(office.data_dir / store.DB_NAME)
    code = format_code(new_code(conn)["code"])
    ctx = browser.new_context(viewport=PHONE_390)
    page = ctx.new_page()
    page.goto(laptop.url + "/")
    page.click("header nav >> text=Office")
    page.wait_for_selector("#send-now")
    assert page.is_disabled("#send-now")             # not paired yet
    assert "Not paired" in page.inner_text("#office-line")
    # plain http to another machine is refused with words beside the field
    page.fill("#p-url", "http://192.168.7.7:8080")
    page.fill("#p-code", code)
    page.click("#pair-now")
    page.wait_for_function("() => document.querySelector('#perr-url').textContent.length > 0")
    assert "plain http" in page.inner_text("#perr-url")
    page.fill("#s-person", "Scout A")
    page.fill("#s-name", "Laptop 1")
    page.click("#save-person")
    page.wait_for_function("() => document.querySelector('#person-saved').textContent.length > 0")
    post_json(laptop.url + "/api/readings", {**reading, "value": "1.3"})   # taken by Scout A
    page.fill("#p-url", office.url)
    page.fill("#p-code", code)
    page.click("#pair-now")
    page.wait_for_function("() => !document.querySelector('#send-now').disabled")
    assert office.url in page.inner_text("#office-line")
    page.fill("#f-site", "Block 3")
    page.click("#follow-add")
    page.wait_for_selector("#follow-list li[data-site='Block 3']")
    page.click("#send-now")
    page.wait_for_selector("#send-progress .outcome", timeout=30000)
    out = page.inner_text("#send-progress")
    assert "Sent 2 reading version(s)" in out and "2 were new at the office" in out
    assert "Sent: 1 batch(es), 2 reading version(s)" in out
    # every button and field is a 44 px target, nothing scrolls sideways
    small = page.evaluate("""() => [...document.querySelectorAll('main button, main input')]
        .filter(e => e.offsetParent !== null)
        .map(e => [e.id || e.className, e.getBoundingClientRect().height])
        .filter(([_, h]) => h < 44)""")
    assert small == []
    assert page.evaluate("document.documentElement.scrollWidth <= window.innerWidth + 1")
    # the office has them, with who sent them
    acts = store.scout_activity(conn)
    assert sorted((a["person"] or "", a["device_name"], a["n"]) for a in acts) == [
        ("", "Laptop 1", 1), ("Scout A", "Laptop 1", 1)]        # the earlier one names no one
    conn.close()
    # the office's page lists the site and who sent it last
    page.goto(office.url + "/office")
    assert "Last sent by Scout A on Laptop 1" in page.inner_text("#office-sites")
    ctx.close()
