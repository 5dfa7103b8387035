"""Computed arrays -> the result a page, the API, the CSV and the CLI show.

:func:`result_for_row` turns one row of :func:`fieldapp.science.convert.convert_batch`'s
columns into the JSON-ready result of `convert --json`, `POST /api/preview` and
the stored row: numbers rounded for people and JSON (:func:`round_sig`), every
figure beside the method that made it, the crop's tolerance, the two TDS
figures each labelled, the flags as dicts and the cautions. Nothing here
computes a model or parses typed text.
"""
from __future__ import annotations

import math

from .lazy import Later
from .science import tolerance

# At the first result, not at the start: the entry page reads only CAUTIONS here, no numpy.
osmotic = Later("fieldapp.science.osmotic")

#: Shown wherever results are shown: the estimates can drive costly decisions.
CAUTIONS = (
    "These figures are estimates from a field meter and published approximations, "
    "not a laboratory analysis.",
    "Before costly decisions (reclamation, leaching, changing the crop or the feed) "
    "confirm with a laboratory analysis and ask your local extension service or a "
    "licensed advisor; local codes and rules come first.",
    "Handle calibration solutions and soil samples with gloves and clean hands; keep "
    "standards away from food and children.",
)


def round_sig(x, digits: int = 6):
    """Round to significant digits for JSON; None for None, NaN and infinity."""
    if x is None:
        return None
    x = float(x)
    if math.isnan(x) or math.isinf(x):
        return None
    return float(f"{x:.{digits}g}")


def crop_summary(c) -> dict:
    """A crop's salt tolerance as shown with a result: Maas-Hoffman threshold
    and slope, ECe at 100/90/75/50 % yield, and the table row's source."""
    return {
        "name": c.name,
        "threshold_dS_m": c.threshold_dS_m,
        "slope_pct_per_dS_m": c.slope_pct_per_dS_m,
        "tolerance_class": c.tolerance_class,
        "tolerance_label": c.tolerance_label,
        "ece_at_yield_dS_m": {str(p): round_sig(tolerance.ece_at_yield(c, p), 3)
                              for p in (100, 90, 75, 50)},
        "source": c.source,
        "source_status": "read" if c.verified else "unverified",
        "note": c.note or None,
    }


TDS_ESTIMATE_LABEL = ("TDS estimated from EC at 25 °C by USDA Handbook 60 "
                      "(640 mg/L per dS/m); an estimate, not a measurement")


def tds_block(kw: dict, row: dict) -> dict:
    """The two TDS figures, each labelled: what a TDS meter displayed (with its
    factor), and the Handbook 60 estimate from EC25. Never two bare numbers."""
    meter = None
    if row.get("unit_kind") == "tds":
        f = kw.get("tds_factor")
        meter = {"value": kw["value"], "unit": row["unit_canonical"], "factor": f,
                 "label": f"TDS as the meter displayed it ({kw['value']:g} "
                          f"{row['unit_canonical']}, meter factor {f:g} mg/L per µS/cm)"}
    return {"meter": meter,
            "estimate_mg_L": round_sig(row["tds_mg_L"], 4),
            "estimate_method": "tds_estimate_handbook60",
            "estimate_label": TDS_ESTIMATE_LABEL}


def result_for_row(out: dict, i: int, kw: dict) -> dict:
    """The JSON-ready result of row ``i`` of a converted batch."""
    row = {k: v[i] for k, v in out.items() if k != "flags"}
    row["flags"] = out["flags"].for_row(i)
    crop = row["crop"]
    result = {
        "input": {
            "value": kw["value"], "unit": kw["unit"], "sample": kw["sample"],
            "ratio": None if kw["ratio_n"] is None else f"1:{kw['ratio_n']:g}",
            "temp_c": kw["temp_c"], "compensated": kw["compensated"],
            "sp": kw["sp_pct"], "texture": kw["texture"], "tds_factor": kw["tds_factor"],
            "theta_g_pct": kw["theta_g_pct"], "matric_MPa": kw["matric_MPa"],
            "crop": crop, "ece_method": kw["ece_method"],
            "salt_type": kw.get("salt_type"),
        },
        "unit_canonical": row["unit_canonical"],
        "unit_note": row["unit_note"],
        "ec_dS_m": round_sig(row["ec_dS_m"]),
        "ec25_dS_m": round_sig(row["ec25_dS_m"]),
        "ec25_uS_cm": round_sig(row["ec25_dS_m"] * 1000.0),
        "compensation_factor": round_sig(row["compensation_factor"], 4),
        "temp_method": row["temp_method"],
        "ece_dS_m": round_sig(row["ece_dS_m"]),
        "ece_method": row["ece_method"],
        "ece_uncertainty_pct": round_sig(row["ece_uncertainty_pct"], 3),
        "ece_uncertainty_basis": row["ece_uncertainty_basis"],
        "ece_note": row["ece_note"],
        "ece_out_of_range": bool(row["ece_out_of_range"]),
        "psi_s_MPa": round_sig(row["psi_s_MPa"], 4),
        "psi_s_method": row["psi_s_method"],
        "psi_s_by_method": {k: round_sig(row[f"psi_s_{k}_MPa"], 4)
                            for k in (*osmotic.PSI_S_ROUTES, osmotic.SEAWATER_ROUTE)},
        "salinity_pss78": round_sig(row["salinity_pss78"], 4),
        "tds_mg_L": round_sig(row["tds_mg_L"], 4),
        "tds": tds_block(kw, row),
        "cations_meq_L": round_sig(row["cations_meq_L"], 4),
        "soil_solution": None,
        "soil_class": row["soil_class"],
        "water_hazard": row["water_hazard"],
        "flags": [f.as_dict() for f in row["flags"]],
        "cautions": list(CAUTIONS),
    }
    if kw["sample"] in ("paste", "extract"):
        result["soil_solution"] = _soil_solution(row)
    if crop:
        result["crop"] = crop_summary(tolerance.find_crop(crop))
        if kw["sample"] in ("paste", "extract"):
            result["relative_yield_pct"] = round_sig(row["relative_yield_pct"], 4)
        if kw["sample"] == "water":
            lr = float(row["leaching_requirement"])
            result["leaching_requirement"] = None if math.isnan(lr) else (
                round_sig(lr, 4) if math.isfinite(lr) else None)
    return result


def _soil_solution(row: dict) -> dict:
    """The soil solution of a soil reading: EC and solute potential at field
    capacity and at the measured moisture, total potential, margin to wilting."""
    return {
        "ec_fc_dS_m": round_sig(row["ec_fc_dS_m"]),
        "psi_s_fc_MPa": round_sig(row["psi_s_fc_MPa"], 4),
        "ec_sw_dS_m": round_sig(row["ec_sw_dS_m"]),
        "psi_s_sw_MPa": round_sig(row["psi_s_sw_MPa"], 4),
        "matric_MPa": round_sig(row["matric_MPa"], 4),
        "psi_total_MPa": round_sig(row["psi_total_MPa"], 4),
        "margin_to_pwp_MPa": round_sig(row["margin_to_pwp_MPa"], 4),
        "field_capacity_MPa": osmotic.FIELD_CAPACITY_MPa,
        "wilting_point_MPa": osmotic.PERMANENT_WILTING_POINT_MPa,
    }
