"""The one path from a reading as the meter displayed it to every derived number.

The command line (`convert`, `convert-csv`), the live preview and the stored
row all call :func:`convert_batch`; :func:`convert_reading` is the same path
for a single reading and returns a JSON-ready dict. Nothing here touches disk
or the network.

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
    arr = np.asarray(x, dtype=dtype)
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


def _codes(col: np.ndarray) -> tuple[np.ndarray, list]:
    """Integer codes for a column (NaN and None are one value) and the value of each code."""
    n = col.shape[0]
    if col.dtype == object:
        first = col[0]
        if bool(np.all(col == first)):   # elementwise on object arrays, None included
            return np.zeros(n, dtype=np.intp), [first]
        mapping: dict = {}
        codes = np.fromiter((mapping.setdefault(v, len(mapping)) for v in col),
                            dtype=np.intp, count=n)
        return codes, list(mapping)
    col = np.asarray(col, dtype=float)
    nan = np.isnan(col)
    if nan.all():
        return np.zeros(n, dtype=np.intp), [math.nan]
    if not nan.any() and bool(np.all(col == col[0])):
        return np.zeros(n, dtype=np.intp), [float(col[0])]
    uniq, codes = np.unique(col, return_inverse=True)   # NaNs collapse into one
    values = [float(u) for u in uniq]
    return codes.astype(np.intp).ravel(), values


def _groups(*cols):
    """Yield (key tuple, row index array) for each distinct combination of columns.

    Readings in a file share a handful of units, kinds and methods, so each
    formula runs once per group on numpy arrays instead of once per row. A
    constant column costs one vectorized comparison.
    """
    if len(cols[0]) == 0:
        return
    combined = np.zeros(len(cols[0]), dtype=np.int64)
    values, code_arrays = [], []
    for col in cols:
        codes, vals = _codes(col)
        values.append(vals)
        code_arrays.append(codes)
        combined = combined * len(vals) + codes
        if len(vals) > 1:
            _, combined = np.unique(combined, return_inverse=True)
            combined = combined.ravel().astype(np.int64)
    if int(combined.max()) == 0:
        yield tuple(v[0] for v in values), np.arange(len(cols[0]), dtype=np.intp)
        return
    order = np.argsort(combined, kind="stable")
    bounds = np.flatnonzero(np.diff(combined[order])) + 1
    for rows in np.split(order, bounds):
        i = rows[0]
        yield tuple(values[k][code_arrays[k][i]] for k in range(len(cols))), rows


def _nan_to_none(x):
    return None if x is None or (isinstance(x, float) and math.isnan(x)) else x


def convert_batch(b: Batch) -> dict[str, np.ndarray]:
    """Convert every reading of a batch; returns a dict of equal-length columns.

    Raises :class:`InputError` for input that cannot be a reading (unknown unit,
    TDS without factor, unknown texture or crop, regression for another ratio).
    Doubtful values never raise: they come back with flags.
    """
    n = len(b)
    if n and not np.all(np.isfinite(b.value)):
        raise InputError("The reading must be a number (no NaN or infinity).", "value")
    if n and np.any(b.value < 0):
        raise InputError("EC cannot be negative; type the number the meter shows.", "value")

    # 1. units -> EC in dS/m at sample temperature
    ec_dS_m = np.empty(n)
    unit_canonical = np.empty(n, dtype=object)
    unit_kind = np.empty(n, dtype=object)
    unit_note = np.empty(n, dtype=object)
    for (u, f), rows in _groups(b.unit, b.tds_factor):
        pu = units.parse_unit(u if u is not None else "")
        factor = None if (f is None or math.isnan(f)) else f
        ec_dS_m[rows] = units.to_ec_dS_m(b.value[rows], pu, tds_factor=factor)
        unit_canonical[rows] = pu.canonical
        unit_kind[rows] = pu.kind
        unit_note[rows] = pu.note

    # 2. temperature -> EC at 25 °C
    ec25 = temperature.to_25(ec_dS_m, b.temp_c, b.compensated)
    temp_method = temperature.applied_method(b.temp_c, b.compensated).astype(object)
    with np.errstate(divide="ignore", invalid="ignore"):
        comp_factor = np.where(ec_dS_m > 0, ec25 / ec_dS_m, np.nan)

    # 3. ECe
    ece = np.full(n, np.nan)
    ece_method = np.full(n, None, dtype=object)
    ece_unc = np.full(n, np.nan)
    ece_note = np.full(n, None, dtype=object)
    ece_basis = np.full(n, None, dtype=object)
    ece_oor = np.zeros(n, dtype=bool)
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
        ece[rows] = est.ece_dS_m
        pr = est.per_row()
        ece_method[rows] = pr["method"]
        ece_unc[rows] = pr["uncertainty_pct"]
        if est.method is not None:
            ece_note[rows] = pr["note"]
            ece_basis[rows] = pr["basis"]
        ece_oor[rows] = pr["out_of_range"]

    # 4. solute potential of the solution that matters: ECe for soil, the
    #    sample itself for waters, feeds, leachates and saturated media extracts.
    t_soln = np.where(np.isnan(b.temp_c), 25.0, b.temp_c)
    is_soil = np.isin(b.sample, ["paste", "extract"])
    is_solution = np.isin(b.sample, list(_SOLUTION_KINDS))
    basis = np.where(is_soil, ece, np.where(is_solution, ec25, np.nan))
    routes = osmotic.psi_s_all_routes(basis, t_soln)
    psi_default = routes[osmotic.DEFAULT_ROUTE]
    fallback = "handbook60"
    use_fb = np.isnan(psi_default) & ~np.isnan(routes[fallback])
    psi_s = np.where(use_fb, routes[fallback], psi_default)
    psi_method = np.where(np.isnan(psi_s), None,
                          np.where(use_fb, fallback, osmotic.DEFAULT_ROUTE)).astype(object)

    # 4b. sea-salt water: PSS-78 salinity and the seawater route, beside the
    #     NaCl route, only where the user says the water is sea-salt-like.
    #     A solution read without compensation at a known temperature goes
    #     into PSS-78 as read (the scale's own temperature correction);
    #     otherwise its value at 25 °C.
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
        ok = sea[~np.isnan(psi_sea[sea])]
        psi_s[ok] = psi_sea[ok]
        psi_method[ok] = osmotic.SEAWATER_ROUTE

    # 5. soil solution (soil kinds only; computed on those rows alone)
    ec_fc = np.full(n, np.nan)
    psi_fc = np.full(n, np.nan)
    ec_sw = np.full(n, np.nan)
    psi_sw = np.full(n, np.nan)
    sp_used_all = np.full(n, np.nan)
    soil = np.flatnonzero(is_soil)
    if soil.size:
        sp_used = b.sp_pct[soil].copy()
        for (tex,), rows in _groups(b.texture[soil]):
            if tex:
                sp_used[rows] = np.where(np.isnan(sp_used[rows]),
                                         extracts.sp_for_texture(tex), sp_used[rows])
        ec_fc[soil] = osmotic.soil_solution_ec_at_field_capacity(ece[soil])
        psi_fc[soil] = _psi_best(ec_fc[soil], t_soln[soil])
        ec_sw[soil] = osmotic.soil_solution_ec(ece[soil], sp_used, b.theta_g_pct[soil])
        psi_sw[soil] = _psi_best(ec_sw[soil], t_soln[soil])
        sp_used_all[soil] = sp_used
    psi_root = np.where(np.isnan(psi_sw), psi_fc, psi_sw)
    psi_total = osmotic.total_water_potential(psi_root, b.matric_MPa)
    margin = osmotic.margin_to_wilting_point(psi_total)

    # 6. crop and classes
    rel_yield = np.full(n, np.nan)
    lr = np.full(n, np.nan)
    crop_name = np.full(n, None, dtype=object)
    for (c,), rows in _groups(b.crop):
        if not c:
            continue
        crop = tolerance.find_crop(c)
        crop_name[rows] = crop.name
        soil_rows = rows[is_soil[rows]]
        rel_yield[soil_rows] = tolerance.relative_yield_pct(ece[soil_rows], crop)
        water_rows = rows[b.sample[rows] == "water"]
        lr[water_rows] = tolerance.leaching_requirement(ec25[water_rows], crop=crop)
    soil_class = np.full(n, None, dtype=object)
    if is_soil.any():
        soil_class[is_soil] = tolerance.soil_salinity_class(ece[is_soil])
    water_hazard = np.full(n, None, dtype=object)
    is_water = b.sample == "water"
    if is_water.any():
        water_hazard[is_water] = tolerance.water_salinity_hazard(ec25[is_water])

    out = {
        "value": b.value,
        "unit": b.unit,
        "unit_canonical": unit_canonical,
        "unit_kind": unit_kind,
        "unit_note": unit_note,
        "sample": b.sample,
        "ratio_n": b.ratio_n,
        "temp_c": b.temp_c,
        "compensated": b.compensated,
        "ec_dS_m": ec_dS_m,
        "ec25_dS_m": ec25,
        "compensation_factor": comp_factor,
        "ece_dS_m": ece,
        "ece_method": ece_method,
        "ece_uncertainty_pct": ece_unc,
        "ece_uncertainty_basis": ece_basis,
        "ece_note": ece_note,
        "ece_out_of_range": ece_oor,
        "psi_s_MPa": psi_s,
        "psi_s_method": psi_method,
        **{f"psi_s_{k}_MPa": v for k, v in routes.items()},
        f"psi_s_{osmotic.SEAWATER_ROUTE}_MPa": psi_sea,
        "salinity_pss78": salinity,
        "salt_type": salt,
        "temp_method": temp_method,
        "tds_mg_L": units.tds_mg_L_from_ec(ec25),
        "cations_meq_L": units.cations_meq_L_from_ec(ec25),
        "ec_fc_dS_m": ec_fc,
        "psi_s_fc_MPa": psi_fc,
        "ec_sw_dS_m": ec_sw,
        "psi_s_sw_MPa": psi_sw,
        "matric_MPa": b.matric_MPa,
        "psi_total_MPa": psi_total,
        "margin_to_pwp_MPa": margin,
        "crop": crop_name,
        "relative_yield_pct": rel_yield,
        "leaching_requirement": lr,
        "soil_class": soil_class,
        "water_hazard": water_hazard,
        "sp_used_pct": sp_used_all,
        **b.context,
    }
    out["flags"] = checks.reading_flags(out)
    return out


def _psi_best(ec25_dS_m, temp_c):
    """Solute potential by the default route, Handbook 60 where it is out of range."""
    routes = osmotic.psi_s_all_routes(ec25_dS_m, temp_c)
    best = routes[osmotic.DEFAULT_ROUTE]
    return np.where(np.isnan(best), routes["handbook60"], best)


# --------------------------------------------------------------------------
# Single readings: validation of typed input and a JSON-ready result.

def parse_number(text, field: str, what: str = "a number") -> float | None:
    """Parse a typed number; '' or None is None. A decimal comma is accepted
    only when it is the only separator ("1,5" -> 1.5); "1,500" is refused as
    ambiguous rather than guessed."""
    if text is None:
        return None
    if isinstance(text, bool):
        raise InputError(f"Type {what} for {field}.", field)
    if isinstance(text, (int, float)):
        x = float(text)
    else:
        s = str(text).strip().replace("\u2212", "-")
        if s == "":
            return None
        if "," in s:
            if "." in s or s.count(",") > 1 or len(s.split(",")[1]) == 3:
                raise InputError(
                    f"{s!r} is ambiguous: use a point as the decimal separator "
                    f"and no thousands separator (e.g. 1500 or 1.5).", field)
            s = s.replace(",", ".")
        if not all(c in "0123456789.+-eE" for c in s):
            raise InputError(f"{s!r} is not a number; type {what} in digits, e.g. 1.25.", field)
        try:
            x = float(s)
        except ValueError:
            raise InputError(f"{s!r} is not a number; type {what} in digits, e.g. 1.25.",
                             field) from None
    if not math.isfinite(x):
        raise InputError(f"Type a finite number for {field}.", field)
    return x


def parse_bool(x) -> bool:
    if isinstance(x, bool):
        return x
    if x is None:
        return False
    s = str(x).strip().lower()
    if s in ("1", "true", "yes", "y", "on", "atc"):
        return True
    if s in ("", "0", "false", "no", "n", "off"):
        return False
    raise InputError(f"{x!r} is not yes or no.", "compensated")


def validate_reading(d: dict) -> dict:
    """Check typed fields of one reading; return clean keyword arguments for
    :func:`make_batch`. Raises InputError naming the field."""
    value = parse_number(d.get("value"), "value", "a reading")
    if value is None:
        raise InputError("Type the number the meter shows.", "value")
    if value < 0:
        raise InputError("EC cannot be negative; type the number the meter shows.", "value")
    if value > 1e7:
        raise InputError("That number is too large for any EC meter; check the digits.", "value")
    unit = (d.get("unit") or "").strip()
    if not unit:
        raise InputError("Choose the unit the meter displays, e.g. µS/cm or mS/cm.", "unit")
    units.parse_unit(unit)
    sample = (d.get("sample") or "paste").strip().lower()
    if sample not in extracts.SAMPLE_KINDS:
        raise InputError("Unknown sample kind; use one of: "
                         + ", ".join(extracts.SAMPLE_KINDS), "sample")
    ratio = d.get("ratio")
    ratio_n = None
    if ratio not in (None, ""):
        ratio_n = extracts.parse_ratio(ratio)
    temp_c = parse_number(d.get("temp_c"), "temp_c", "a temperature")
    if temp_c is not None:
        temperature.check_temp_c(temp_c)
    sp = parse_number(d.get("sp"), "sp", "a saturation percentage")
    if sp is not None and not (5 <= sp <= 400):
        raise InputError("Saturation percentage must be between 5 and 400 %.", "sp")
    texture = (d.get("texture") or "").strip() or None
    if texture:
        extracts.sp_for_texture(texture)
    tds_factor = parse_number(d.get("tds_factor"), "tds_factor", "a factor")
    theta = parse_number(d.get("theta_g_pct"), "theta_g_pct", "a water content")
    if theta is not None and not (1 <= theta <= 400):
        raise InputError("Gravimetric water content must be between 1 and 400 %.", "theta_g_pct")
    matric = parse_number(d.get("matric_MPa"), "matric_MPa", "a matric potential")
    if matric is not None:
        if matric > 0:
            matric = -matric  # a tensiometer shows suction; the potential is negative
        if matric < -10:
            raise InputError("Matric potential must be between 0 and −10 MPa.", "matric_MPa")
    crop = (d.get("crop") or "").strip() or None
    if crop:
        crop = tolerance.find_crop(crop).name
    method = (d.get("ece_method") or "").strip() or None
    salt_type = parse_salt_type(d.get("salt_type"))
    return dict(value=value, unit=unit, sample=sample, ratio_n=ratio_n, temp_c=temp_c,
                compensated=parse_bool(d.get("compensated")), sp_pct=sp, texture=texture,
                tds_factor=tds_factor, theta_g_pct=theta, matric_MPa=matric,
                ece_method=method, crop=crop, salt_type=salt_type)


#: Accepted spellings of the one salt type with its own route.
SALT_TYPES = {"sea_salt": "sea_salt", "sea salt": "sea_salt", "seawater": "sea_salt",
              "sea": "sea_salt", "sea_water": "sea_salt"}


def parse_salt_type(x) -> str | None:
    """None (mixed salts or unknown: the NaCl and Handbook 60 routes) or
    "sea_salt" (coastal wells, seawater intrusion: the PSS-78 seawater route
    is added beside the NaCl route)."""
    if x is None or (isinstance(x, str) and x.strip().lower() in ("", "mixed", "nacl", "none")):
        return None
    if isinstance(x, str) and x.strip().lower() in SALT_TYPES:
        return SALT_TYPES[x.strip().lower()]
    raise InputError("Salt type must be empty (mixed salts) or sea_salt (water like "
                     "diluted seawater: coastal wells, seawater intrusion).", "salt_type")


def round_sig(x, digits: int = 6):
    """Round to significant digits for JSON; None for None, NaN and infinity."""
    if x is None:
        return None
    x = float(x)
    if math.isnan(x) or math.isinf(x):
        return None
    return float(f"{x:.{digits}g}")


_num = round_sig


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


def meter_context(kw: dict, range_min=None, range_max=None, resolution=None,
                  units_shown=None, temp_min_c=None, temp_max_c=None) -> dict:
    """Context columns for a meter given in the reading's own unit (what a
    scout reads off the meter's label): range and resolution -> dS/m."""
    ctx = {}
    factor = units.to_ec_dS_m(1.0, kw["unit"], tds_factor=kw.get("tds_factor")).item()
    for key, v in (("meter_min_dS_m", range_min), ("meter_max_dS_m", range_max),
                   ("meter_resolution_dS_m", resolution)):
        if v is not None:
            ctx[key] = float(v) * factor
    if units_shown:
        ctx["meter_units"] = tuple(units_shown)
    if temp_min_c is not None:
        ctx["meter_temp_min_c"] = float(temp_min_c)
    if temp_max_c is not None:
        ctx["meter_temp_max_c"] = float(temp_max_c)
    return ctx


