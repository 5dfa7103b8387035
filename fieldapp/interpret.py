"""What the readings of a site mean: where it stands, where it is heading.

Pure: a site and its reading records in, a JSON-ready dict out. No Flask,
no SQL, no I/O. A record is either shaped as ``store.view_readings`` gives
it (columns only: ``status``, ``sample``, ``depth_cm``, ``taken_at``,
``visit_date``, the computed values and the soil solution estimates as
columns, ``flag_list`` from the flag rows; what the pages use, no JSON
decoded) or as ``store.reading_dict`` gives it (the stored conversion
``result``); the values read are the same.

Only *current* readings (neither corrected nor void) are interpreted. The
numbers of each reading are the ones stored with it (the conversion made
when it was saved); this module adds what needs several readings or the
site's crop: the root-zone mean ECe and its class, the expected relative
yield (Maas-Hoffman), the direction of change, the water's hazard class and
leaching requirement, the ratio of leachate to feed EC in a greenhouse, the
substrate tests against their published ranges and the user's own targets.

Every interpretation is an estimate. The caller shows :data:`CAUTIONS`.
"""
from __future__ import annotations

import datetime as dt
import math
from collections import defaultdict
from typing import Iterable, Mapping

from .science import InputError, extracts, osmotic, tolerance
from .fmt import number as short_number   # the one formatter (3 significant digits)
from .forms import parse_number, parse_ratio
from .results import CAUTIONS as CONVERT_CAUTIONS
from .results import crop_summary, round_sig

SOIL_KINDS = ("paste", "extract")
#: Solutions drawn on the second trend chart, in legend order.
SOLUTION_KINDS = ("water", "feed", "leachate", "drain", "sme", "media")

CAUTIONS = tuple(CONVERT_CAUTIONS) + (
    tolerance.YIELD_CAUTION,
    "Relative yield uses the mean ECe of the depths sampled, as the published tolerance "
    "data use the root-zone mean; a single depth or a single visit is a rough guide.",
)

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
# Direction of change
# --------------------------------------------------------------------------

#: Uncertainty assumed for an ECe whose method states none (±%): common
#: practice, the order of a field meter and sampling repeatability.
FALLBACK_UNCERTAINTY_PCT = 10.0

# --------------------------------------------------------------------------
# User targets
# --------------------------------------------------------------------------

#: What a user target may be kept for, and the value it is compared with.
TARGET_MEASURES = {
    "ece": "Soil ECe (root-zone mean)",
    "water": "Irrigation water EC",
    "feed": "Feed EC",
    "leachate": "Leachate / pour-through EC",
    "drain": "Drain EC",
    "sme": "Saturated media extract EC",
    "media": "1:2 substrate extract EC",
}
TARGET_MAX_dS_m = 50.0
TARGET_NOTE_MAX = 500


def validate_target(body: Mapping) -> dict:
    """A target range from a form or JSON body: crop, measure, lo, hi, note.

    Raises :class:`InputError` naming the field, with what to type instead.
    At least one of lo and hi is needed; a missing one means "no limit".
    """
    if not isinstance(body, Mapping):
        raise InputError("Send the target as a JSON object.", "body")
    crop = tolerance.find_crop(body.get("crop"))
    measure = str(body.get("measure") or "").strip().lower()
    if measure not in TARGET_MEASURES:
        raise InputError("Choose what the target is for: " + ", ".join(TARGET_MEASURES) + ".",
                         "measure")
    lo = parse_number(body.get("lo_dS_m"), "lo_dS_m", "the lower limit")
    hi = parse_number(body.get("hi_dS_m"), "hi_dS_m", "the upper limit")
    if lo is None and hi is None:
        raise InputError("Type a lower limit, an upper limit, or both (dS/m).", "lo_dS_m")
    for v, f in ((lo, "lo_dS_m"), (hi, "hi_dS_m")):
        if v is not None and not (0 <= v <= TARGET_MAX_dS_m):
            raise InputError(f"A target must be between 0 and {TARGET_MAX_dS_m:g} dS/m.", f)
    if lo is not None and hi is not None and hi <= lo:
        raise InputError("The upper limit must be above the lower limit.", "hi_dS_m")
    note = " ".join(str(body.get("note") or "").split())
    if len(note) > TARGET_NOTE_MAX:
        raise InputError(f"The note is at most {TARGET_NOTE_MAX} characters.", "note")
    return {"crop": crop.name, "measure": measure, "lo_dS_m": lo, "hi_dS_m": hi, "note": note}


