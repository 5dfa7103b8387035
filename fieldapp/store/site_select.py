"""The rows of a site the interpretation reads, picked from the day totals
(``site_views.day_totals``): what ``interpret.summary_from_rows``,
``interpret.specs_from_series`` and ``interpret.profile_spec`` need, and no
more. Each choice below is the one the interpretation makes over all of a
site's readings, made on the day totals instead."""
from __future__ import annotations

from collections import defaultdict

from .site_views import (FEED_LEACHATE, SOIL, SOLUTIONS, SUBSTRATE, _pick, day_totals,
                         flagged_rows, picked_rows, reading_count)

#: Chart series up to this many readings are drawn whole (as interpret's
#: MAX_POINTS_PER_SERIES; the buckets are half as many).
MOST_POINTS = 120
#: Feed/leachate visits whose readings' keys are listed (interpret lists as many).
FEED_LEACHATE_KEYS = 50


def site_rows(conn, site_id: int, as_of: str | None = None,
              keep_day: str | None = None, cache=None) -> dict:
    """What the site views of one site read, up to ``as_of``: the counts,
    the rows of each part of the summary, the feed/leachate days, the
    profile's rows and each chart series' candidates (``keep_day``: the day
    whose points a report keeps). ``cache``: a :class:`site_views.SiteCache`
    that keeps the day totals and flagged readings between calls."""
    if cache is None:
        return _site_rows(conn, site_id, as_of, keep_day, day_totals(conn, site_id, as_of), None)

    def make(every_day, every_flagged):
        tot = [t for t in every_day if as_of is None or t["day"] <= as_of]
        flagged = [r for r in every_flagged if as_of is None or r["taken_at"][:10] <= as_of]
        return _site_rows(conn, site_id, as_of, keep_day, tot, flagged)
    return cache.rows(conn, site_id, (as_of, keep_day), make)


def _site_rows(conn, site_id: int, as_of, keep_day, tot: list[dict], flagged) -> dict:
    out = {"n_readings": reading_count(conn, site_id), "n_current": sum(t["n"] for t in tot),
           "last_date": max((t["day"] for t in tot), default=None)}
    valued = [t for t in tot if t["n_y"]]
    soil = [t for t in valued if t["sample"] in SOIL]
    picks = _soil_picks(soil) + _profile_picks(soil) + _latest_picks(valued)
    rows = picked_rows(conn, site_id, picks)
    out["soil"] = [r for r in rows if r["sample"] in SOIL and r["ece_dS_m"] is not None]
    water = [r for r in rows if r["sample"] == "water" and r["ec25_dS_m"] is not None]
    out["water"] = water[-2:]
    out["n_water"] = sum(t["n_y"] for t in valued if t["sample"] == "water")
    out["substrate"] = [r for r in rows if r["sample"] in SUBSTRATE]
    out["profile"] = [r for r in out["soil"] if r["depth_cm"] is not None]
    out["greenhouse_days"] = _feed_leachate_days(conn, site_id, valued)
    out["soil_series"], out["sol_series"] = _chart_series(conn, site_id, valued, as_of, keep_day,
                                                          flagged)
    return out


def _soil_picks(soil: list[dict]) -> list[tuple]:
    """The latest day of each depth and the last two soil days, every depth."""
    days = sorted({t["day"] for t in soil})[-2:]
    latest: dict = {}
    for t in soil:
        latest[t["depth_cm"]] = max(latest.get(t["depth_cm"], t["day"]), t["day"])
    return [_pick(t["sample"], t["day"], t["depth_cm"]) for t in soil
            if t["day"] in days or t["day"] == latest[t["depth_cm"]]]


def _profile_picks(soil: list[dict]) -> list[tuple]:
    """The last two days with soil readings at two depths or more."""
    depths = defaultdict(set)
    for t in soil:
        if t["depth_cm"] is not None:
            depths[t["day"]].add(t["depth_cm"])
    days = sorted(d for d, s in depths.items() if len(s) >= 2)[-2:]
    return [_pick(t["sample"], t["day"], t["depth_cm"]) for t in soil if t["day"] in days]


def _latest_picks(valued: list[dict]) -> list[tuple]:
    """The last two days with water (two readings at least), the last day of
    each substrate test."""
    picks = []
    for kind in ("water",) + SUBSTRATE:
        ts = [t for t in valued if t["sample"] == kind]
        days = sorted({t["day"] for t in ts})
        if not days:
            continue
        want = days[-1:]
        if kind == "water" and len(days) > 1 and \
                sum(t["n_y"] for t in ts if t["day"] == days[-1]) < 2:
            want = days[-2:]
        picks += [_pick(kind, t["day"], t["depth_cm"]) for t in ts if t["day"] in want]
    return picks


