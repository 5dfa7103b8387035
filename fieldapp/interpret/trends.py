"""Chart data (drawn by fieldapp.charts): the trend charts of soil ECe by
depth and solution EC by sample, long series thinned, and the depth profile."""
from __future__ import annotations

import datetime as dt
from collections import defaultdict
from typing import Iterable, Mapping

from ..labels import flag_label
from ..science import tolerance
from .common import (SOIL_KINDS, SOLUTION_KINDS, _day, _ec25, _ece, _flags,
                     current_readings, depth_label, is_flagged, short_number, site_crop)
from .soil import _depth_sort
from .targets import targets_for_crop

# --------------------------------------------------------------------------
# chart data (drawn by fieldapp.charts)
# --------------------------------------------------------------------------

YIELD_LINE_DASHES = {100: "", 90: "8 4", 75: "3 3", 50: "1 3"}


def crop_lines(crop) -> list[dict]:
    """Threshold and 90/75/50 % yield ECe of a crop as chart reference lines."""
    if crop is None:
        return []
    out = []
    for p in (100, 90, 75, 50):
        v = float(tolerance.ece_at_yield(crop, p))
        label = (f"{crop.name} threshold (100 %)" if p == 100 else f"{crop.name} {p} % yield")
        out.append({"y": round(v, 3), "key": f"yield_{p}", "dash": YIELD_LINE_DASHES[p],
                    "label": label, "short": "threshold" if p == 100 else f"{p} %"})
    return out


def soil_bands() -> list[dict]:
    shorts = {"non_saline": "non", "very_slightly_saline": "v.slight",
              "slightly_saline": "slight", "moderately_saline": "moderate",
              "strongly_saline": "strong"}
    return [{"lo": b["lo_dS_m"], "hi": b["hi_dS_m"], "label": b["label"], "key": b["key"],
             "short": shorts.get(b["key"], "")} for b in tolerance.soil_salinity_bands()]


def water_bands() -> list[dict]:
    lo, hi = tolerance.WATER_HAZARD_BOUNDS_dS_m
    lab = tolerance.WATER_HAZARD_LABELS
    return [{"lo": 0.0, "hi": lo, "label": "Water: " + lab["none"].lower(), "key": "none"},
            {"lo": lo, "hi": hi, "label": "Water: slight to moderate restriction",
             "key": "slight_to_moderate"},
            {"lo": hi, "hi": None, "label": "Water: severe restriction", "key": "severe"}]


def _point(r: Mapping, y: float, series: str) -> dict:
    """One chart point; its label is written by :func:`_label_point` once the
    series is thinned (a long series keeps ~120 of its points)."""
    return {"t": r.get("taken_at") or _day(r), "y": y, "key": r.get("uuid"),
            "flagged": is_flagged(r), "_label": (series, r)}


def _label_point(p: dict) -> dict:
    series, r = p.pop("_label")
    names = [flag_label(f["code"]) for f in _flags(r)]
    label = f"{series} · {str(r.get('taken_at') or '')[:10]} · {short_number(p['y'])} dS/m"
    if names:                           # the names a person reads, as in the site log
        label += " · " + "; ".join(names)
    p["label"] = label
    return p


#: A chart series longer than this is thinned (see :func:`thin_points`).
MAX_POINTS_PER_SERIES = 120


