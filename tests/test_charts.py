"""The SVG pictures: one mark per reading, bands at the published class
limits, reference lines at the published yield ECe, text escaped, and great-
circle distances against a published worked example. Sources beside each check."""
from __future__ import annotations

import re

import math
import xml.etree.ElementTree as ET

import pytest

from fieldapp import charts, interpret

NS = {"s": "http://www.w3.org/2000/svg"}

# USDA-NRCS soil salinity classes (Soil Survey Manual; the same breaks as USDA
# Handbook 60, Richards 1954): lower limits of very slightly, slightly,
# moderately and strongly saline, ECe in dS/m. Independent literal.
NRCS_CLASS_LIMITS = (0.0, 2.0, 4.0, 8.0, 16.0)
# FAO Irrigation and Drainage Paper 29 Rev. 1 (Ayers and Westcot 1985), Table 1:
# degree of restriction on use by ECw: none < 0.7, slight to moderate 0.7-3.0,
# severe > 3.0 dS/m.
FAO29_TABLE1 = (0.7, 3.0)
# FAO 29 Table 4, tomato: ECe at 100, 90, 75, 50 % yield potential (from memory,
# the same values as tests/test_tolerance.py).
FAO29_TOMATO = {100: 2.5, 90: 3.5, 75: 5.0, 50: 7.6}


def parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)  # also proves the SVG is well-formed XML


def y_scale(root):
    """The value -> pixel map of the chart, read from its own tick lines."""
    ticks = [(float(t.get("data-value")), float(t.get("y1")))
             for t in root.iterfind(".//s:line[@class='tick']", NS)]
    (v0, p0), (v1, p1) = ticks[0], ticks[-1]
    return lambda v: p0 + (v - v0) * (p1 - p0) / (v1 - v0)


def points(n, day0=1, series="15 cm", y0=1.0, dy=0.7, flagged=()):
    return [{"t": f"2026-03-{day0 + 7 * i:02d}T09:00:00+01:00", "y": y0 + dy * i,
             "key": f"{series}-{i}", "flagged": i in flagged, "label": f"{series} {i}"}
            for i in range(n)]


def soil_spec(series, crop="tomato"):
    from fieldapp.science import tolerance
    return {"title": "t", "y_label": "ECe, dS/m", "series": series,
            "bands": interpret.soil_bands(),
            "lines": interpret.crop_lines(tolerance.find_crop(crop) if crop else None)}


def test_one_mark_per_reading_with_its_key():
    series = [{"name": "15 cm", "points": points(4)},
              {"name": "45 cm", "points": points(3, series="45 cm", y0=2.0)}]
    svg = charts.trend_svg(soil_spec(series))
    root = parse(svg)
    marks = root.findall(".//s:path[@data-key]", NS)
    assert len(marks) == 7
    assert {m.get("data-key") for m in marks} == {p["key"] for s in series for p in s["points"]}
    assert charts.svg_marks(svg) == 7
    # depths are separate series: two series lines, each a different dash pattern
    lines = root.findall(".//s:polyline[@class='series-line']", NS)
    assert len(lines) == 2 and lines[0].get("stroke-dasharray") != lines[1].get("stroke-dasharray")
    # and different marker shapes (black and white print): different path outlines,
    # each series' marks in a group that names it
    groups = root.findall(".//s:g[@class='series-marks']", NS)
    shapes = {g.get("data-series"): re.sub(r"[^A-Za-z]", "", g.find("s:path", NS).get("d"))
              for g in groups}
    assert len(shapes) == 2 and len(set(shapes.values())) == 2
    assert sum(len(g.findall("s:path[@data-key]", NS)) for g in groups) == 7


