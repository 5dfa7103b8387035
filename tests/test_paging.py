"""Keyset paging of every list (GET /api/readings, GET /api/sites, the site
log, the sites list): stable order, no duplicates or gaps across pages while
readings are added between two pages."""
from __future__ import annotations

import re
import uuid as uuidlib

import pytest

from fieldapp import store

# Store, API and CSV behaviour: every test here runs on SQLite and on PostgreSQL
# (conftest.py; the PostgreSQL half needs FIELDAPP_TEST_PG, set by tests/run.sh).
BOTH_BACKENDS = True


def reading(site, minute, value="1.2", **kw):
    return {"uuid": str(uuidlib.uuid4()), "site": site, "sample": "water", "value": value,
            "unit": "dS/m", "compensated": True,
            "taken_at": f"2026-05-14T{8 + minute // 60:02d}:{minute % 60:02d}:00+02:00", **kw}


def save(client, body):
    r = client.post("/api/readings", json=body)
    assert r.status_code == 201, r.get_json()
    return r.get_json()


def walk(client, url, added_between=()):
    """Follow the next links; call each of added_between after a page."""
    seen, pages, extra = [], 0, list(added_between)
    while url:
        r = client.get(url)
        assert r.status_code == 200, r.get_json()
        body = r.get_json()
        seen.extend(body)
        pages += 1
        link = r.headers.get("Link")
        if link is None:
            assert "X-Next-Cursor" not in r.headers
            break
        m = re.fullmatch(r'<([^>]+)>; rel="next"', link)
        assert m, link
        assert r.headers["X-Next-Cursor"] in m.group(1)
        url = m.group(1)
        if extra:
            extra.pop(0)()
    return seen, pages


def test_pages_cover_every_reading_once_while_readings_are_added(client):
    before = [save(client, reading("Block 3", m % 17)) for m in range(40)]   # many share a time
    before += [save(client, reading("Bench 4", m)) for m in range(5)]      # another site

    def add(minute):
        return lambda: save(client, reading("Block 3", minute))

    # between pages: later, earlier and equal times (the equal one next to the cursor)
    adds = [add(59), add(0), add(8), add(16), add(3), add(70)]
    seen, pages = walk(client, "/api/readings?site=Block 3&limit=7", adds)
    uuids = [r["uuid"] for r in seen]
    assert len(uuids) == len(set(uuids)), "a reading came twice"
    wanted = {r["uuid"] for r in before if r["site"] == "Block 3"}
    assert wanted <= set(uuids), "a reading that was there all along was skipped"
    assert all(r["site"] == "Block 3" for r in seen)
    keys = [(r["taken_at"], r["id"]) for r in seen]
    assert keys == sorted(keys, reverse=True) and len(set(keys)) == len(keys)
    assert pages >= 6


def test_default_page_and_filters(client):
    for m in range(3):
        save(client, reading("Block 3", m))
    save(client, {**reading("Block 3", 5), "sample": "feed"})
    r = client.get("/api/readings")
    assert r.status_code == 200 and len(r.get_json()) == 4 and "Link" not in r.headers
    feed = client.get("/api/readings?sample=feed&limit=1")
    assert [x["sample"] for x in feed.get_json()] == ["feed"] and "Link" not in feed.headers
    assert client.get("/api/readings?from=2026-05-15").get_json() == []
    assert len(client.get("/api/readings?from=2026-05-14&to=2026-05-14").get_json()) == 4


def test_page_size_default_and_bound(client, db):
    from fieldapp.records import build_record
    recs = [build_record(reading("Block 3", i % 600)) for i in range(store.PAGE_DEFAULT + 5)]
    with store.transaction(db):
        store.insert_readings_bulk(db, recs)
    r = client.get("/api/readings")
    assert len(r.get_json()) == store.PAGE_DEFAULT and "Link" in r.headers
    seen, _ = walk(client, "/api/readings")
    assert len({x["uuid"] for x in seen}) == store.PAGE_DEFAULT + 5