def day_buckets(days, n: int) -> dict[str, int]:
    """Each YYYY-MM-DD day -> its bucket: the calendar time from the first day
    to the last cut into ``n`` equal spans (bucket 0 .. n-1)."""
    o = {d: dt.date.fromisoformat(d).toordinal() for d in days}
    if not o:
        return {}
    o0, o1 = min(o.values()), max(o.values())
    return {d: (v - o0) * n // (o1 - o0 + 1) for d, v in o.items()}


def thin_points(points: list[dict], most: int = MAX_POINTS_PER_SERIES,
                keep_day: str | None = None, force: bool = False) -> list[dict]:
    """A long series thinned for drawing, in time order, without losing what
    matters: the time from its first to its last day is cut into ``most // 2``
    equal spans of days (:func:`day_buckets`) and each keeps its first lowest
    and first highest point, so every extreme survives; every flagged point,
    the first and last point and every point of ``keep_day`` (the visit a
    report is about) are kept too. Series up to ``most`` points are returned
    whole (``force``: thinned all the same, for the candidates the database
    picked, ``store.site_rows``).

    >>> pts = [{"t": f"2025-01-{1 + i % 28:02d}T{i % 24:02d}", "y": float(i % 97),
    ...         "flagged": i == 500} for i in range(2000)]
    >>> out = thin_points(pts, 100)
    >>> len(out) <= 103, max(p["y"] for p in out), min(p["y"] for p in out)
    (True, 96.0, 0.0)
    >>> any(p["flagged"] for p in out)
    True
    """
    if not points or (len(points) <= most and not force):
        return points
    pts = sorted(points, key=lambda p: str(p["t"]))
    bucket = day_buckets({str(p["t"])[:10] for p in pts}, max(1, most // 2))
    lo: dict[int, int] = {}
    hi: dict[int, int] = {}
    for i, p in enumerate(pts):
        b = bucket[str(p["t"])[:10]]
        if b not in lo or p["y"] < pts[lo[b]]["y"]:
            lo[b] = i
        if b not in hi or p["y"] > pts[hi[b]]["y"]:
            hi[b] = i
    keep = {0, len(pts) - 1} | set(lo.values()) | set(hi.values())
    keep.update(i for i, p in enumerate(pts) if p.get("flagged")
                or (keep_day and str(p["t"])[:10] == keep_day))
    return [pts[i] for i in sorted(keep)]


def chart_specs(site: Mapping, readings: Iterable[Mapping], targets: Iterable[Mapping] = (),
                as_of: str | None = None, highlight: str | None = None,
                highlight_at: str | None = None) -> list[dict]:
    """Trend chart data for a site from its readings: one chart of soil ECe
    by depth (salinity class bands, crop lines), one of solution EC at 25 °C
    by sample kind. Only current readings, up to ``as_of``; each becomes one
    point, long series thinned (every extreme and flagged point kept:
    :func:`thin_points`). ``highlight``: the day of the visit a report is
    about (its points are kept), drawn at ``highlight_at`` (the time of the
    visit's readings) or else at the day's start."""
    cur = current_readings(readings, as_of)
    soil = [r for r in cur if r.get("sample") in SOIL_KINDS and _ece(r) is not None]
    sol = [r for r in cur if r.get("sample") in SOLUTION_KINDS and _ec25(r) is not None]
    soil_series = []
    for d in sorted({r.get("depth_cm") for r in soil}, key=_depth_sort):
        rs = [r for r in soil if r.get("depth_cm") == d]
        soil_series.append((d, rs, len(rs)))
    sol_series = []
    for k in SOLUTION_KINDS:
        rs = [r for r in sol if r["sample"] == k]
        if rs:
            sol_series.append((k, rs, len(rs)))
    return specs_from_series(site, soil_series, sol_series, targets, highlight, highlight_at)


def _series(name: str, rows: list[Mapping], n: int, value, keep_day: str | None) -> dict:
    """One drawn series from its readings (all of them, or the candidates the
    database picked from ``n``), thinned by :func:`thin_points`."""
    pts = [_point(r, value(r), name) for r in rows]
    pts = thin_points(pts, keep_day=keep_day, force=n > MAX_POINTS_PER_SERIES)
    ser = {"name": name, "points": [_label_point(p) for p in pts]}
    if len(pts) < n:
        ser["thinned_from"] = n
    return ser


def specs_from_series(site: Mapping, soil_series, sol_series, targets: Iterable[Mapping] = (),
                      highlight: str | None = None, highlight_at: str | None = None) -> list[dict]:
    """The trend charts from their series: ``soil_series`` as (depth, rows,
    n) in depth order, ``sol_series`` as (sample kind, rows, n) in legend
    order; ``n`` how many readings the series holds, ``rows`` them all or the
    candidates kept by the database (``store.site_rows``)."""
    crop = site_crop(dict(site))
    tmap = targets_for_crop(targets, crop)
    specs = []
    mark = highlight_at or highlight
    if soil_series:
        series = [_series(depth_label(d), rs, n, _ece, highlight) for d, rs, n in soil_series]
        lines = crop_lines(crop)
        t = tmap.get("ece")
        for lim, k in (("lo_dS_m", "low"), ("hi_dS_m", "high")):
            if t and t.get(lim) is not None:
                lines.append({"y": t[lim], "key": f"target_{k}", "dash": "10 3 2 3",
                              "label": f"your ECe target ({k})"})
        specs.append({"id": "soil", "title": "Soil salinity (ECe) over time, by depth",
                      "y_label": "ECe, dS/m", "series": series, "bands": soil_bands(),
                      "lines": lines, "highlight": mark,
                      "bands_source": tolerance.SOIL_SALINITY_SOURCE})
    if sol_series:
        kinds = [k for k, _, _ in sol_series]
        series = [_series(_kind_short(k), rs, n, _ec25, highlight) for k, rs, n in sol_series]
        spec = {"id": "solution", "title": "EC at 25 °C over time, by sample",
                "y_label": "EC at 25 °C, dS/m", "series": series, "bands": [],
                "lines": _target_lines(kinds, tmap)[:4], "highlight": mark}
        if kinds == ["water"]:
            spec["bands"] = water_bands()
            spec["bands_source"] = tolerance.WATER_HAZARD_SOURCE
        specs.append(spec)
    return specs


def _target_lines(kinds, tmap) -> list[dict]:
    lines = []
    for k in kinds:
        t = tmap.get(k)
        if not t:
            continue
        for lim, which in (("lo_dS_m", "low"), ("hi_dS_m", "high")):
            if t.get(lim) is not None:
                lines.append({"y": t[lim], "key": f"target_{k}_{which}",
                              "dash": "10 3 2 3" if which == "low" else "4 2",
                              "label": f"your {_kind_short(k)} target ({which})"})
    return lines


_KIND_SHORT = {"water": "water", "feed": "feed", "leachate": "leachate", "drain": "drain",
               "sme": "SME", "media": "1:2 extract"}


def _kind_short(k: str) -> str:
    return _KIND_SHORT.get(k, k)


def profile_spec(site: Mapping, readings: Iterable[Mapping], day: str | None = None,
                 compare: bool = True) -> dict | None:
    """Depth profile data for one soil visit (the latest with two or more
    depths, or ``day``), with the visit before it that also had several
    depths as a comparison. None when no visit has readings at two depths."""
    cur = current_readings(readings, day)
    soil = [r for r in cur if r.get("sample") in SOIL_KINDS and _ece(r) is not None
            and r.get("depth_cm") is not None]
    by_day: dict[str, list] = defaultdict(list)
    for r in soil:
        by_day[_day(r)].append(r)
    multi = [d for d in sorted(by_day) if len({r["depth_cm"] for r in by_day[d]}) >= 2]
    if day is not None:
        multi = [d for d in multi if d <= day]
        if day not in multi:
            return None
    if not multi:
        return None
    chosen = [multi[-1]] + ([multi[-2]] if compare and len(multi) >= 2 else [])
    series = []
    for d in chosen:
        pts = []
        for r in sorted(by_day[d], key=lambda r: r["depth_cm"]):
            x = _ece(r)
            pts.append({"depth": r["depth_cm"], "x": x, "key": r.get("uuid"),
                        "flagged": is_flagged(r),
                        "label": f"{d} · {depth_label(r['depth_cm'])} · ECe {short_number(x)} dS/m"})
        series.append({"name": d, "points": pts})
    crop = site_crop(dict(site))
    return {"id": "profile", "title": f"ECe by depth on {multi[-1]}", "x_label": "ECe, dS/m",
            "series": series, "bands": soil_bands(), "lines": crop_lines(crop)[:2],
            "date": multi[-1]}