def compare_to_target(value: float | None, target: Mapping | None) -> dict | None:
    """'below', 'within' or 'above' the user's range (limits inclusive)."""
    if target is None or value is None:
        return None
    lo, hi = target.get("lo_dS_m"), target.get("hi_dS_m")
    if lo is not None and value < lo:
        where = "below"
    elif hi is not None and value > hi:
        where = "above"
    else:
        where = "within"
    return {"where": where, "lo_dS_m": lo, "hi_dS_m": hi, "note": target.get("note") or "",
            "text": f"{where} your target {_range_text(lo, hi)}"}


def _range_text(lo, hi) -> str:
    if lo is not None and hi is not None:
        return f"{short_number(lo)}–{short_number(hi)} dS/m"
    if lo is not None:
        return f"≥ {short_number(lo)} dS/m"
    return f"≤ {short_number(hi)} dS/m"


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------

def _r(x, digits: int = 4):
    """Round for JSON (4 significant digits here); None for None/NaN/inf."""
    return round_sig(x, digits)


def _mean(values) -> float | None:
    v = [float(x) for x in values if x is not None and math.isfinite(float(x))]
    return sum(v) / len(v) if v else None


def _day(r: Mapping) -> str:
    return r.get("visit_date") or str(r.get("taken_at") or "")[:10]


def _ec25(r: Mapping) -> float | None:
    v = r.get("ec25_dS_m")
    if v is None:
        v = (r.get("result") or {}).get("ec25_dS_m")
    return None if v is None else float(v)


def _ece(r: Mapping) -> float | None:
    v = r.get("ece_dS_m")
    if v is None:
        v = (r.get("result") or {}).get("ece_dS_m")
    return None if v is None else float(v)


def _flags(r: Mapping) -> list[dict]:
    fl = r.get("flag_list")           # store.view_readings: from reading_flags
    if fl is not None:
        return fl
    return list((r.get("result") or {}).get("flags") or [])


def _unc(r: Mapping):
    """The ECe uncertainty stated for the reading's method (± %), or None."""
    if "ece_uncertainty_pct" in r:    # a column (store.view_readings)
        return r["ece_uncertainty_pct"]
    return (r.get("result") or {}).get("ece_uncertainty_pct")


def is_flagged(r: Mapping) -> bool:
    """A warning or error was raised on the reading (info notes do not count)."""
    return any(f.get("severity") in ("warning", "error") for f in _flags(r))


def depth_label(depth_cm) -> str:
    return "depth not given" if depth_cm is None else f"{short_number(depth_cm)} cm"


def current_readings(readings: Iterable[Mapping], as_of: str | None = None) -> list[Mapping]:
    """Current readings (not corrected, not void), on or before ``as_of``
    (a YYYY-MM-DD date), oldest first."""
    out = [r for r in readings if r.get("status", "current") == "current"
           and (as_of is None or _day(r) <= as_of)]
    return sorted(out, key=lambda r: (str(r.get("taken_at") or ""), r.get("id") or 0))


def site_crop(site: Mapping):
    """The site's :class:`~fieldapp.science.tolerance.Crop`, or None."""
    name = site.get("crop")
    if not name:
        return None
    try:
        return tolerance.find_crop(name)
    except InputError:
        return None


def crop_dict(crop) -> dict | None:
    return None if crop is None else crop_summary(crop)


def soil_class(ece: float | None) -> tuple[str | None, str | None]:
    if ece is None:
        return None, None
    key = tolerance.soil_salinity_class_one(ece)
    labels = {k: lab for k, lab, *_ in tolerance.SOIL_SALINITY_CLASSES}
    return key, labels.get(key)


# --------------------------------------------------------------------------
# soil
# --------------------------------------------------------------------------

def _soil_value(rs: list[Mapping], path: tuple[str, ...]) -> float | None:
    vals = []
    for r in rs:
        if path[-1] in r:             # a column (store.view_readings, schema 015)
            vals.append(r[path[-1]])
            continue
        v = r.get("result") or {}
        for p in path:
            v = (v or {}).get(p) if isinstance(v, Mapping) else None
        vals.append(v)
    return _mean(vals)


