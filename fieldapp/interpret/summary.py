"""The whole site: the summary the site page, the report, the API and the
CLI show, its headline sentences, and what setting a crop would add."""
from __future__ import annotations

from typing import Iterable, Mapping

from .common import (CAUTIONS, _day, crop_dict, current_readings, short_number,
                     site_crop)
from .soil import soil_state
from .solutions import feed_leachate, feed_leachate_days, substrate_tests, water_state
from .targets import targets_for_crop

def site_summary(site: Mapping, readings: Iterable[Mapping], targets: Iterable[Mapping] = (),
                 as_of: str | None = None) -> dict:
    """Everything the site page and the report say about where a site stands.

    ``as_of`` (YYYY-MM-DD) limits the interpretation to readings up to that
    day (the visit report shows the state as it was at that visit).
    """
    readings = list(readings)
    cur = current_readings(readings, as_of)
    return summary_from_rows(site, {
        "n_readings": len(readings), "n_current": len(cur),
        "last_date": _day(cur[-1]) if cur else None,
        "soil": cur, "water": cur, "substrate": cur, "greenhouse": cur}, targets, as_of)


def summary_from_rows(site: Mapping, rows: Mapping, targets: Iterable[Mapping] = (),
                      as_of: str | None = None) -> dict:
    """:func:`site_summary` from the rows each part needs: ``soil``,
    ``water``, ``substrate`` (current readings, oldest first: all of them or
    those ``store.site_rows`` picked), ``greenhouse`` (readings, or
    ``greenhouse_days`` as :func:`feed_leachate_days` takes them), ``n_water``
    when ``water`` holds only the latest, and the counts ``n_readings``,
    ``n_current``, ``last_date``."""
    site = dict(site)
    crop = site_crop(site)
    tmap = targets_for_crop(targets, crop)
    soil = soil_state(rows["soil"], crop, tmap.get("ece"))
    water = water_state(rows["water"], crop, tmap.get("water"), n=rows.get("n_water"))
    gh = (feed_leachate_days(rows["greenhouse_days"], tmap) if "greenhouse_days" in rows
          else feed_leachate(rows["greenhouse"], tmap))
    out = {
        "site": {k: site.get(k) for k in ("id", "name", "kind", "crop", "latitude", "longitude",
                                          "sp_pct", "texture", "notes")},
        "as_of": as_of,
        "n_current": rows["n_current"],
        "n_readings": rows["n_readings"],
        "last_date": rows["last_date"],
        "crop": crop_dict(crop),
        "crop_unknown": bool(site.get("crop")) and crop is None,
        "soil": soil, "water": water, "greenhouse": gh,
        "substrate": substrate_tests(rows["substrate"], tmap),
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

