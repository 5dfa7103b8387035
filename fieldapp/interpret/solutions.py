"""Solutions: irrigation water (FAO 29 class, leaching requirement), feed
versus leachate on the same visit, and the substrate tests against the
ranges of their own method."""
from __future__ import annotations

import math
from collections import defaultdict
from typing import Mapping

from ..forms import parse_ratio
from ..science import InputError, extracts, tolerance
from .common import _day, _ec25, _flags, _mean, _r
from .targets import compare_to_target

# --------------------------------------------------------------------------
# Leachate : feed EC ratio (greenhouse)
# --------------------------------------------------------------------------

#: How the EC of the leachate compares with the EC of the feed on the same
#: visit. Common practice among greenhouse growers: leachate near the feed EC
#: means the substrate holds a steady amount of salt; clearly above it means
#: salts are building up, clearly below it means the plants take up more than
#: is supplied (or leaching is heavy). The band limits 0.8 / 1.2 / 1.5 / 2.0
#: are a rule of thumb of the trade -- from memory, not from a published table.
LEACHATE_FEED_BANDS = (
    ("below_feed", 0.0, 0.8, "Leachate weaker than the feed",
     "The substrate holds less salt than the feed brings: the plants take up more than is "
     "supplied, or leaching is heavy. Check the feed strength and the amount drained."),
    ("balanced", 0.8, 1.2, "Leachate about equal to the feed",
     "Little salt is building up in the substrate."),
    ("rising", 1.2, 1.5, "Leachate somewhat above the feed",
     "Salts are accumulating slowly; watch the ratio over the next visits."),
    ("building_up", 1.5, 2.0, "Leachate clearly above the feed",
     "Salts are building up in the substrate: drain more per irrigation or lower the feed EC."),
    ("high", 2.0, math.inf, "Leachate twice the feed or more",
     "Strong salt build-up in the substrate: leach it and check the feed mix and the water."),
)
LEACHATE_FEED_SOURCE = ("common practice (grower rule of thumb: leachate EC near the feed EC is "
                        "stable, clearly above it is salt build-up); band limits 0.8/1.2/1.5/2.0 "
                        "from memory")

#: Plain meaning of the substrate-test levels (common practice wording; the
#: limits themselves come from fieldapp/data/substrate_ranges.csv).
SUBSTRATE_LEVELS = {
    "very_low": ("Very low", "Too little fertilizer for most crops."),
    "low": ("Low", "Suits seedlings and salt-sensitive crops; low for vigorous crops."),
    "normal": ("Normal", "Usual range for most established crops."),
    "high": ("High", "Upper end: watch sensitive crops and young plants."),
    "very_high": ("Very high", "Growth may suffer; leach and lower the feed."),
    "extreme": ("Extreme", "Injury likely: leach the substrate now."),
}
SUBSTRATE_LEVELS_SOURCE = "meaning of each level: common practice"


# --------------------------------------------------------------------------
# water
# --------------------------------------------------------------------------

def water_state(cur: list[Mapping], crop, target: Mapping | None = None,
                n: int | None = None) -> dict | None:
    """Latest irrigation water: hazard class (FAO 29 Table 1) and the leaching
    requirement for the site's crop (FAO 29 eq. 7). ``cur`` may hold only the
    latest water readings, ``n`` then says how many the site has."""
    ws = [r for r in cur if r.get("sample") == "water" and _ec25(r) is not None]
    if not ws:
        return None
    r = ws[-1]
    ec = _ec25(r)
    hazard = tolerance.water_salinity_hazard_one(ec)
    out = {
        "date": _day(r), "taken_at": r.get("taken_at"), "key": r.get("uuid"),
        "ec25_dS_m": _r(ec), "hazard": hazard,
        "hazard_label": tolerance.WATER_HAZARD_LABELS.get(hazard),
        "hazard_source": tolerance.WATER_HAZARD_SOURCE,
        "flags": [f["code"] for f in _flags(r)],
        "leaching": None, "previous": None,
        "target": compare_to_target(ec, target),
        "n": len(ws) if n is None else n,
    }
    if crop is not None:
        lr = {}
        for y in (100, 90):
            v = float(tolerance.leaching_requirement(ec, crop=crop, target_yield_pct=y))
            lr[str(y)] = _r(v, 4) if math.isfinite(v) else None
        out["leaching"] = {
            "crop": crop.name,
            "lr_100": lr["100"], "lr_90": lr["90"],
            "ece_100_dS_m": _r(tolerance.ece_at_yield(crop, 100), 3),
            "ece_90_dS_m": _r(tolerance.ece_at_yield(crop, 90), 3),
            "too_salty": lr["100"] is None,
            "source": ("FAO Irrigation and Drainage Paper 29 Rev. 1 (Ayers and Westcot 1985) "
                       "eq. 7: LR = ECw / (5 ECe − ECw), ECe the crop's tolerable root-zone ECe"),
            "caution": tolerance.LEACHING_CAUTION,
        }
    if len(ws) >= 2:
        p = ws[-2]
        out["previous"] = {"date": _day(p), "ec25_dS_m": _r(_ec25(p)),
                           "change_dS_m": _r(ec - _ec25(p), 3)}
    return out