def _input(r: Mapping, key: str):
    v = r.get(key)
    if v is None:
        v = ((r.get("result") or {}).get("input") or {}).get(key)
    return v


def _depth_row(depth, day, rs, crop, last_day) -> dict:
    ece = _mean(_ece(r) for r in rs)
    key, label = soil_class(ece)
    ry = None if crop is None or ece is None else _r(tolerance.relative_yield_pct(ece, crop), 3)
    moist = [r for r in rs if _input(r, "theta_g_pct") is not None
             or _input(r, "matric_MPa") is not None]
    moisture = None
    if moist:
        theta = _mean(_input(r, "theta_g_pct") for r in moist)
        matric = _mean(_input(r, "matric_MPa") for r in moist)
        ss = ("soil_solution",)
        psi_sw = _soil_value(moist, ss + ("psi_s_sw_MPa",))
        moisture = {
            "theta_g_pct": _r(theta), "matric_MPa": _r(matric),
            "ec_sw_dS_m": _r(_soil_value(moist, ss + ("ec_sw_dS_m",))),
            "psi_s_sw_MPa": _r(psi_sw),
            "psi_total_MPa": _r(_soil_value(moist, ss + ("psi_total_MPa",))),
            "margin_to_pwp_MPa": _r(_soil_value(moist, ss + ("margin_to_pwp_MPa",))),
        }
        if matric is None:
            moisture["basis"] = ("solute potential at this water content; add a matric "
                                 "reading for the total potential")
        elif psi_sw is None:
            moisture["basis"] = ("matric reading + solute potential at field capacity (no "
                                 "usable water content)")
        else:
            moisture["basis"] = "matric reading + solute potential at this water content"
    unc = [_unc(r) for r in rs]
    unc = [u for u in unc if u is not None]
    # at field capacity: matric -0.033 MPa (common practice) + solute potential there
    psi_fc = _soil_value(rs, ("soil_solution", "psi_s_fc_MPa"))
    total_fc = None
    if psi_fc is not None:
        total_fc = float(osmotic.total_water_potential(psi_fc, osmotic.FIELD_CAPACITY_MPa))
        total_fc = total_fc if math.isfinite(total_fc) else None
    return {
        "depth_cm": depth, "depth_label": depth_label(depth), "date": day, "n": len(rs),
        "ece_dS_m": _r(ece), "class": key, "class_label": label, "relative_yield_pct": ry,
        "ec_fc_dS_m": _r(_soil_value(rs, ("soil_solution", "ec_fc_dS_m"))),
        "psi_s_fc_MPa": _r(psi_fc),
        "psi_total_fc_MPa": _r(total_fc),
        "margin_fc_MPa": _r(None if total_fc is None else
                            float(osmotic.margin_to_wilting_point(total_fc))),
        "moisture": moisture,
        "methods": sorted({str(r.get("ece_method") or (r.get("result") or {}).get("ece_method"))
                           for r in rs}),
        "uncertainty_pct": max(unc) if unc else None,
        "flags": sorted({f["code"] for r in rs for f in _flags(r)}),
        "keys": [r.get("uuid") for r in rs],
        "older": day != last_day,
    }


def _depth_sort(d):
    return (d is None, d if d is not None else 0.0)