def test_soil_bands_at_the_published_class_limits_and_drawn_where_the_axis_says():
    svg = charts.trend_svg(soil_spec([{"name": "15 cm", "points": points(3, y0=3.0, dy=3.0)}]))
    root = parse(svg)
    Y = y_scale(root)
    top = float(root.get("data-y-top"))
    bands = root.findall(".//s:rect[@class='band']", NS)
    los = [float(b.get("data-lo")) for b in bands]
    visible = [lo for lo in NRCS_CLASS_LIMITS if lo < top]
    assert los == pytest.approx(visible)
    for b in bands:
        lo = float(b.get("data-lo"))
        hi = float(b.get("data-hi")) if b.get("data-hi") else top
        y, h = float(b.get("y")), float(b.get("height"))
        assert y + h == pytest.approx(Y(lo), abs=0.11)      # lower edge at the class limit
        assert y == pytest.approx(Y(min(hi, top)), abs=0.11)
    for lo, hi in zip(NRCS_CLASS_LIMITS, NRCS_CLASS_LIMITS[1:]):
        b = [x for x in bands if float(x.get("data-lo")) == lo]
        if b:
            assert float(b[0].get("data-hi")) == hi
    # every band says which class it is, for a black-and-white print
    labels = [t.text for t in root.iterfind(".//s:text[@class='band-label']", NS)]
    assert "Slightly saline" in labels and "Very slightly saline" in labels


def test_crop_lines_at_the_fao29_yield_ece_of_tomato():
    svg = charts.trend_svg(soil_spec([{"name": "15 cm", "points": points(2, y0=4.0)}]))
    root = parse(svg)
    Y = y_scale(root)
    got = {l.get("data-key"): l for l in root.iterfind(".//s:line[@class='ref-line']", NS)}
    for p, ece in FAO29_TOMATO.items():
        line = got[f"yield_{p}"]
        assert float(line.get("data-value")) == pytest.approx(ece, abs=0.15)
        assert float(line.get("y1")) == pytest.approx(Y(float(line.get("data-value"))), abs=0.11)
    # each yield line has its own dash pattern (readable without colour)
    dashes = [got[f"yield_{p}"].get("stroke-dasharray") for p in FAO29_TOMATO]
    assert len(set(dashes)) == 4


def test_far_yield_lines_are_named_instead_of_squashing_the_readings():
    # barley 50 % yield is at 18 dS/m (FAO 29 Table 4, from memory); readings near 1 dS/m
    svg = charts.trend_svg(soil_spec([{"name": "20 cm", "points": points(2, y0=1.0, dy=0.2)}],
                                     crop="barley"))
    root = parse(svg)
    keys = {l.get("data-key") for l in root.iterfind(".//s:line[@class='ref-line']", NS)}
    assert "yield_100" in keys and "yield_50" not in keys
    assert "barley 50 % yield: 18 (above the chart)" in svg
    assert float(root.get("data-y-top")) < 18


def test_flagged_points_get_a_ring_and_others_do_not():
    svg = charts.trend_svg(soil_spec([{"name": "15 cm", "points": points(4, flagged=(1, 3))}]))
    root = parse(svg)
    assert len(root.findall(".//s:circle[@class='flag-ring']", NS)) == 2
    assert len(root.findall(".//s:path[@class='mark flagged']", NS)) == 2
    assert "flag raised" in svg
    svg2 = charts.trend_svg(soil_spec([{"name": "15 cm", "points": points(4)}]))
    assert "flag-ring" not in svg2 and "flag raised" not in svg2


def _many(n, flagged_every=1, y=None):
    """n points a day apart from 2026-01-01, every ``flagged_every``-th flagged."""
    import datetime as dt
    d0 = dt.date(2026, 1, 1)
    return [{"t": (d0 + dt.timedelta(days=i)).isoformat() + "T09:00:00+00:00",
             "y": y if y is not None else 1.0 + (i % 7), "key": f"k{i}",
             "flagged": i % flagged_every == 0, "label": f"water {i}"} for i in range(n)]


