"""A site with many flagged readings (unit slips): its charts label only the
latest ones and list them, ring every one, and the site log's "Flagged only"
list (the link under the chart) holds every flagged reading, page by page;
the summary API sends chart points as compact arrays and still names every
flagged reading. Invented values: 900 entered as dS/m on a water sample is an
EC no irrigation water has (seawater is about 55 dS/m; FAO Irrigation and
Drainage Paper 29, Table 1, tops its classes at 3 dS/m), so it is flagged."""
from __future__ import annotations

import datetime as dt
import re
import xml.etree.ElementTree as ET

from fieldapp import interpret, store
from fieldapp.records import build_record

BOTH_BACKENDS = True

NS = {"s": "http://www.w3.org/2000/svg"}
SLIP = {"sample": "water", "value": "900", "unit": "dS/m", "temp_c": "20"}
WATER = {"sample": "water", "value": "650", "unit": "µS/cm", "temp_c": "18"}
N_DAYS = 82          # every fourth a plain reading: 61 slips, 21 plain


def _site(db) -> tuple[int, set[str]]:
    """Bench 4: 61 unit slips and 21 plain water readings, one a day."""
    t0 = dt.datetime(2026, 1, 1, 8, 0, tzinfo=dt.timezone.utc)
    recs = []
    for i in range(N_DAYS):
        base = SLIP if i % 4 else WATER
        recs.append(build_record({**base, "site": "Bench 4",
                                  "taken_at": (t0 + dt.timedelta(days=i)).isoformat()}))
    with store.transaction(db):
        store.insert_readings_bulk(db, recs)
    sid = store.get_site(db, "Bench 4")["id"]
    rows = store.view_readings(db, sid)
    flagged = {r["uuid"] for r in rows if interpret.is_flagged(r)}
    return sid, flagged


def _uuids(html: str) -> list[str]:
    return re.findall(r'<article class="reading[^"]*" data-uuid="([^"]+)"', html)


def test_every_flagged_reading_is_ringed_and_listed(client, db):
    sid, flagged = _site(db)
    assert len(flagged) == sum(1 for i in range(N_DAYS) if i % 4)   # every slip
    html = client.get(f"/sites/{sid}").get_data(as_text=True)
    svg = re.search(r'<svg[^>]*class="chart trend".*?</svg>', html, re.S).group(0)
    root = ET.fromstring(svg)
    labelled = root.findall(".//s:path[@class='mark flagged']", NS)
    more = root.find(".//s:g[@class='flagged-more']", NS)
    assert len(labelled) == 10 and int(more.get("data-n")) == len(flagged) - 10
    assert {m.get("data-key") for m in labelled} <= flagged
    # the caption counts them, lists the latest ten and links to all of them
    assert f"{len(flagged)} flagged readings on this chart" in html
    listed = re.search(r'<ul class="sv-flagged-list[^"]*">(.*?)</ul>', html, re.S).group(1)
    assert listed.count("<li>") == 10 and "Unit looks wrong" in listed   # names, not codes
    assert "unit_slip" not in listed
    link = re.search(r'<a href="([^"]+)" class="flagged-link">', html).group(1)
    # the flagged list, newest first, page by page, holds each flagged reading once
    seen, url = [], link.replace("&amp;", "&")
    while url:
        page = client.get(url)
        assert page.status_code == 200
        body = page.get_data(as_text=True)
        assert 'id="flagged-note"' in body and 'id="flagged-only" checked' in body
        seen += _uuids(body)
        nxt = re.search(r'id="older-readings" rel="next" href="([^"]+)"', body)
        url = nxt and nxt.group(1).replace("&amp;", "&")
    assert len(seen) == len(set(seen)) and set(seen) == flagged
    assert len(seen) > 50                                           # more than one page
    every = _uuids(client.get(f"/sites/{sid}").get_data(as_text=True))
    assert not set(every[:50]) <= flagged                             # the plain log is mixed


def test_flagged_list_follows_voids_and_filters(client, db):
    sid, flagged = _site(db)
    gone = sorted(flagged)[0]
    assert client.post(f"/api/readings/{gone}/void",
                       json={"reason": "entered twice"}).status_code == 200
    body = client.get(f"/sites/{sid}?flagged=1").get_data(as_text=True)
    assert gone not in _uuids(body) and len(_uuids(body)) == 50
    body = client.get(f"/sites/{sid}?flagged=1&sample=feed").get_data(as_text=True)
    assert _uuids(body) == [] and "No flagged readings match the filter" in body
    assert client.get(f"/sites/{sid}?flagged=1&after=nonsense").status_code in (400, 404)


def test_summary_api_points_are_compact_and_name_every_flagged_reading(client, db):
    sid, flagged = _site(db)
    s = client.get(f"/api/sites/{sid}/summary").get_json()
    assert s["point_fields"] == ["t", "y", "key", "flagged"]
    pts = [p for c in s["charts"] for x in c["series"] for p in x["points"]]
    assert all(isinstance(p, list) and len(p) == 4 for p in pts)
    assert {p[2] for p in pts if p[3]} == flagged
    slip = next(p for p in pts if p[3])
    assert slip[1] > 100                              # 900 dS/m at 20 °C, as EC at 25 °C