def soil_state(cur: list[Mapping], crop, target: Mapping | None = None) -> dict | None:
    """Latest ECe by depth, the root-zone mean of the latest soil visit, its
    class and expected yield, and the change since the visit before."""
    soil = [r for r in cur if r.get("sample") in SOIL_KINDS and _ece(r) is not None]
    if not soil:
        return None
    by_day: dict[str, list] = defaultdict(list)
    for r in soil:
        by_day[_day(r)].append(r)
    days = sorted(by_day)
    last = days[-1]
    depths = []
    for d in sorted({r.get("depth_cm") for r in soil}, key=_depth_sort):
        rs = [r for r in soil if r.get("depth_cm") == d]
        day = max(_day(r) for r in rs)
        depths.append(_depth_row(d, day, [r for r in rs if _day(r) == day], crop, last))
    latest = [row for row in depths if row["date"] == last]
    mean = _mean(row["ece_dS_m"] for row in latest)
    key, label = soil_class(mean)
    out = {
        "date": last,
        "depths": depths,
        "root_zone": {
            "ece_dS_m": _r(mean), "class": key, "class_label": label,
            "n_depths": len(latest),
            "depths_label": ", ".join(row["depth_label"] for row in latest),
            "relative_yield_pct": (None if crop is None or mean is None else
                                   _r(tolerance.relative_yield_pct(mean, crop), 3)),
            "target": compare_to_target(mean, target),
        },
        "heading": None,
        "class_source": tolerance.SOIL_SALINITY_SOURCE,
        "yield_source": ("Maas-Hoffman model, Maas and Hoffman 1977; crop parameters: "
                         + (crop.source if crop is not None else "no crop set")),
        "potential_source": ("solute potential of the soil solution at field capacity "
                             "(ECsw ≈ 2 × ECe, common practice) by the route stored with each "
                             f"reading; field capacity {osmotic.FIELD_CAPACITY_MPa} MPa and "
                             f"permanent wilting point {osmotic.PERMANENT_WILTING_POINT_MPa} MPa "
                             "(common practice)"),
    }
    if len(days) >= 2:
        out["heading"] = _heading(by_day[days[-2]], by_day[last], days[-2], last)
    return out


def _heading(prev_rs, last_rs, prev_day, last_day) -> dict:
    """Change of the root-zone mean between two soil visits, judged against
    the stated uncertainty of the ECe estimates."""
    common = ({r.get("depth_cm") for r in prev_rs} & {r.get("depth_cm") for r in last_rs})
    if common:
        prev_rs = [r for r in prev_rs if r.get("depth_cm") in common]
        last_rs = [r for r in last_rs if r.get("depth_cm") in common]

    def mean_by_depth(rs):
        by = defaultdict(list)
        for r in rs:
            by[r.get("depth_cm")].append(_ece(r))
        return _mean(_mean(v) for v in by.values())

    def unc(rs):
        u = [_unc(r) for r in rs]
        u = [x for x in u if x is not None]
        return max(u) if u else FALLBACK_UNCERTAINTY_PCT

    m0, m1 = mean_by_depth(prev_rs), mean_by_depth(last_rs)
    change = m1 - m0
    band = math.hypot(m0 * unc(prev_rs) / 100.0, m1 * unc(last_rs) / 100.0)
    days = (dt.date.fromisoformat(last_day) - dt.date.fromisoformat(prev_day)).days
    if abs(change) <= band:
        direction, text = "steady", "no change beyond the uncertainty of the estimates"
    elif change > 0:
        direction, text = "rising", "rising"
    else:
        direction, text = "falling", "falling"
    methods0 = {(r.get("result") or {}).get("ece_method") or r.get("ece_method") for r in prev_rs}
    methods1 = {(r.get("result") or {}).get("ece_method") or r.get("ece_method") for r in last_rs}
    note = None
    methods0.discard(None)
    methods1.discard(None)
    if methods0 != methods1:
        from .labels import method_label   # plain words, never the method keys
        note = ("The ECe method changed between the two visits ("
                + "; ".join(sorted(method_label(m) for m in methods0)) + " → "
                + "; ".join(sorted(method_label(m) for m in methods1))
                + "); part of the change may come from the method.")
    return {
        "from_date": prev_day, "to_date": last_day, "days": days,
        "from_ece_dS_m": _r(m0), "to_ece_dS_m": _r(m1), "change_dS_m": _r(change, 3),
        "per_30_days_dS_m": _r(change / days * 30.0, 3) if days > 0 else None,
        "uncertainty_dS_m": _r(band, 3), "direction": direction, "text": text,
        "depths": "same depths" if common else "different depths", "note": note,
    }


# --------------------------------------------------------------------------
# water
# --------------------------------------------------------------------------

def water_state(cur: list[Mapping], crop, target: Mapping | None = None) -> dict | None:
    """Latest irrigation water: hazard class (FAO 29 Table 1) and the leaching
    requirement for the site's crop (FAO 29 eq. 7)."""
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
        "n": len(ws),
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


