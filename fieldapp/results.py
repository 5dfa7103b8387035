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


class RoundedColumns:
    """:func:`round_sig` of whole columns of a converted batch, each (column,
    digits) once, as ``rounded(column, i, digits)``: a batch of thousands of
    readings rounds a column in one pass instead of a call per cell. The
    same numbers as :func:`round_sig` of each cell."""

    def __init__(self, out: dict):
        self.out, self.done = out, {}

    def __call__(self, column: str, i: int, digits: int = 6):
        got = self.done.get((column, digits))
        if got is None:
            got = self.done[(column, digits)] = _rounded_list(self.out[column], digits)
        return got[i]


_INF = float("inf")


def _rounded_list(values, digits: int) -> list:
    form = f"%.{digits}g"
    try:        # a NaN fails both comparisons: None, as round_sig gives
        return [float(form % v) if v is not None and -_INF < v < _INF else None
                for v in values]
    except TypeError:
        return [round_sig(v, digits) for v in values]


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


def tds_block(kw: dict, row: dict, estimate: float | None) -> dict:
    """The two TDS figures, each labelled: what a TDS meter displayed (with its
    factor), and the Handbook 60 estimate from EC25 (``estimate``, the result's
    rounded ``tds_mg_L``). Never two bare numbers."""
    meter = None
    if row.get("unit_kind") == "tds":
        f = kw.get("tds_factor")
        meter = {"value": kw["value"], "unit": row["unit_canonical"], "factor": f,
                 "label": f"TDS as the meter displayed it ({kw['value']:g} "
                          f"{row['unit_canonical']}, meter factor {f:g} mg/L per µS/cm)"}
    return {"meter": meter,
            "estimate_mg_L": estimate,
            "estimate_method": "tds_estimate_handbook60",
            "estimate_label": TDS_ESTIMATE_LABEL}


#: The batch's columns a result reads unrounded (:func:`result_for_row`, :func:`tds_block`).
_ROW_COLUMNS = ("crop", "unit_canonical", "unit_note", "unit_kind", "ec25_dS_m", "temp_method",
                "ece_method", "ece_uncertainty_basis", "ece_note", "ece_out_of_range",
                "psi_s_method", "soil_class", "water_hazard", "leaching_requirement")


def result_for_row(out: dict, i: int, kw: dict, rounded: RoundedColumns | None = None) -> dict:
    """The JSON-ready result of row ``i`` of a converted batch; ``rounded``:
    the batch's :class:`RoundedColumns`, kept by a caller that makes every row's."""
    R = rounded or RoundedColumns(out)
    row = {k: out[k][i] for k in _ROW_COLUMNS if k in out}    # those read below, not all
    row["flags"] = out["flags"].for_row(i)
    crop = row["crop"]
    tds = R("tds_mg_L", i, 4)
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
        "ec_dS_m": R("ec_dS_m", i),
        "ec25_dS_m": R("ec25_dS_m", i),
        "ec25_uS_cm": round_sig(row["ec25_dS_m"] * 1000.0),
        "compensation_factor": R("compensation_factor", i, 4),
        "temp_method": row["temp_method"],
        "ece_dS_m": R("ece_dS_m", i),
        "ece_method": row["ece_method"],
        "ece_uncertainty_pct": R("ece_uncertainty_pct", i, 3),
        "ece_uncertainty_basis": row["ece_uncertainty_basis"],
        "ece_note": row["ece_note"],
        "ece_out_of_range": bool(row["ece_out_of_range"]),
        "psi_s_MPa": R("psi_s_MPa", i, 4),
        "psi_s_method": row["psi_s_method"],
        "psi_s_by_method": {k: R(f"psi_s_{k}_MPa", i, 4)
                            for k in (*osmotic.PSI_S_ROUTES, osmotic.SEAWATER_ROUTE)},
        "salinity_pss78": R("salinity_pss78", i, 4),
        "tds_mg_L": tds,
        "tds": tds_block(kw, row, tds),
        "cations_meq_L": R("cations_meq_L", i, 4),
        "soil_solution": None,
        "soil_class": row["soil_class"],
        "water_hazard": row["water_hazard"],
        "flags": [f.as_dict() for f in row["flags"]],
        "cautions": list(CAUTIONS),
    }
    if kw["sample"] in ("paste", "extract"):
        result["soil_solution"] = _soil_solution(R, i)
    if crop:
        result["crop"] = crop_summary(tolerance.find_crop(crop))
        if kw["sample"] in ("paste", "extract"):
            result["relative_yield_pct"] = R("relative_yield_pct", i, 4)
        if kw["sample"] == "water":
            lr = float(row["leaching_requirement"])
            result["leaching_requirement"] = None if math.isnan(lr) else (
                round_sig(lr, 4) if math.isfinite(lr) else None)
    return result


def _soil_solution(R: RoundedColumns, i: int) -> dict:
    """The soil solution of a soil reading: EC and solute potential at field
    capacity and at the measured moisture, total potential, margin to wilting."""
    return {
        "ec_fc_dS_m": R("ec_fc_dS_m", i),
        "psi_s_fc_MPa": R("psi_s_fc_MPa", i, 4),
        "ec_sw_dS_m": R("ec_sw_dS_m", i),
        "psi_s_sw_MPa": R("psi_s_sw_MPa", i, 4),
        "matric_MPa": R("matric_MPa", i, 4),
        "psi_total_MPa": R("psi_total_MPa", i, 4),
        "margin_to_pwp_MPa": R("margin_to_pwp_MPa", i, 4),
        "field_capacity_MPa": osmotic.FIELD_CAPACITY_MPa,
        "wilting_point_MPa": osmotic.PERMANENT_WILTING_POINT_MPa,
    }