def parse_meter_range(text) -> tuple[float, float]:
    """'MIN:MAX' in the reading's unit, e.g. '0:1999'."""
    parts = str(text).replace(" ", "").split(":")
    if len(parts) != 2:
        raise InputError("Give the meter range as MIN:MAX in the reading's unit, e.g. 0:1999.",
                         "meter_range")
    lo = parse_number(parts[0], "meter_range", "a range minimum")
    hi = parse_number(parts[1], "meter_range", "a range maximum")
    if lo is None or hi is None or lo < 0 or hi <= lo:
        raise InputError("The meter range needs 0 <= MIN < MAX, e.g. 0:1999.", "meter_range")
    return lo, hi


def convert_reading(d: dict, context: dict | None = None) -> dict:
    """Validate and convert one reading; the JSON shape of `convert --json`,
    `POST /api/preview` and the stored row. ``context`` holds the optional
    context columns (meter, calibration, history, replicates) or a callable
    taking the validated fields and returning them."""
    kw = validate_reading(d)
    if callable(context):
        context = context(kw)
    out = convert_batch(make_batch(**kw, context=context))
    return result_for_row(out, 0, kw)


class RowInputError(InputError):
    """An InputError of one reading in a list; ``index`` says which."""

    def __init__(self, message, field, index):
        super().__init__(message, field)
        self.index = index