def test_a_page_of_readings_ends_before_its_size_limit_and_the_next_link_names_the_rest(
        client, monkeypatch):
    from fieldapp.web import readings as api
    saved = [save(client, reading("Block 3", m, note="a long note " * 40)) for m in range(30)]
    one = len(client.get(f"/api/readings/{saved[0]['uuid']}").get_data())
    monkeypatch.setattr(api, "PAGE_BYTES", 10 * one)
    r = client.get("/api/readings?limit=30")
    assert 5 <= len(r.get_json()) < 10 and len(r.get_data()) < 10 * one and "Link" in r.headers
    seen, pages = walk(client, "/api/readings?limit=30")
    assert [x["uuid"] for x in seen] == [x["uuid"] for x in sorted(
        saved, key=lambda x: (x["taken_at"], x["id"]), reverse=True)]
    assert pages >= 3
    monkeypatch.setattr(api, "PAGE_BYTES", one // 2)       # one reading a page, never none
    assert len(client.get("/api/readings?limit=30").get_json()) == 1


@pytest.mark.parametrize("query", ["limit=0", "limit=-1", "limit=101", "limit=501", "limit=abc", "limit=1.5",
                                   "limit=１０", "after=xyz", "after=WzFd", "after=" + "A" * 2000,
                                   "after=" + store.encode_cursor(1, "x"), "from=yesterday"])
def test_a_bad_limit_or_cursor_is_a_clear_400(client, query):
    r = client.get("/api/readings?" + query)
    assert r.status_code == 400
    assert r.get_json()["field"] in ("limit", "after", "from")


def test_site_counts_kept_between_requests_follow_new_readings(client, db):
    def listed():
        return {s["name"]: s["n_readings"] for s in client.get("/api/sites").get_json()}

    save(client, reading("Block 3", 1))
    assert listed() == {"Block 3": 1}
    first = save(client, reading("Block 3", 2))
    save(client, reading("Bench 4", 3))
    client.post(f"/api/readings/{first['uuid']}/correct", json={"value": "1.3"})
    counted = {s["name"]: s["n_readings"] for s in store.list_sites(db)}   # counted afresh
    assert listed() == counted == {"Block 3": 3, "Bench 4": 1}
    assert "3 readings" in client.get("/sites").get_data(as_text=True)


def test_sites_are_paged_by_name(client, db):
    names = [f"Block {i:03d}" for i in range(12)] + ["block 005b", "Bench 4"]
    for n in names:
        assert client.post("/api/sites", json={"name": n}).status_code == 201
    seen, pages = walk(client, "/api/sites?limit=5")
    got = [s["name"] for s in seen]
    assert sorted(got, key=str.lower) == got and sorted(got) == sorted(names)
    assert pages == 3
    html = client.get("/sites").get_data(as_text=True)
    assert all(n in html for n in names) and 'id="more-sites"' not in html


def test_site_log_shows_latest_page_with_older_on_demand(client, app):
    from fieldapp.web import sites as site_pages
    first = save(client, reading("Block 3", 0, value="7.77"))
    for m in range(1, site_pages.READINGS_PER_PAGE + 20):
        save(client, reading("Block 3", m))
    # a correction of the oldest reading, taken now: the earlier version is on the last page
    r = client.post(f"/api/readings/{first['uuid']}/correct",
                    json={"value": "7.5", "taken_at": "2026-05-14T23:00:00+02:00"})
    assert r.status_code == 201
    sid = first["site_id"]
    html = client.get(f"/sites/{sid}").get_data(as_text=True)
    shown = re.findall(r'<article class="reading[^"]*" data-uuid="([^"]+)"', html)
    assert len(shown) == site_pages.READINGS_PER_PAGE
    assert 'class="versions"' in html and "7.77" in html     # earlier version looked up
    m = re.search(r'id="older-readings" rel="next" href="([^"]+)"', html)
    assert m, "no link to older readings"
    older = client.get(m.group(1).replace("&amp;", "&")).get_data(as_text=True)
    rest = re.findall(r'<article class="reading[^"]*" data-uuid="([^"]+)"', older)
    assert not set(shown) & set(rest)
    assert len(shown) + len(rest) == site_pages.READINGS_PER_PAGE + 21
    assert 'id="older-readings"' not in older and 'id="newest-readings"' in older
    assert client.get(f"/sites/{sid}?after=garbage").status_code == 404


def test_long_chart_series_are_thinned_keeping_extremes_and_flags():
    from fieldapp import interpret
    import random
    rng = random.Random(3)
    pts = [{"t": f"2025-{1 + i // 2800:02d}-{1 + i // 100 % 28:02d}T{i % 24:02d}:{i % 60:02d}",
            "y": rng.uniform(1, 5), "flagged": False, "key": str(i)} for i in range(20000)]
    pts[777]["y"], pts[15000]["y"] = 42.0, -0.5           # the extremes
    for i in (3, 9999, 19998):
        pts[i]["flagged"] = True
    out = interpret.thin_points(pts)
    keys = {p["key"] for p in out}
    assert len(out) <= interpret.MAX_POINTS_PER_SERIES + 5
    assert {"777", "15000", "3", "9999", "19998"} <= keys
    assert [p["t"] for p in out] == sorted(p["t"] for p in out)
    # every bucket's own highest value survives: the upper envelope is kept (buckets
    # are equal spans of calendar days from the first day to the last)
    import datetime as dt
    ts = sorted(pts, key=lambda p: p["t"])
    o = [dt.date.fromisoformat(p["t"][:10]).toordinal() for p in ts]
    n_b = interpret.MAX_POINTS_PER_SERIES // 2
    for b in range(n_b):
        span = [p for p, d in zip(ts, o) if (d - o[0]) * n_b // (o[-1] - o[0] + 1) == b]
        if span:
            assert max(span, key=lambda p: p["y"])["key"] in keys
    assert interpret.thin_points(pts[:50]) == pts[:50]