def feed_leachate(cur: list[Mapping], targets: Mapping[str, Mapping] | None = None) -> dict | None:
    """Feed and leachate EC on the same visit, their ratio and its band.

    Several readings of a kind on one visit are averaged. Visits with only
    one of the two are listed without a ratio.
    """
    targets = targets or {}
    rows = [r for r in cur if r.get("sample") in ("feed", "leachate") and _ec25(r) is not None]
    if not rows:
        return None
    by_day: dict[str, dict[str, list]] = defaultdict(lambda: {"feed": [], "leachate": []})
    for r in rows:
        by_day[_day(r)][r["sample"]].append(r)
    visits = []
    for day in sorted(by_day, reverse=True):
        f = _mean(_ec25(r) for r in by_day[day]["feed"])
        lch = _mean(_ec25(r) for r in by_day[day]["leachate"])
        ratio = lch / f if (f is not None and lch is not None and f > 0) else None
        visits.append({
            "date": day, "feed_dS_m": _r(f), "leachate_dS_m": _r(lch),
            "n_feed": len(by_day[day]["feed"]), "n_leachate": len(by_day[day]["leachate"]),
            "ratio": _r(ratio, 4), "band": leachate_feed_band(ratio),
            "keys": [r.get("uuid") for r in by_day[day]["feed"] + by_day[day]["leachate"]],
        })
    paired = [v for v in visits if v["ratio"] is not None]
    latest = paired[0] if paired else None
    out = {
        "visits": visits, "latest": latest,
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
    for rg in ranges:
        if rg.lo_dS_m <= ec < rg.hi_dS_m:
            return rg.level, ""
    # in a gap left by the published table (pour-through 6.5-6.6): say so
    below = [rg for rg in ranges if rg.hi_dS_m <= ec]
    if below:
        b = below[-1]
        return b.level, f"between the table's {b.level} and the next level (a gap in the table)"
    return None, ""


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
            # the shortest: the table's own citation without a row's extra remark
            "source": min((g.source for g in ranges), key=len) + "; " + SUBSTRATE_LEVELS_SOURCE,
            "target": compare_to_target(ec, targets.get(kind)),
            "flags": [f["code"] for f in _flags(r)],
        })
    return out


# --------------------------------------------------------------------------
# the whole site
# --------------------------------------------------------------------------

def targets_for_crop(targets: Iterable[Mapping], crop) -> dict[str, dict]:
    """The user's targets for this crop, by measure."""
    if crop is None:
        return {}
    return {t["measure"]: dict(t) for t in targets
            if str(t.get("crop") or "").lower() == crop.name.lower()}


def site_summary(site: Mapping, readings: Iterable[Mapping], targets: Iterable[Mapping] = (),
                 as_of: str | None = None) -> dict:
    """Everything the site page and the report say about where a site stands.

    ``as_of`` (YYYY-MM-DD) limits the interpretation to readings up to that
    day (the visit report shows the state as it was at that visit).
    """
    site = dict(site)
    readings = list(readings)
    cur = current_readings(readings, as_of)
    crop = site_crop(site)
    tmap = targets_for_crop(targets, crop)
    soil = soil_state(cur, crop, tmap.get("ece"))
    water = water_state(cur, crop, tmap.get("water"))
    gh = feed_leachate(cur, tmap)
    subs = substrate_tests(cur, tmap)
    out = {
        "site": {k: site.get(k) for k in ("id", "name", "kind", "crop", "latitude", "longitude",
                                          "sp_pct", "texture", "notes")},
        "as_of": as_of,
        "n_current": len(cur),
        "n_readings": len(readings),
        "last_date": _day(cur[-1]) if cur else None,
        "crop": crop_dict(crop),
        "crop_unknown": bool(site.get("crop")) and crop is None,
        "soil": soil, "water": water, "greenhouse": gh, "substrate": subs,
        "targets": list(tmap.values()),
        "headline": [],
        "cautions": list(CAUTIONS),
    }
    kind = site.get("kind") or "field"
    if kind == "greenhouse" and gh is None:
        out["greenhouse_missing"] = ("Record the feed and the leachate on the same visit to see "
                                     "whether salts build up in the substrate.")
    if kind == "water_source" and water is None:
        out["water_missing"] = ("Record this source's EC as an irrigation water sample to see "
                                "its FAO 29 salinity class and, with a crop set, the leaching "
                                "requirement.")
    out["needs_crop"] = needs_crop(out)
    out["headline"] = headline(out)
    return out


