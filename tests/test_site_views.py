"""The site views as a query (store.site_rows, schema 019): the summary, the
charts and the profile made from the few rows the database picks say what the
same functions say over every reading of the site (store.view_readings, itself
checked against the result JSON in test_view_columns.py), on the demo log, on
a site with corrections, voids and flagged readings, and on a long site whose
chart series are thinned. The interpretation's own numbers are checked against
published tables in test_interpret.py."""
from __future__ import annotations

import datetime as dt
import random

import pytest

from fieldapp import demo, interpret, store
from fieldapp.records import build_record, save_reading

SOIL = {"sample": "extract", "ratio": "1:5", "unit": "mS/cm", "temp_c": "20", "texture": "loam"}
PASTE = {"sample": "paste", "unit": "dS/m", "compensated": True}
WATER = {"sample": "water", "unit": "µS/cm", "temp_c": "18"}
FEED = {"sample": "feed", "unit": "mS/cm", "compensated": True}
LEACH = {"sample": "leachate", "unit": "mS/cm", "compensated": True}
SLIP = {"sample": "water", "value": "900", "unit": "dS/m", "temp_c": "20"}   # unit slip: error


def _close(a, b, path="") -> None:
    """Equal, but numbers within 1e-9 relative: a day's mean is an SQL AVG on
    one side and a Python sum on the other (the same numbers, maybe added in
    another order)."""
    if isinstance(a, float) and isinstance(b, float):
        assert a == pytest.approx(b, rel=1e-9), path
    elif isinstance(a, dict) and isinstance(b, dict):
        assert a.keys() == b.keys(), path
        for k in a:
            _close(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list) and isinstance(b, list):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b)):
            _close(x, y, f"{path}[{i}]")
    else:
        assert a == b, path


def _views_match(db, site: dict, as_of=None, highlight=None, cache=None) -> dict:
    site = dict(site)
    crop = interpret.site_crop(site)
    targets = store.list_targets(db, crop.name) if crop else []
    every = store.view_readings(db, site["id"])
    rows = store.site_rows(db, site["id"], as_of=as_of, keep_day=highlight, cache=cache)
    summary = interpret.summary_from_rows(site, rows, targets, as_of=as_of)
    _close(summary, interpret.site_summary(site, every, targets, as_of=as_of))
    specs = interpret.specs_from_series(site, rows["soil_series"], rows["sol_series"], targets,
                                        highlight=highlight)
    assert specs == interpret.chart_specs(site, every, targets, as_of=as_of, highlight=highlight)
    assert interpret.profile_spec(site, rows["profile"], day=as_of) == \
        interpret.profile_spec(site, every, day=as_of)
    n_every = len([r for r in every if r["status"] == "current"])
    picked = len({r["id"] for k in ("soil", "water", "substrate", "profile") for r in rows[k]})
    return {"summary": summary, "specs": specs, "rows": rows, "picked": picked, "n": n_every}


def test_demo_log_and_a_corrected_site(db):
    demo.load(db)
    a, _ = save_reading(db, {**SOIL, "value": "0.5", "depth_cm": "15", "theta_g_pct": "22",
                             "matric_MPa": "-0.1", "site": "Block 3",
                             "taken_at": "2026-04-01T09:00:00+02:00"})
    b, _ = save_reading(db, {**PASTE, "value": "4.1", "depth_cm": "45", "site": "Block 3",
                             "taken_at": "2026-05-01T09:10:00+02:00"})
    save_reading(db, {**PASTE, "value": "5.0", "depth_cm": "45", "site": "Block 3",
                      "supersedes": b["uuid"], "taken_at": "2026-05-01T09:10:00+02:00"})
    save_reading(db, {**SLIP, "site": "Block 3", "taken_at": "2026-05-01T09:20:00+02:00"})
    store.void_reading(db, a["uuid"], "probe not rinsed")
    store.update_site(db, store.get_site(db, "Block 3")["id"], crop="Tomato")
    sites = store.list_sites(db)
    assert len(sites) >= 5
    for site in sites:
        days = [v["visit_date"] for v in store.visits_for_site(db, site["id"])]
        for day in [None] + days[:3]:
            _views_match(db, site, as_of=day, highlight=day)
    s = _views_match(db, store.get_site(db, "Block 3"))["summary"]
    assert s["soil"]["depths"][-1]["ece_dS_m"] == pytest.approx(5.0, rel=0.01)   # the correction
    assert s["n_readings"] == s["n_current"] + 2                   # the void and the replaced one