def test_flagged_points_beyond_the_labelled_keep_ring_and_mark():
    pts = _many(60, flagged_every=2)                    # 30 flagged, 30 not
    spec = soil_spec([{"name": "water", "points": pts}])
    whole = charts.trend_svg(spec)
    svg = charts.trend_svg(dict(spec, label_flagged=5, ref="t0-"))
    root = parse(svg)
    labelled = root.findall(".//s:path[@class='mark flagged']", NS)
    # the latest 5 flagged keep their own mark, key and label, in time order
    assert [m.get("data-key") for m in labelled] == ["k50", "k52", "k54", "k56", "k58"]
    assert [m.find("s:title", NS).text for m in labelled][-1] == "water 58"
    # the other 25: one ring and one mark each, drawn by <use> of one definition
    more = root.find(".//s:g[@class='flagged-more']", NS)
    assert more.get("data-n") == "25"
    uses = more.findall("s:use", NS)
    assert len(uses) == 25 and {u.get("href") for u in uses} == {"#t0-0"}
    ring_and_mark = root.find(".//s:defs/s:g[@id='t0-0']", NS)
    assert ring_and_mark.find("s:circle", NS).get("stroke-dasharray") and \
        ring_and_mark.find("s:path", NS) is not None
    # each drawn where its own mark would be (whole pixels; 1 decimal in the full chart)
    full = {m.get("data-key"): m.get("d") for m in parse(whole).iterfind(".//s:path[@data-key]", NS)}
    for u, k in zip(uses, [f"k{i}" for i in range(0, 50, 2)]):
        x, y = (float(v) for v in full[k][1:].split("a")[0].split(","))
        assert abs(float(u.get("x")) - (x + 4.5)) <= 0.56 and abs(float(u.get("y")) - y) <= 0.56
    assert len(root.findall(".//s:path[@class='mark']", NS)) == 30      # unflagged: unchanged
    assert charts.svg_marks(svg) == charts.svg_marks(whole) == 60
    assert len(svg) < len(whole)
    # without label_flagged (and with it at or above the count) nothing changes
    assert charts.trend_svg(dict(spec, label_flagged=30)) == whole
    assert "flagged-more" not in whole


def test_flagged_points_on_one_pixel_are_drawn_once_and_counted():
    pts = [dict(p, t="2026-01-01T09:00:00+00:00") for p in _many(12, y=5.0)]
    pts.append({"t": "2026-06-01T09:00:00+00:00", "y": 1.0, "key": "end", "flagged": False})
    svg = charts.trend_svg(dict(soil_spec([{"name": "water", "points": pts}]), label_flagged=2))
    more = parse(svg).find(".//s:g[@class='flagged-more']", NS)
    assert more.get("data-n") == "10" and len(more.findall("s:use", NS)) == 1
    assert charts.svg_marks(svg) == 13


def test_latest_flagged_picks_across_series_by_time():
    a = [{"t": "2026-01-05", "y": 1, "flagged": True, "key": "a5"},
         {"t": "2026-01-01", "y": 1, "flagged": True, "key": "a1"}]
    b = [{"t": "2026-01-03", "y": 2, "flagged": True, "key": "b3"},
         {"t": "2026-01-09", "y": 2, "flagged": False, "key": "b9"}]
    got = charts.latest_flagged([{"points": a}, {"points": b}], 2)
    assert [(i, p["key"]) for i, p in got] == [(1, "b3"), (0, "a5")]
    assert len(charts.latest_flagged([{"points": a}, {"points": b}], None)) == 3
    assert charts.latest_flagged([{"points": a}], 0) == []


def test_user_text_is_escaped():
    evil = '<script>alert("x")</script> & "quotes"'
    spec = soil_spec([{"name": evil, "points": [dict(p, label=evil, key=evil)
                                                  for p in points(2)]}])
    spec["title"] = evil
    svg = charts.trend_svg(spec)
    assert "<script>" not in svg
    root = parse(svg)
    texts = "".join(root.itertext())
    assert evil in texts  # shown as text, not markup
    msvg = charts.map_svg([{"lat": 10, "lon": 20, "name": evil}])
    assert "<script>" not in msvg and evil in "".join(parse(msvg).itertext())


def test_water_chart_bands_at_fao29_table1_limits():
    cur = [{"uuid": f"w{i}", "sample": "water", "status": "current", "ec25_dS_m": v,
            "taken_at": f"2026-0{i + 1}-10T08:00:00+00:00", "visit_date": f"2026-0{i + 1}-10",
            "result": {"ec25_dS_m": v, "flags": []}} for i, v in enumerate((0.5, 1.4, 3.6))]
    specs = interpret.chart_specs({"crop": None}, cur)
    assert [s["id"] for s in specs] == ["solution"]
    root = parse(charts.trend_svg(specs[0]))
    bands = root.findall(".//s:rect[@class='band']", NS)
    limits = sorted({float(b.get("data-lo")) for b in bands} - {0.0})
    assert limits == pytest.approx(list(FAO29_TABLE1))
    assert len(root.findall(".//s:path[@data-key]", NS)) == 3


def test_nothing_to_draw_gives_an_empty_string():
    assert charts.trend_svg({"series": [{"name": "x", "points": []}]}) == ""
    assert charts.profile_svg({"series": [{"name": "x", "points": [{"depth": None, "x": 1}]}]}) == ""
    assert charts.map_svg([{"lat": None, "lon": None, "name": "x"}]) == ""