def needs_crop(s: Mapping) -> str | None:
    """What setting the site's crop would add, or None (a crop is set, or no
    reading needs one). The page shows it as a link to the site's settings."""
    if s.get("crop") is not None:
        return None
    if s.get("crop_unknown"):
        return ("The site's crop is not in the crop table: choose one from the list for the "
                "expected yield and the leaching requirement.")
    soil, water = s.get("soil"), s.get("water")
    kind = (s.get("site") or {}).get("kind")
    if soil and water:
        return "Set the site's crop to see the expected yield and the leaching requirement."
    if soil:
        return "Set the site's crop to see the expected yield (Maas-Hoffman)."
    if water or kind == "water_source":
        return ("Set the crop this water irrigates to see the leaching requirement "
                "(FAO 29).")
    return None


def headline(s: Mapping) -> list[str]:
    """A few plain sentences for the top of the page."""
    lines = []
    soil = s.get("soil")
    crop = s.get("crop")
    if soil:
        rz = soil["root_zone"]
        t = (f"Soil ECe {short_number(rz['ece_dS_m'])} dS/m on {soil['date']} "
             f"({rz['depths_label']}): {str(rz['class_label']).lower()}.")
        if crop and rz["relative_yield_pct"] is not None:
            t += f" Expected {crop['name']} yield about {short_number(rz['relative_yield_pct'], 2)} %."
        lines.append(t)
        h = soil.get("heading")
        if h:
            if h["direction"] == "steady":
                lines.append(f"Since {h['from_date']}: {h['text']} "
                             f"({_signed(h['change_dS_m'])} dS/m, ± {short_number(h['uncertainty_dS_m'])}).")
            else:
                lines.append(f"Since {h['from_date']}: {h['text']}, {_signed(h['change_dS_m'])} dS/m "
                             f"in {h['days']} days.")
            if h.get("note"):
                lines[-1] = lines[-1][:-1] + " (the ECe method changed; part of it may come from that)."
    w = s.get("water")
    if w:
        t = (f"Water {short_number(w['ec25_dS_m'])} dS/m on {w['date']}: "
             f"{str(w['hazard_label']).lower()} (salinity).")
        lv = w.get("leaching")
        if lv:
            if lv["too_salty"]:
                t += f" Too salty to keep {lv['crop']} at full yield by leaching alone."
            else:
                t += f" Leaching requirement for {lv['crop']}: {short_number(lv['lr_100'] * 100, 2)} %."
        lines.append(t)
    gh = s.get("greenhouse")
    if gh and gh.get("latest"):
        v = gh["latest"]
        lines.append(f"Leachate/feed EC {short_number(v['ratio'])} on {v['date']} "
                     f"({short_number(v['leachate_dS_m'])} / {short_number(v['feed_dS_m'])} dS/m): "
                     f"{v['band']['label'].lower()}.")
    for t in s.get("substrate") or ():
        if t["level_label"]:
            lines.append(f"{t['sample_label']} {short_number(t['ec25_dS_m'])} dS/m on {t['date']}: "
                         f"{t['level_label'].lower()} for this method.")
    if not lines:
        lines.append("No current readings to interpret yet.")
    return lines


def _signed(x) -> str:
    if x is None:
        return "—"
    return ("+" if x > 0 else "−" if x < 0 else "±") + short_number(abs(x))


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
    codes = [f["code"] for f in _flags(r)]
    label = f"{series} · {str(r.get('taken_at') or '')[:10]} · {short_number(p['y'])} dS/m"
    if codes:
        label += " · flags: " + ", ".join(codes)
    p["label"] = label
    return p


#: A chart series longer than this is thinned (see :func:`thin_points`).
MAX_POINTS_PER_SERIES = 120


