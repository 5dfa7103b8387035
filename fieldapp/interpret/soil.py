"""Soil: the latest ECe by depth, the root-zone mean with its class and
expected yield (Maas-Hoffman), the potentials, and the change since the soil
visit before."""
from __future__ import annotations

import datetime as dt
import math
from collections import defaultdict
from typing import Mapping

from ..science import osmotic, tolerance
from .common import (SOIL_KINDS, _day, _ece, _flags, _mean, _r, _unc, depth_label,
                     soil_class)
from .targets import compare_to_target

# --------------------------------------------------------------------------
# Direction of change
# --------------------------------------------------------------------------

#: Uncertainty assumed for an ECe whose method states none (±%): common
#: practice, the order of a field meter and sampling repeatability.
FALLBACK_UNCERTAINTY_PCT = 10.0


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
        from ..labels import method_label   # plain words, never the method keys
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


