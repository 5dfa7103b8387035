"""The one path from a reading as the meter displayed it to every derived number.

The command line (`convert`, `convert-csv`), the live preview, the stored
row and the import all call :func:`convert_batch` on column arrays of
validated values (typed text is read by :mod:`fieldapp.forms`; the JSON-ready
result of one row is shaped by :mod:`fieldapp.results`;
:func:`fieldapp.records.convert_reading` chains the three for one reading).
Nothing here touches disk or the network.

Steps, in order (each a documented function in its own module):

1. unit as displayed -> EC in dS/m at the sample temperature   (units)
2. sample temperature -> EC at 25 °C                           (temperature)
3. sample kind, ratio, SP or texture -> ECe                    (extracts)
4. EC at 25 °C -> solute potential by every route              (osmotic)
5. ECe -> soil solution at field capacity / current moisture   (osmotic)
6. crop -> relative yield, leaching requirement, classes       (tolerance)
7. plausibility flags                                          (checks)
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from . import InputError, checks, extracts, osmotic, temperature, tolerance, units
from .groups import codes as _codes, groups as _groups

#: Sample kinds whose own solution is what the plant roots see (or its nearest proxy).
_SOLUTION_KINDS = {"water", "feed", "leachate", "drain", "sme"}

#: The longest list convert_batch accepts in one call (memory guard for the web API).
MAX_BATCH = 2_000_000


@dataclass
class Batch:
    """Column arrays of readings, all the same length. Strings are object arrays."""

    value: np.ndarray
    unit: np.ndarray
    sample: np.ndarray
    ratio_n: np.ndarray
    temp_c: np.ndarray
    compensated: np.ndarray
    sp_pct: np.ndarray
    texture: np.ndarray
    tds_factor: np.ndarray
    theta_g_pct: np.ndarray
    matric_MPa: np.ndarray
    ece_method: np.ndarray
    crop: np.ndarray
    context: dict = field(default_factory=dict)
    #: "sea_salt" where the user says the water is sea-salt-like (coastal
    #: wells, seawater intrusion); None otherwise.
    salt_type: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.value.shape[0])


def _col(x, n, dtype, default):
    if x is None:
        return np.full(n, default, dtype=dtype)
    arr = np.asanyarray(x, dtype=dtype)       # a coded column keeps its codes
    if arr.ndim == 0:
        return np.full(n, arr.item() if dtype is not object else x, dtype=dtype)
    if arr.shape[0] != n:
        raise InputError(f"column has {arr.shape[0]} values, expected {n}")
    return arr


#: Optional columns that give the plausibility rules their context: the
#: meter profile, the last calibration check, the site's history at the same
#: kind and depth, the other replicates of the sample. Floats are NaN where
#: unknown; the object columns hold a tuple or None.
CONTEXT_FLOAT = ("meter_min_dS_m", "meter_max_dS_m", "meter_resolution_dS_m",
                 "meter_temp_min_c", "meter_temp_max_c", "meter_known", "cal_passed",
                 "cal_deviation_pct", "cal_age_days", "cal_max_age_days",
                 "history_median", "history_mad", "history_n")
CONTEXT_OBJECT = ("meter_units", "replicate_others")


def make_batch(value, unit, sample="paste", ratio_n=None, temp_c=None,
               compensated=False, sp_pct=None, texture=None, tds_factor=None,
               theta_g_pct=None, matric_MPa=None, ece_method=None, crop=None,
               context: dict | None = None, salt_type=None) -> Batch:
    """Broadcast scalars and columns into a :class:`Batch` of equal-length arrays."""
    value = np.atleast_1d(np.asarray(value, dtype=float))
    n = value.shape[0]
    if n > MAX_BATCH:
        raise InputError(f"at most {MAX_BATCH} readings at a time")
    return Batch(
        value=value,
        unit=_col(unit, n, object, None),
        sample=_col(sample, n, object, "paste"),
        ratio_n=_col(ratio_n, n, float, np.nan),
        temp_c=_col(temp_c, n, float, np.nan),
        compensated=_col(compensated, n, bool, False),
        sp_pct=_col(sp_pct, n, float, np.nan),
        texture=_col(texture, n, object, None),
        tds_factor=_col(tds_factor, n, float, np.nan),
        theta_g_pct=_col(theta_g_pct, n, float, np.nan),
        matric_MPa=_col(matric_MPa, n, float, np.nan),
        ece_method=_col(ece_method, n, object, None),
        crop=_col(crop, n, object, None),
        context=_context(context or {}, n),
        salt_type=_col(salt_type, n, object, None),
    )


def _context(ctx: dict, n: int) -> dict:
    out = {}
    for k, v in ctx.items():
        if k in CONTEXT_FLOAT:
            out[k] = _col(np.nan if v is None else v, n, float, np.nan)
        elif k in CONTEXT_OBJECT:
            if isinstance(v, np.ndarray) and v.dtype == object and v.shape == (n,):
                out[k] = v
            else:
                arr = np.empty(n, dtype=object)
                for i in range(n):
                    arr[i] = v
                out[k] = arr
        else:
            raise ValueError(f"unknown context column {k!r}")
    return out


def convert_batch(b: Batch) -> dict[str, np.ndarray]:
    """Convert every reading of a batch; returns a dict of equal-length columns.

    The steps of the module docstring, each a short function below, in order:
    :func:`_check_values`, :func:`_unit_step`, :func:`_temperature_step`,
    :func:`_ece_step`, :func:`_solute_step` (with :func:`_sea_salt_step`),
    :func:`_soil_solution_step`, :func:`_crop_step`, then the flag rules.

    Raises :class:`InputError` for input that cannot be a reading (unknown unit,
    TDS without factor, unknown texture or crop, regression for another ratio).
    Doubtful values never raise: they come back with flags.
    """
    _check_values(b)
    c = _unit_step(b)
    c.update(_temperature_step(b, c["ec_dS_m"]))
    c.update(_ece_step(b, c["ec25_dS_m"]))
    c.update(_solute_step(b, c))
    c.update(_soil_solution_step(b, c["ece_dS_m"]))
    c.update(_crop_step(b, c["ece_dS_m"], c["ec25_dS_m"]))
    out = _columns(b, c)
    out["flags"] = checks.reading_flags(out)
    return out


def _check_values(b: Batch) -> None:
    """Refuse what cannot be a reading: NaN, infinity, a negative EC."""
    if len(b) and not np.all(np.isfinite(b.value)):
        raise InputError("The reading must be a number (no NaN or infinity).", "value")
    if len(b) and np.any(b.value < 0):
        raise InputError("EC cannot be negative; type the number the meter shows.", "value")


def _sample_in(b: Batch, kinds) -> np.ndarray:
    """Whether each reading's sample kind is one of ``kinds``: asked once per
    distinct kind (np.isin sorts the column's strings)."""
    codes, values = _codes(b.sample)
    return np.array([v in kinds for v in values], dtype=bool)[codes]


def _is_soil(b: Batch) -> np.ndarray:
    return _sample_in(b, ("paste", "extract"))


def _unit_step(b: Batch) -> dict:
    """1. The unit as displayed -> EC in dS/m at the sample temperature (units)."""
    n = len(b)
    c = {"ec_dS_m": np.empty(n), "unit_canonical": np.empty(n, dtype=object),
         "unit_kind": np.empty(n, dtype=object), "unit_note": np.empty(n, dtype=object)}
    for (u, f), rows in _groups(b.unit, b.tds_factor):
        pu = units.parse_unit(u if u is not None else "")
        factor = None if (f is None or math.isnan(f)) else f
        c["ec_dS_m"][rows] = units.to_ec_dS_m(b.value[rows], pu, tds_factor=factor)
        c["unit_canonical"][rows] = pu.canonical
        c["unit_kind"][rows] = pu.kind
        c["unit_note"][rows] = pu.note
    return c


def _temperature_step(b: Batch, ec_dS_m: np.ndarray) -> dict:
    """2. Sample temperature -> EC at 25 °C, the method used and the factor (temperature)."""
    ec25 = temperature.to_25(ec_dS_m, b.temp_c, b.compensated)
    with np.errstate(divide="ignore", invalid="ignore"):
        comp_factor = np.where(ec_dS_m > 0, ec25 / ec_dS_m, np.nan)
    return {"ec25_dS_m": ec25, "compensation_factor": comp_factor,
            "temp_method": temperature.applied_method(b.temp_c, b.compensated).astype(object)}


def _ece_step(b: Batch, ec25: np.ndarray) -> dict:
    """3. Sample kind, ratio, SP or texture -> ECe with its method and uncertainty (extracts)."""
    n = len(b)
    c = {"ece_dS_m": np.full(n, np.nan), "ece_method": np.full(n, None, dtype=object),
         "ece_uncertainty_pct": np.full(n, np.nan),
         "ece_uncertainty_basis": np.full(n, None, dtype=object),
         "ece_note": np.full(n, None, dtype=object), "ece_out_of_range": np.zeros(n, dtype=bool)}
    for (kind, r, sp, tex, meth), rows in _groups(b.sample, b.ratio_n, b.sp_pct,
                                                  b.texture, b.ece_method):
        if kind not in extracts.SAMPLE_KINDS:
            raise InputError(
                f"Unknown sample kind {kind!r}; use one of: "
                + ", ".join(extracts.SAMPLE_KINDS), "sample")
        est = extracts.estimate_ece(
            ec25[rows], kind,
            ratio_n=None if math.isnan(r) else r,
            sp_pct=None if math.isnan(sp) else sp,
            texture=tex or None, method=meth or None)
        c["ece_dS_m"][rows] = est.ece_dS_m
        pr = est.per_row()
        c["ece_method"][rows] = pr["method"]
        c["ece_uncertainty_pct"][rows] = pr["uncertainty_pct"]
        if est.method is not None:
            c["ece_note"][rows] = pr["note"]
            c["ece_uncertainty_basis"][rows] = pr["basis"]
        c["ece_out_of_range"][rows] = pr["out_of_range"]
    return c


def _solute_step(b: Batch, c: dict) -> dict:
    """4. Solute potential of the solution that matters, by every route (osmotic):
    ECe for soil, the sample itself for waters, feeds, leachates and saturated
    media extracts; the default route, Handbook 60 where it is out of range,
    the seawater route where the user says so."""
    t_soln = np.where(np.isnan(b.temp_c), 25.0, b.temp_c)
    is_solution = _sample_in(b, _SOLUTION_KINDS)
    basis = np.where(_is_soil(b), c["ece_dS_m"],
                     np.where(is_solution, c["ec25_dS_m"], np.nan))
    routes = osmotic.psi_s_all_routes(basis, t_soln)
    psi_default = routes[osmotic.DEFAULT_ROUTE]
    fallback = "handbook60"
    use_fb = np.isnan(psi_default) & ~np.isnan(routes[fallback])
    psi_s = np.where(use_fb, routes[fallback], psi_default)
    routes_named = np.array([None, osmotic.DEFAULT_ROUTE, fallback], dtype=object)
    psi_method = routes_named[np.where(np.isnan(psi_s), 0, np.where(use_fb, 2, 1))]
    salinity, psi_sea, salt = _sea_salt_step(b, c["ec_dS_m"], basis, t_soln, is_solution)
    ok = ~np.isnan(psi_sea)
    psi_s[ok] = psi_sea[ok]
    psi_method[ok] = osmotic.SEAWATER_ROUTE
    return {"psi_s_MPa": psi_s, "psi_s_method": psi_method, "routes": routes,
            "psi_sea": psi_sea, "salinity_pss78": salinity, "salt_type": salt}


def _sea_salt_step(b: Batch, ec_dS_m, basis, t_soln, is_solution):
    """4b. Sea-salt water: PSS-78 salinity and the seawater route, beside the
    NaCl route, only where the user says the water is sea-salt-like. A
    solution read without compensation at a known temperature goes into
    PSS-78 as read (the scale's own temperature correction); otherwise its
    value at 25 °C. Returns (salinity, psi_s by the seawater route, salt_type)."""
    n = len(b)
    salinity = np.full(n, np.nan)
    psi_sea = np.full(n, np.nan)
    salt = b.salt_type if b.salt_type is not None else np.full(n, None, dtype=object)
    sea = np.flatnonzero(salt == "sea_salt")
    if sea.size:
        raw = (~b.compensated[sea]) & ~np.isnan(b.temp_c[sea]) & is_solution[sea]
        c_in = np.where(raw, ec_dS_m[sea], basis[sea])
        t_in = np.where(raw, b.temp_c[sea], 25.0)
        salinity[sea] = osmotic.practical_salinity_pss78(c_in, t_in)
        psi_sea[sea] = osmotic.psi_s_seawater(c_in, t_soln[sea], t_in)
    return salinity, psi_sea, salt


def _soil_solution_step(b: Batch, ece: np.ndarray) -> dict:
    """5. ECe -> soil solution at field capacity and at the measured moisture,
    total water potential and the margin to wilting (osmotic); soil kinds only."""
    n = len(b)
    c = {k: np.full(n, np.nan) for k in ("ec_fc_dS_m", "psi_s_fc_MPa", "ec_sw_dS_m",
                                         "psi_s_sw_MPa", "sp_used_pct")}
    soil = np.flatnonzero(_is_soil(b))
    if soil.size:
        t_soil = np.where(np.isnan(b.temp_c[soil]), 25.0, b.temp_c[soil])
        sp_used = b.sp_pct[soil].copy()
        for (tex,), rows in _groups(b.texture[soil]):
            if tex:
                sp_used[rows] = np.where(np.isnan(sp_used[rows]),
                                         extracts.sp_for_texture(tex), sp_used[rows])
        c["ec_fc_dS_m"][soil] = osmotic.soil_solution_ec_at_field_capacity(ece[soil])
        c["psi_s_fc_MPa"][soil] = _psi_best(c["ec_fc_dS_m"][soil], t_soil)
        c["ec_sw_dS_m"][soil] = osmotic.soil_solution_ec(ece[soil], sp_used,
                                                         b.theta_g_pct[soil])
        c["psi_s_sw_MPa"][soil] = _psi_best(c["ec_sw_dS_m"][soil], t_soil)
        c["sp_used_pct"][soil] = sp_used
    psi_root = np.where(np.isnan(c["psi_s_sw_MPa"]), c["psi_s_fc_MPa"], c["psi_s_sw_MPa"])
    c["psi_total_MPa"] = osmotic.total_water_potential(psi_root, b.matric_MPa)
    c["margin_to_pwp_MPa"] = osmotic.margin_to_wilting_point(c["psi_total_MPa"])
    return c


def _crop_step(b: Batch, ece: np.ndarray, ec25: np.ndarray) -> dict:
    """6. Crop -> relative yield (soil), leaching requirement (water), and the
    soil and water salinity classes (tolerance)."""
    n = len(b)
    is_soil = _is_soil(b)
    is_water = b.sample == "water"
    c = {"crop": np.full(n, None, dtype=object), "relative_yield_pct": np.full(n, np.nan),
         "leaching_requirement": np.full(n, np.nan),
         "soil_class": np.full(n, None, dtype=object),
         "water_hazard": np.full(n, None, dtype=object)}
    for (name,), rows in _groups(b.crop):
        if not name:
            continue
        crop = tolerance.find_crop(name)
        c["crop"][rows] = crop.name
        soil_rows = rows[is_soil[rows]]
        c["relative_yield_pct"][soil_rows] = tolerance.relative_yield_pct(ece[soil_rows], crop)
        water_rows = rows[is_water[rows]]
        c["leaching_requirement"][water_rows] = tolerance.leaching_requirement(
            ec25[water_rows], crop=crop)
    if is_soil.any():
        c["soil_class"][is_soil] = tolerance.soil_salinity_class(ece[is_soil])
    if is_water.any():
        c["water_hazard"][is_water] = tolerance.water_salinity_hazard(ec25[is_water])
    return c


def _columns(b: Batch, c: dict) -> dict:
    """The batch's input and computed columns in their published order, plus
    the context columns the flag rules read."""
    return {
        "value": b.value, "unit": b.unit, "unit_canonical": c["unit_canonical"],
        "unit_kind": c["unit_kind"], "unit_note": c["unit_note"],
        "sample": b.sample, "ratio_n": b.ratio_n, "temp_c": b.temp_c,
        "compensated": b.compensated,
        **{k: c[k] for k in ("ec_dS_m", "ec25_dS_m", "compensation_factor", "ece_dS_m",
                             "ece_method", "ece_uncertainty_pct", "ece_uncertainty_basis",
                             "ece_note", "ece_out_of_range", "psi_s_MPa", "psi_s_method")},
        **{f"psi_s_{k}_MPa": v for k, v in c["routes"].items()},
        f"psi_s_{osmotic.SEAWATER_ROUTE}_MPa": c["psi_sea"],
        "salinity_pss78": c["salinity_pss78"], "salt_type": c["salt_type"],
        "temp_method": c["temp_method"],
        "tds_mg_L": units.tds_mg_L_from_ec(c["ec25_dS_m"]),
        "cations_meq_L": units.cations_meq_L_from_ec(c["ec25_dS_m"]),
        **{k: c[k] for k in ("ec_fc_dS_m", "psi_s_fc_MPa", "ec_sw_dS_m", "psi_s_sw_MPa")},
        "matric_MPa": b.matric_MPa,
        **{k: c[k] for k in ("psi_total_MPa", "margin_to_pwp_MPa", "crop",
                             "relative_yield_pct", "leaching_requirement", "soil_class",
                             "water_hazard", "sp_used_pct")},
        **b.context,
    }


def _psi_best(ec25_dS_m, temp_c):
    """Solute potential by the default route, Handbook 60 where it is out of range."""
    routes = osmotic.psi_s_all_routes(ec25_dS_m, temp_c)
    best = routes[osmotic.DEFAULT_ROUTE]
    return np.where(np.isnan(best), routes["handbook60"], best)