# --------------------------------------------------------------------------
# greenhouse: feed versus leachate, substrate tests
# --------------------------------------------------------------------------

def leachate_feed_band(ratio: float | None) -> dict | None:
    """The common-practice band of a leachate/feed EC ratio."""
    if ratio is None or not math.isfinite(ratio) or ratio < 0:
        return None
    for key, lo, hi, label, meaning in LEACHATE_FEED_BANDS:
        if lo <= ratio < hi:
            return {"key": key, "lo": lo, "hi": None if math.isinf(hi) else hi,
                    "label": label, "meaning": meaning}
    return None


#: The feed/leachate visits listed (newest first; ``visits_total`` counts all).
FEED_LEACHATE_VISITS = 50


def feed_leachate(cur: list[Mapping], targets: Mapping[str, Mapping] | None = None) -> dict | None:
    """Feed and leachate EC on the same visit, their ratio and its band.

    Several readings of a kind on one visit are averaged. Visits with only
    one of the two are listed without a ratio (the latest
    :data:`FEED_LEACHATE_VISITS`).
    """
    rows = [r for r in cur if r.get("sample") in ("feed", "leachate") and _ec25(r) is not None]
    by_day: dict[str, dict[str, list]] = defaultdict(lambda: {"feed": [], "leachate": []})
    for r in rows:
        by_day[_day(r)][r["sample"]].append(r)
    days = []
    for day in sorted(by_day, reverse=True):
        fs, ls = by_day[day]["feed"], by_day[day]["leachate"]
        days.append({"date": day, "feed": _mean(_ec25(r) for r in fs), "n_feed": len(fs),
                     "leachate": _mean(_ec25(r) for r in ls), "n_leachate": len(ls),
                     "keys": [r.get("uuid") for r in fs + ls]})
    return feed_leachate_days(days, targets)


def feed_leachate_days(days: list[Mapping], targets: Mapping[str, Mapping] | None = None
                       ) -> dict | None:
    """:func:`feed_leachate` from each visit's mean feed and leachate EC,
    newest first: ``date``, ``feed``, ``n_feed``, ``leachate``,
    ``n_leachate`` and ``keys`` (the readings' uuids; needed for the listed
    visits only)."""
    targets = targets or {}
    if not days:
        return None
    visits = []
    for d in days:
        f, lch = d["feed"], d["leachate"]
        ratio = lch / f if (f is not None and lch is not None and f > 0) else None
        visits.append({
            "date": d["date"], "feed_dS_m": _r(f), "leachate_dS_m": _r(lch),
            "n_feed": d["n_feed"], "n_leachate": d["n_leachate"],
            "ratio": _r(ratio, 4), "band": leachate_feed_band(ratio), "keys": d.get("keys"),
        })
    paired = [v for v in visits if v["ratio"] is not None]
    latest = paired[0] if paired else None
    out = {
        "visits": visits[:FEED_LEACHATE_VISITS], "visits_total": len(visits), "latest": latest,
        "bands": [{"key": k, "lo": lo, "hi": None if math.isinf(hi) else hi, "label": lab,
                   "meaning": m} for k, lo, hi, lab, m in LEACHATE_FEED_BANDS],
        "source": LEACHATE_FEED_SOURCE, "trend": None,
        "feed_target": compare_to_target(latest["feed_dS_m"], targets.get("feed")) if latest else None,
        "leachate_target": (compare_to_target(latest["leachate_dS_m"], targets.get("leachate"))
                            if latest else None),
    }
    if len(paired) >= 2:
        d = paired[0]["ratio"] - paired[1]["ratio"]
        out["trend"] = {"from_date": paired[1]["date"], "from_ratio": paired[1]["ratio"],
                        "change": _r(d, 3)}
    return out