def convert_readings(ds: list[dict]) -> list[dict]:
    """Validate and convert many readings in one vectorized pass; the same
    result dicts as :func:`convert_reading` (no context columns). Raises
    RowInputError naming the index of the first reading that cannot be one."""
    kws = []
    for i, d in enumerate(ds):
        try:
            kws.append(validate_reading(d))
        except InputError as e:
            raise RowInputError(e.message, e.field, i) from None
    if not kws:
        return []
    cols = {k: [kw[k] for kw in kws] for k in kws[0]}
    floats = ("ratio_n", "temp_c", "sp_pct", "tds_factor", "theta_g_pct", "matric_MPa")
    for k in floats:
        cols[k] = np.array([np.nan if v is None else v for v in cols[k]], dtype=float)
    for k in ("unit", "sample", "texture", "ece_method", "crop", "salt_type"):
        arr = np.empty(len(kws), dtype=object)
        arr[:] = cols[k]
        cols[k] = arr
    out = convert_batch(make_batch(**cols))
    return [result_for_row(out, i, kw) for i, kw in enumerate(kws)]


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
            "estimate_mg_L": _num(row["tds_mg_L"], 4),
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
        "ec_dS_m": _num(row["ec_dS_m"]),
        "ec25_dS_m": _num(row["ec25_dS_m"]),
        "ec25_uS_cm": _num(row["ec25_dS_m"] * 1000.0),
        "compensation_factor": _num(row["compensation_factor"], 4),
        "temp_method": row["temp_method"],
        "ece_dS_m": _num(row["ece_dS_m"]),
        "ece_method": row["ece_method"],
        "ece_uncertainty_pct": _num(row["ece_uncertainty_pct"], 3),
        "ece_uncertainty_basis": row["ece_uncertainty_basis"],
        "ece_note": row["ece_note"],
        "ece_out_of_range": bool(row["ece_out_of_range"]),
        "psi_s_MPa": _num(row["psi_s_MPa"], 4),
        "psi_s_method": row["psi_s_method"],
        "psi_s_by_method": {k: _num(row[f"psi_s_{k}_MPa"], 4)
                            for k in (*osmotic.PSI_S_ROUTES, osmotic.SEAWATER_ROUTE)},
        "salinity_pss78": _num(row["salinity_pss78"], 4),
        "tds_mg_L": _num(row["tds_mg_L"], 4),
        "tds": tds_block(kw, row),
        "cations_meq_L": _num(row["cations_meq_L"], 4),
        "soil_solution": None,
        "soil_class": row["soil_class"],
        "water_hazard": row["water_hazard"],
        "flags": [f.as_dict() for f in row["flags"]],
        "cautions": list(CAUTIONS),
    }
    if kw["sample"] in ("paste", "extract"):
        result["soil_solution"] = {
            "ec_fc_dS_m": _num(row["ec_fc_dS_m"]),
            "psi_s_fc_MPa": _num(row["psi_s_fc_MPa"], 4),
            "ec_sw_dS_m": _num(row["ec_sw_dS_m"]),
            "psi_s_sw_MPa": _num(row["psi_s_sw_MPa"], 4),
            "matric_MPa": _num(row["matric_MPa"], 4),
            "psi_total_MPa": _num(row["psi_total_MPa"], 4),
            "margin_to_pwp_MPa": _num(row["margin_to_pwp_MPa"], 4),
            "field_capacity_MPa": osmotic.FIELD_CAPACITY_MPa,
            "wilting_point_MPa": osmotic.PERMANENT_WILTING_POINT_MPa,
        }
    if crop:
        result["crop"] = crop_summary(tolerance.find_crop(crop))
        if kw["sample"] in ("paste", "extract"):
            result["relative_yield_pct"] = _num(row["relative_yield_pct"], 4)
        if kw["sample"] == "water":
            lr = float(row["leaching_requirement"])
            result["leaching_requirement"] = None if math.isnan(lr) else (
                _num(lr, 4) if math.isfinite(lr) else None)
    return result
