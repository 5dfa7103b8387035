"""Touch targets: on every page, at phone (360×740) and tablet (800×1280)
size, every link, button, field, summary and checkbox label is at least
44 × 44 CSS px (WCAG 2.2 success criterion 2.5.5, target size, enhanced).
Closed <details> are opened first so that what they hold is measured too."""
from __future__ import annotations

import pytest

from conftest import PHONE, TABLET, ServerProcess

pytestmark = pytest.mark.browser
MIN_PX = 44

MEASURE = """() => {
  document.querySelectorAll("details").forEach(d => { d.open = true; });
  const out = [];
  let n = 0;
  for (const el of document.querySelectorAll(
      "a[href], button, input, select, textarea, summary, [role=button], [tabindex]")) {
    if (el.type === "hidden" || el.closest("[hidden]")) continue;
    const cs = getComputedStyle(el);
    if (cs.display === "none" || cs.visibility === "hidden") continue;
    // a checkbox is tapped through the label around it
    const target = (el.type === "checkbox" || el.type === "radio") && el.closest("label")
      ? el.closest("label") : el;
    const r = target.getBoundingClientRect();
    if (r.width === 0 && r.height === 0) continue;
    n += 1;
    if (r.width < %(min)d || r.height < %(min)d) {
      out.push(`${el.tagName.toLowerCase()}${el.id ? "#" + el.id : ""} "${(el.innerText || el.value || el.name || "").trim().slice(0, 30)}" ${Math.round(r.width)}×${Math.round(r.height)}`);
    }
  }
  return {n, small: out};
}""" % {"min": MIN_PX}


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    s = ServerProcess(tmp_path_factory.mktemp("targets") / "log", extra=["--demo"]).start()
    yield s
    s.stop()


def pages(page, base):
    page.goto(base + "/sites")
    ids = {s["name"]: s["id"] for s in page.evaluate("fetch('/api/sites').then(r => r.json())")}
    soil, gh, water = ids["Farm A Block 3"], ids["Greenhouse B bench 4"], ids["Farm A well 2"]
    return ["/", "/sites", "/sites/new", f"/sites/{soil}", f"/sites/{gh}", f"/sites/{water}",
            f"/sites/{soil}/settings", f"/sites/{soil}/report", f"/sites/{gh}/report",
            f"/sites/{water}/report", "/map", "/meters", "/pair", "/pair/devices",
            "/no-such-page"]


@pytest.mark.parametrize("size", [PHONE, TABLET], ids=["phone", "tablet"])
def test_every_target_is_at_least_44_px(browser, demo, size):
    ctx = browser.new_context(viewport=size)
    page = ctx.new_page()
    small, counted = {}, 0
    for path in pages(page, demo.url):
        page.goto(demo.url + path)
        got = page.evaluate(MEASURE)
        counted += got["n"]
        if got["small"]:
            small[path] = got["small"]
    # the map's forms appear once a position is typed
    page.goto(demo.url + "/map")
    page.fill("#lat", "10.0012")
    page.fill("#lon", "20.0031")
    page.click("text=Show on the map")
    page.wait_for_selector("#here .nearest")
    got = page.evaluate(MEASURE)
    counted += got["n"]
    if got["small"]:
        small["/map (position shown)"] = got["small"]
    assert counted > 200          # the pages were there and measured
    assert small == {}
    ctx.close()