def _feed_leachate_days(conn, site_id: int, valued: list[dict]) -> list[dict]:
    """Each day's mean feed and leachate EC, newest first; the readings'
    keys for the latest :data:`FEED_LEACHATE_KEYS` days."""
    by_day: dict[str, dict] = {}
    for t in valued:
        if t["sample"] in FEED_LEACHATE:
            d = by_day.setdefault(t["day"], {"date": t["day"], "feed": [], "leachate": []})
            d[t["sample"]].append(t)
    days = []
    for day in sorted(by_day, reverse=True):
        d = by_day[day]
        out = {"date": day, "keys": []}
        for k in FEED_LEACHATE:
            n = sum(t["n_y"] for t in d[k])
            out[k] = sum(t["mean"] * t["n_y"] for t in d[k]) / n if n else None
            out["n_" + k] = n
        days.append(out)
    shown = {d["date"]: d for d in days[:FEED_LEACHATE_KEYS]}
    rows = picked_rows(conn, site_id, [_pick(t["sample"], t["day"], t["depth_cm"])
                                       for day in shown for k in FEED_LEACHATE
                                       for t in by_day[day][k]], keys_only=True)
    for k in FEED_LEACHATE:
        for r in rows:
            if r["sample"] == k and r["taken_at"][:10] in shown:
                shown[r["taken_at"][:10]]["keys"].append(r["uuid"])
    return days


def _chart_series(conn, site_id: int, valued: list[dict], as_of, keep_day, flagged=None):
    """Each chart series as (depth or kind, candidate rows, n): a series up to
    :data:`MOST_POINTS` readings whole, a longer one as the readings holding
    each time bucket's lowest and highest value (the first of each, by time),
    its first and last day, ``keep_day`` and every flagged reading."""
    from ..interpret.trends import _depth_sort, day_buckets
    groups: dict[tuple, dict[str, list]] = defaultdict(lambda: defaultdict(list))
    for t in valued:
        key = ("soil", t["depth_cm"]) if t["sample"] in SOIL else \
            ("sol", t["sample"]) if t["sample"] in SOLUTIONS else None
        if key:
            groups[key][t["day"]].append(t)
    picks, sizes = [], {}
    for key, by_day in groups.items():
        sizes[key] = sum(t["n_y"] for ts in by_day.values() for t in ts)
        picks += _series_picks(key, by_day, sizes[key] > MOST_POINTS, keep_day, day_buckets)
    rows = picked_rows(conn, site_id, picks, keys_only=True)
    if any(n > MOST_POINTS for n in sizes.values()):
        seen = {r["id"] for r in rows}
        if flagged is None:
            flagged = flagged_rows(conn, site_id, as_of)
        rows += [r for r in flagged if r["id"] not in seen]
        rows.sort(key=lambda r: (r["taken_at"], r["id"]))
    soil = [(k[1], [r for r in rows if r["sample"] in SOIL and r["depth_cm"] == k[1]
                    and r["ece_dS_m"] is not None], sizes[k])
            for k in sorted((k for k in groups if k[0] == "soil"), key=lambda k: _depth_sort(k[1]))]
    sol = [(k, [r for r in rows if r["sample"] == k and r["ec25_dS_m"] is not None],
            sizes[("sol", k)]) for k in SOLUTIONS if ("sol", k) in groups]
    return soil, sol


def _series_picks(key, by_day: dict, thin: bool, keep_day, day_buckets) -> list[tuple]:
    """The picks of one chart series: every reading when short; else its first
    and last day and ``keep_day`` whole, and each bucket's lowest and highest
    value, each asked of the sample kinds (and depths) that hold it that day
    only. A depth is always named, even for a solution series drawn over every
    depth: a pick of one depth walks the covering index of schema 019, a pick
    of any depth read each reading of the day whole."""
    days = sorted(by_day)
    if not thin:
        groups = sorted({(t["sample"], t["depth_cm"]) for d in days for t in by_day[d]},
                        key=lambda g: (g[0], g[1] is None, g[1] or 0))
        return [_pick(k, days[0], depth, last_day=days[-1]) for k, depth in groups]
    whole = {days[0], days[-1]} | ({keep_day} & set(days))
    picks = [_pick(t["sample"], d, t["depth_cm"]) for d in whole for t in by_day[d]]
    bucket = day_buckets(days, max(1, MOST_POINTS // 2))
    ext: dict[int, dict] = {}
    for d in days:                            # oldest first: the first extreme of a bucket wins
        lo = min(t["lo"] for t in by_day[d])
        hi = max(t["hi"] for t in by_day[d])
        e = ext.setdefault(bucket[d], {"lo": (lo, d), "hi": (hi, d)})
        if lo < e["lo"][0]:
            e["lo"] = (lo, d)
        if hi > e["hi"][0]:
            e["hi"] = (hi, d)
    for e in ext.values():
        (lo, d_lo), (hi, d_hi) = e["lo"], e["hi"]
        picks += [_pick(t["sample"], d_lo, t["depth_cm"], y=lo) for t in by_day[d_lo]
                  if t["lo"] == lo]
        picks += [_pick(t["sample"], d_hi, t["depth_cm"], y=hi) for t in by_day[d_hi]
                  if t["hi"] == hi]
    return picks