def _level(ec: float, ranges) -> tuple[str | None, str]:
    """The band an EC falls in. A limit the table prints at the end of one
    band and the start of the next (pour-through "1.0-2.6 low", "2.6-4.6
    normal") belongs to the lower band: the UMass text's own worked example
    reads 2.6 dS/m as "low for pour-through" (see substrate_ranges.csv). The
    lowest band holds its lower limit too (0 dS/m)."""
    for k, rg in enumerate(ranges):
        if (rg.lo_dS_m < ec or (k == 0 and rg.lo_dS_m == ec)) and ec <= rg.hi_dS_m:
            return rg.level, ""
    # in a gap left by the published table (pour-through 6.5-6.6): say so
    below = [rg for rg in ranges if rg.hi_dS_m < ec]
    if below:
        b = below[-1]
        return b.level, f"between the table's {b.level} and the next level (a gap in the table)"
    return None, ""


def _substrate_source(ranges, checked: bool) -> str:
    """The citation a screen shows for a method's ranges: the table's short
    citation (``cite`` column; else the shortest row source, the table's own
    citation without a row's extra remark), marked unverified unless every row
    was ``checked`` against its published table."""
    text = (next((g.cite for g in ranges if g.cite), "")
            or min((g.source for g in ranges), key=len))
    if not checked and "unverified" not in text.lower():
        text += " (unverified)"
    return text + "; " + SUBSTRATE_LEVELS_SOURCE


def substrate_tests(cur: list[Mapping], targets: Mapping[str, Mapping] | None = None) -> list[dict]:
    """Latest saturated media extract, 1:2 extract and pour-through leachate,
    each read against the interpretation ranges of its own method."""
    targets = targets or {}
    out = []
    for kind, method in extracts.SUBSTRATE_METHOD_FOR_SAMPLE.items():
        rs = [r for r in cur if r.get("sample") == kind and _ec25(r) is not None]
        if not rs:
            continue
        r = rs[-1]
        ec = _ec25(r)
        ranges = extracts.substrate_ranges(method)
        checked = all(g.verified == "yes" for g in ranges)
        note = ""
        level = None
        if kind == "media":
            try:
                n = parse_ratio(r.get("ratio") or "1:2")
            except InputError:
                n = None
            if n is None or abs(n - 2.0) > 0.01:
                note = (f"The 1:2 ranges do not apply to a {r.get('ratio')} extract; "
                        "not interpreted.")
        if not note:
            level, note = _level(ec, ranges)
        lab = SUBSTRATE_LEVELS.get(level, (None, None))
        out.append({
            "sample": kind, "sample_label": extracts.SAMPLE_KINDS[kind].label, "method": method,
            "date": _day(r), "key": r.get("uuid"), "ec25_dS_m": _r(ec),
            "level": level, "level_label": lab[0], "meaning": lab[1], "note": note,
            "ranges": [{"level": g.level, "label": SUBSTRATE_LEVELS.get(g.level, (g.level,))[0],
                        "lo_dS_m": g.lo_dS_m, "hi_dS_m": None if math.isinf(g.hi_dS_m) else g.hi_dS_m}
                       for g in ranges],
            "source": _substrate_source(ranges, checked),
            "source_status": "read" if checked else "unverified",
            "target": compare_to_target(ec, targets.get(kind)),
            "flags": [f["code"] for f in _flags(r)],
        })
    return out