def thin_points(points: list[dict], most: int = MAX_POINTS_PER_SERIES,
                keep_day: str | None = None) -> list[dict]:
    """A long series thinned for drawing, in time order, without losing what
    matters: the time range is cut into ``most // 2`` equal-count buckets and
    each keeps its lowest and highest point, so every extreme survives; every
    flagged point, the first and last point and every point of ``keep_day``
    (the visit a report is about) are kept too. Series up to ``most`` points
    are returned whole.

    >>> pts = [{"t": f"2025-01-{1 + i % 28:02d}T{i % 24:02d}", "y": float(i % 97),
    ...         "flagged": i == 500} for i in range(2000)]
    >>> out = thin_points(pts, 100)
    >>> len(out) <= 103, max(p["y"] for p in out), min(p["y"] for p in out)
    (True, 96.0, 0.0)
    >>> any(p["flagged"] for p in out)
    True
    """
    if len(points) <= most:
        return points
    pts = sorted(points, key=lambda p: str(p["t"]))
    n_buckets = max(1, most // 2)
    size = -(-len(pts) // n_buckets)
    keep = {0, len(pts) - 1}
    for start in range(0, len(pts), size):
        idx = range(start, min(start + size, len(pts)))
        keep.add(min(idx, key=lambda i: pts[i]["y"]))
        keep.add(max(idx, key=lambda i: pts[i]["y"]))
    keep.update(i for i, p in enumerate(pts) if p.get("flagged")
                or (keep_day and str(p["t"])[:10] == keep_day))
    return [pts[i] for i in sorted(keep)]


def _thin_series(specs: list[dict], keep_day: str | None) -> list[dict]:
    for spec in specs:
        for ser in spec["series"]:
            n = len(ser["points"])
            ser["points"] = [_label_point(p) for p in thin_points(ser["points"],
                                                                  keep_day=keep_day)]
            if len(ser["points"]) < n:
                ser["thinned_from"] = n
    return specs


def chart_specs(site: Mapping, readings: Iterable[Mapping], targets: Iterable[Mapping] = (),
                as_of: str | None = None, highlight: str | None = None) -> list[dict]:
    """Trend chart data (long series thinned, every extreme and flagged point
    kept: :func:`thin_points`); see :func:`_chart_specs`."""
    return _thin_series(_chart_specs(site, readings, targets, as_of, highlight), highlight)


def _chart_specs(site: Mapping, readings: Iterable[Mapping], targets: Iterable[Mapping] = (),
                 as_of: str | None = None, highlight: str | None = None) -> list[dict]:
    """Trend chart data for a site: one chart of soil ECe by depth (salinity
    class bands, crop lines), one of solution EC at 25 °C by sample kind.
    Only current readings; each becomes one point."""
    cur = current_readings(readings, as_of)
    crop = site_crop(dict(site))
    tmap = targets_for_crop(targets, crop)
    specs = []
    soil = [r for r in cur if r.get("sample") in SOIL_KINDS and _ece(r) is not None]
    if soil:
        series = []
        for d in sorted({r.get("depth_cm") for r in soil}, key=_depth_sort):
            name = depth_label(d)
            series.append({"name": name, "points": [_point(r, _ece(r), name) for r in soil
                                                      if r.get("depth_cm") == d]})
        lines = crop_lines(crop)
        t = tmap.get("ece")
        for lim, k in (("lo_dS_m", "low"), ("hi_dS_m", "high")):
            if t and t.get(lim) is not None:
                lines.append({"y": t[lim], "key": f"target_{k}", "dash": "10 3 2 3",
                              "label": f"your ECe target ({k})"})
        specs.append({"id": "soil", "title": "Soil salinity (ECe) over time, by depth",
                      "y_label": "ECe, dS/m", "series": series, "bands": soil_bands(),
                      "lines": lines, "highlight": highlight,
                      "bands_source": tolerance.SOIL_SALINITY_SOURCE})
    sol = [r for r in cur if r.get("sample") in SOLUTION_KINDS and _ec25(r) is not None]
    if sol:
        kinds = [k for k in SOLUTION_KINDS if any(r["sample"] == k for r in sol)]
        series = [{"name": _kind_short(k), "points": [_point(r, _ec25(r), _kind_short(k))
                                                      for r in sol if r["sample"] == k]}
                  for k in kinds]
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
        spec = {"id": "solution", "title": "EC at 25 °C over time, by sample",
                "y_label": "EC at 25 °C, dS/m", "series": series, "bands": [],
                "lines": lines[:4], "highlight": highlight}
        if kinds == ["water"]:
            spec["bands"] = water_bands()
            spec["bands_source"] = tolerance.WATER_HAZARD_SOURCE
        specs.append(spec)
    return specs


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