def test_depth_profile_one_mark_per_depth_and_deeper_is_lower():
    spec = {"title": "p", "x_label": "ECe, dS/m", "bands": interpret.soil_bands(), "lines": [],
            "series": [{"name": "2026-05-01", "points": [
                {"depth": 15, "x": 3.1, "key": "a"}, {"depth": 45, "x": 4.4, "key": "b"},
                {"depth": 90, "x": 6.0, "key": "c", "flagged": True}]}]}
    root = parse(charts.profile_svg(spec))
    marks = {m.get("data-key"): m for m in root.iterfind(".//s:path[@data-key]", NS)}
    assert set(marks) == {"a", "b", "c"}

    def y_of(m):  # every marker path starts at a point offset from its centre by < 6 px
        return float(m.get("d")[1:].split(",")[1].split("a")[0].split("h")[0].split("L")[0])
    assert y_of(marks["a"]) < y_of(marks["b"]) < y_of(marks["c"])
    # vertical bands at the class limits
    los = sorted(float(b.get("data-lo")) for b in root.iterfind(".//s:rect[@class='band']", NS))
    assert los[:3] == [0.0, 2.0, 4.0]
    assert len(root.findall(".//s:circle[@class='flag-ring']", NS)) == 1


# --------------------------------------------------------------------------- distances

def test_haversine_against_the_published_worked_example():
    # Rosetta Code, "Haversine formula" task: (36.12, -86.67) to (33.94, -118.40)
    # is 2886.444442837983 km with R = 6371.0 km and 2887.259950607110 km with
    # R = 6372.8 km (values read from the task page).
    assert charts.haversine_km(36.12, -86.67, 33.94, -118.40, radius_km=6371.0) == \
        pytest.approx(2886.444442837983, rel=1e-12)
    assert charts.haversine_km(36.12, -86.67, 33.94, -118.40, radius_km=6372.8) == \
        pytest.approx(2887.259950607110, rel=1e-12)
    # symmetric, zero on the spot, half the circumference for antipodes
    assert charts.haversine_km(10, 20, 10, 20) == 0
    assert charts.haversine_km(0, 0, 0, 180, radius_km=1.0) == pytest.approx(math.pi)


def test_map_plot_matches_the_distances():
    sites = [{"lat": 10.0012, "lon": 20.0031, "name": "A"},
             {"lat": 10.0040, "lon": 20.0075, "name": "B"},
             {"lat": 10.0021, "lon": 20.0010, "name": "C"}]
    svg = charts.map_svg(sites)
    root = parse(svg)
    pts = [(float(c.get("cx")), float(c.get("cy"))) for c in root.iterfind(".//s:g[@class='site-point']/s:circle", NS)]
    assert len(pts) == 3
    scale = float(root.get("data-px-per-km"))
    m = charts.distance_matrix(sites)
    for i in range(3):
        for j in range(i + 1, 3):
            px = math.dist(pts[i], pts[j])
            # the flat local plot agrees with the great-circle distance over a farm
            assert px / scale == pytest.approx(m[i][j], rel=0.005)
    # north up: B is north of A, so it is drawn higher
    assert pts[1][1] < pts[0][1]
    assert "N</text>" in svg and 'class="scale-bar"' in svg


@pytest.mark.parametrize("km,text", [(0.0123, "12 m"), (0.25, "250 m"), (0.574, "570 m"),
                                     (2.44, "2.4 km"), (37.4, "37 km")])
def test_format_distance(km, text):
    assert charts.format_distance(km) == text


def test_ticks_are_round_and_cover_the_range():
    assert charts.nice_ticks(0, 4.7) == [0, 1, 2, 3, 4, 5]
    assert charts.nice_ticks(0, 19.4)[-1] >= 19.4
    t = charts.time_ticks(charts._day_number(charts.parse_time("2026-08-03")),
                          charts._day_number(charts.parse_time("2026-12-01")))
    assert [lab for _, lab in t] == ["Sep 2026", "Oct", "Nov", "Dec"]
    # the wall-clock day is kept: 23:30 at +10:00 stays on the 5th
    assert charts.parse_time("2026-03-05T23:30:00+10:00").day == 5