def _long_site(db, days: int = 400, per_day: int = 4, seed: int = 5) -> int:
    """A greenhouse bench and its soil read several times a day for a year:
    every chart series longer than the charts draw whole (invented values)."""
    rng = random.Random(seed)
    start = dt.datetime(2025, 1, 1, 7, 0, tzinfo=dt.timezone(dt.timedelta(hours=1)))
    recs = []
    for d in range(days):
        if d % 9 == 4:
            continue                                   # a day without a visit
        for k in range(per_day):
            t = (start + dt.timedelta(days=d, minutes=37 * k)).isoformat(timespec="seconds")
            kinds = [(SOIL, f"{rng.choice((0.3, 0.5, 0.8, 1.1)):.1f}", "15" if k % 2 else "30"),
                     (PASTE, f"{rng.uniform(1, 9):.1f}", None),
                     (WATER, str(rng.choice((400, 650, 900, 1500))), None),
                     (FEED, f"{rng.uniform(1.5, 2.5):.2f}", None)]
            if d % 3 == 0:
                kinds.append((LEACH, f"{rng.uniform(1.5, 4.0):.2f}", None))
            if d % 50 == 7 and k == 0:
                kinds.append((SLIP, "900", None))
            if d % 5 == 1 and k == 1:              # paste and 1:5 in one series (30 cm)
                kinds.append((PASTE, f"{rng.choice((0.3, 2.0, 9.5)):.1f}", "30"))
            for base, value, depth in kinds:
                pl = {**base, "value": value, "site": "Bench 4", "taken_at": t}
                if depth:
                    pl["depth_cm"] = depth
                recs.append(build_record(pl))
    with store.transaction(db):
        store.insert_readings_bulk(db, recs)
    return store.get_site(db, "Bench 4")["id"]


def test_a_long_site_thinned_by_the_database(db):
    sid = _long_site(db)
    store.update_site(db, sid, kind="greenhouse", crop="Tomato")
    site = store.get_site(db, sid)
    out = _views_match(db, site)
    assert out["picked"] < out["n"] / 20          # a few rows, not the site
    series = {s["name"]: s for spec in out["specs"] for s in spec["series"]}
    water = series["water"]
    assert water["thinned_from"] > interpret.MAX_POINTS_PER_SERIES
    ys = [p["y"] for p in water["points"]]
    every = [r for r in store.view_readings(db, sid) if r["sample"] == "water"]
    assert max(ys) == max(r["ec25_dS_m"] for r in every)           # the slips survive
    assert min(ys) == min(r["ec25_dS_m"] for r in every)
    assert sum(p["flagged"] for p in water["points"]) == \
        sum(interpret.is_flagged(r) for r in every)
    gh = out["summary"]["greenhouse"]
    assert gh["visits_total"] > len(gh["visits"]) == interpret.FEED_LEACHATE_VISITS
    assert all(v["keys"] for v in gh["visits"])
    days = [v["visit_date"] for v in store.visits_for_site(db, sid)]
    for day in (days[0], days[len(days) // 2], days[-1]):          # reports of older visits
        out = _views_match(db, site, as_of=day, highlight=day)
        assert out["summary"]["last_date"] == day


def test_totals_kept_between_requests_follow_every_change(db):
    """store.SiteCache keeps a site's day totals and flagged readings between
    requests; after readings saved since (a new day, a late one for an old
    day, a unit slip), a void and a correction, the views made with it still
    say what the views over every reading say, and what site_rows says
    without it."""
    sid = _long_site(db, days=120)
    site = store.get_site(db, sid)
    cache = store.SiteCache()
    first = _views_match(db, site, cache=cache)
    assert _views_match(db, site, cache=cache)["rows"] == first["rows"]   # kept, same answer
    state, held = cache._sites[sid][:2]
    new = save_reading(db, {**WATER, "value": "5000", "site": "Bench 4",
                            "taken_at": "2025-06-01T08:00:00+01:00"})[0]       # a new highest
    save_reading(db, {**PASTE, "value": "0.2", "site": "Bench 4",
                      "taken_at": "2025-01-02T09:00:00+01:00"})                # late, an old day
    save_reading(db, {**SLIP, "site": "Bench 4", "taken_at": "2025-05-30T10:00:00+01:00"})
    out = _views_match(db, site, cache=cache)
    assert cache._sites[sid][1] is not held and store.log_state(db, sid)[1:] == state[1:]
    assert out["rows"] == store.site_rows(db, sid)
    water = [p for spec in out["specs"] for s in spec["series"] if s["name"] == "water"
             for p in s["points"]]
    assert new["uuid"] in {p["key"] for p in water}
    store.void_reading(db, new["uuid"], "meter not rinsed")
    old = store.view_readings(db, sid)[10]
    save_reading(db, {**WATER, "value": "700", "site": "Bench 4", "supersedes": old["uuid"],
                      "taken_at": old["taken_at"]})
    for day in (None, "2025-03-03"):
        out = _views_match(db, site, as_of=day, highlight=day, cache=cache)
        assert out["rows"] == store.site_rows(db, sid, as_of=day, keep_day=day)
    assert new["uuid"] not in {p["key"] for spec in out["specs"] for s in spec["series"]
                               for p in s["points"]}


def test_thinning_keeps_every_bucket_extreme_by_calendar_time():
    # 600 points over 300 days with a gap: each of the 60 spans of 5 days keeps its
    # first lowest and first highest point (independent check of the rule)
    pts = [{"t": (dt.date(2025, 1, 1) + dt.timedelta(days=i // 2)).isoformat() + f"T0{i % 2}",
            "y": float((i * 37) % 101), "flagged": False, "key": i} for i in range(600)
           if not 200 <= i < 260]
    out = interpret.thin_points(pts)
    keys = {p["key"] for p in out}
    for b in range(60):
        span = [p for p in pts if b * 5 <= (dt.date.fromisoformat(p["t"][:10])
                                            - dt.date(2025, 1, 1)).days < b * 5 + 5]
        if span:
            assert min(span, key=lambda p: p["y"])["key"] in keys
            assert max(span, key=lambda p: p["y"])["key"] in keys
    assert len(out) <= 122 and pts[0]["key"] in keys and pts[-1]["key"] in keys
