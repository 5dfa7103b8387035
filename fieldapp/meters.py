"""Meter profiles, calibration checks, and the context a reading is checked in.

A meter profile says what a meter can show (units, ranges, resolution,
compensation); a calibration check compares it with a standard solution.
Together with the site's history and the sample's replicates they become the
context columns of science.convert (see CONTEXT_FLOAT / CONTEXT_OBJECT) so the
plausibility rules can speak about the meter and the site.
"""
from __future__ import annotations

import datetime as dt
import math

from .data import load_table
from .science import InputError, units
from .fmt import number
from .forms import parse_number
from .lazy import Later

temperature = Later("fieldapp.science.temperature")   # its tables are numpy arrays
store = Later("fieldapp.store")         # the command line reads the defaults below without it
statistics = Later("statistics")

#: Default tolerance of a calibration check, % of the expected value. Common
#: practice: pocket meters state about ±2 %; a check off by more than 5 % means
#: clean and recalibrate.
DEFAULT_TOLERANCE_PCT = 5.0
#: Days after which a meter's last check is called stale. Common practice:
#: check at the start of every field day; weekly at the least.
DEFAULT_MAX_AGE_DAYS = 7.0
#: Linear temperature coefficient assumed for a user-defined standard whose
#: table is unknown (common practice, 2 %/°C).
USER_STANDARD_ALPHA = 0.02
STANDARDS = {
    "kcl_0.01": "0.01 mol/L KCl, 1413 µS/cm at 25 °C",
    "user": "your own standard (nominal µS/cm at 25 °C)",
}


def presets() -> list[dict]:
    """Generic meter profiles described by specification only (no brands)."""
    out = []
    for r in load_table("meter_presets"):
        ranges = []
        for part in r["ranges"].split("|"):
            lo, hi, res, unit = part.split(":")
            ranges.append({"min": float(lo), "max": float(hi), "resolution": float(res),
                           "unit": unit})
        out.append({
            "name": r["name"], "units": r["units"].split(";"), "ranges": ranges,
            "accuracy_pct": float(r["accuracy_pct"]) if r["accuracy_pct"] else None,
            "atc": r["atc"] == "1",
            "atc_coeff_pct": float(r["atc_coeff_pct"]) if r["atc_coeff_pct"] else None,
            "atc_min_c": float(r["atc_min_c"]) if r["atc_min_c"] else None,
            "atc_max_c": float(r["atc_max_c"]) if r["atc_max_c"] else None,
            "tds_factor": float(r["tds_factor"]) if r["tds_factor"] else None,
            "source": r["source"],
        })
        out[-1]["class"] = meter_class(out[-1])
        out[-1]["label"] = out[-1]["class"]["label"]
    return out


def display_digits(max_value: float, resolution: float | None) -> str | None:
    """The display a range needs, from its top and its step: 1999 counts is a
    3½-digit display, 2000 to 9999 counts 4 digits, 999 counts 3 digits
    (the usual naming of digital displays: a leading "½" digit shows 0 or 1)."""
    if not resolution or resolution <= 0 or not max_value or max_value <= 0:
        return None
    counts = round(max_value / resolution)
    digits = len(str(counts))
    if str(counts).startswith("1") and counts >= 10:
        return f"{digits - 1}½"
    return str(digits)


def meter_class(p: dict) -> dict:
    """A preset described as a class of meter rather than one product: what
    it displays (EC or TDS), its display digits, how many decades its ranges
    cover, its stated accuracy and its temperature compensation."""
    ranges = sorted(p.get("ranges") or [], key=lambda r: float(
        units.to_ec_dS_m(r["max"], r["unit"], tds_factor=p.get("tds_factor") or 0.5)))
    if not ranges:
        return {"label": p.get("name") or "meter", "parts": []}
    tds = all(units.parse_unit(r["unit"]).kind != "ec" for r in ranges)
    digits = display_digits(ranges[-1]["max"], ranges[-1]["resolution"])
    lo_top = float(units.to_ec_dS_m(ranges[0]["max"], ranges[0]["unit"],
                                    tds_factor=p.get("tds_factor") or 0.5))
    hi_top = float(units.to_ec_dS_m(ranges[-1]["max"], ranges[-1]["unit"],
                                    tds_factor=p.get("tds_factor") or 0.5))
    decades = int(round(math.log10(hi_top / lo_top))) + 1 if lo_top > 0 else 1
    kind = ("autoranging " if len(ranges) > 1 else "") + ("TDS" if tds else "EC")
    parts = [f"{digits}-digit display" if digits else None,
             f"{decades} decade{'s' if decades > 1 else ''}"
             + (f" in {len(ranges)} ranges" if len(ranges) > 1 else ""),
             f"±{p['accuracy_pct']:g} % of reading" if p.get("accuracy_pct") else None,
             (f"ATC {p['atc_min_c']:g}–{p['atc_max_c']:g} °C"
              if p.get("atc") and p.get("atc_min_c") is not None and p.get("atc_max_c") is not None
              else "ATC" if p.get("atc") else "no ATC (note the sample's temperature)"),
             f"TDS factor {p['tds_factor']:g}" if p.get("tds_factor") else None]
    parts = [x for x in parts if x]
    span = "; ".join(f"{_num_text(r['min'])}–{_num_text(r['max'])} {r['unit']}"
                     f"{' in steps of ' + _num_text(r['resolution']) if r['resolution'] else ''}"
                     for r in ranges)
    label = (f"{kind} meter, {digits or '?'} digits, {decades} decade{'s' if decades > 1 else ''},"
             f" {'±' + format(p['accuracy_pct'], 'g') + ' %' if p.get('accuracy_pct') else 'accuracy not stated'},"
             f" {'ATC' if p.get('atc') else 'no ATC'}")
    return {"label": label, "kind": kind, "digits": digits, "decades": decades,
            "n_ranges": len(ranges), "parts": parts, "ranges_text": span,
            "note": "Typical figures of this class of meter (common practice), not any one "
                    "product's: check your meter's manual and change what differs."}


def _num_text(x) -> str:
    return number(x, 10)


def _num(body, key, what, required=False):
    v = parse_number(body.get(key), key, what)
    if v is None and required:
        raise InputError(f"Type {what}.", key)
    return v


def _meter_units(body: dict) -> list[str]:
    unit_list = body.get("units") or []
    if isinstance(unit_list, str):
        unit_list = [u for u in unit_list.replace(",", ";").split(";") if u.strip()]
    if not isinstance(unit_list, list) or len(unit_list) > 20 or \
            not all(isinstance(u, str) for u in unit_list):
        raise InputError("units is a list of the units the meter displays, e.g. "
                         '["dS/m", "µS/cm"].', "units")
    return [units.parse_unit(u).canonical for u in unit_list]


def _meter_range(k: int, r, default_unit: str) -> dict:
    if not isinstance(r, dict):
        raise InputError("Each range needs min, max, resolution and unit.", "ranges")
    lo = _num(r, "min", "the range minimum", True)
    hi = _num(r, "max", "the range maximum", True)
    res = _num(r, "resolution", "the display step")
    unit = r.get("unit") or default_unit
    if not isinstance(unit, str):
        raise InputError(f"Range {k + 1}: the unit must be text, e.g. dS/m.", "ranges")
    unit = units.parse_unit(unit).canonical
    if lo < 0 or hi <= lo:
        raise InputError(f"Range {k + 1}: the minimum must be below the maximum.", "ranges")
    if res is not None and not (0 < res < hi):
        raise InputError(f"Range {k + 1}: the display step must be above 0 and below "
                         "the maximum.", "ranges")
    return {"min": lo, "max": hi, "resolution": res, "unit": unit}


def _meter_compensation(body: dict) -> dict:
    atc = bool(body.get("atc"))
    coeff = _num(body, "atc_coeff_pct", "the compensation coefficient in %/°C")
    if coeff is not None and not 0.5 <= coeff <= 4:
        raise InputError("The compensation coefficient is usually 1.5 to 2.5 %/°C; give it "
                         "between 0.5 and 4.", "atc_coeff_pct")
    tmin = _num(body, "atc_min_c", "a temperature")
    tmax = _num(body, "atc_max_c", "a temperature")
    if tmin is not None and tmax is not None and tmax <= tmin:
        raise InputError("The compensation range needs min below max.", "atc_max_c")
    ref = _num(body, "ref_temp_c", "the reference temperature") or 25.0
    if ref not in (20.0, 25.0):
        raise InputError("The reference temperature is 20 or 25 °C.", "ref_temp_c")
    return {"atc": atc, "atc_coeff_pct": coeff, "ref_temp_c": ref, "atc_min_c": tmin,
            "atc_max_c": tmax}


def validate_meter(body: dict) -> dict:
    """A meter profile from a form or JSON body; raises InputError naming the field."""
    if not isinstance(body, dict):
        raise InputError("Send the meter as a JSON object.", "body")
    name = " ".join(str(body.get("name") or "").split())
    if not name:
        raise InputError("Give the meter a name, e.g. 'pocket tester 1'.", "name")
    if len(name) > 120:
        raise InputError("Meter names are at most 120 characters.", "name")
    canon = _meter_units(body)
    range_list = body.get("ranges") or []
    if not isinstance(range_list, list) or len(range_list) > 20:
        raise InputError("ranges is a list of at most 20 ranges, each with min, max, "
                         "resolution and unit.", "ranges")
    ranges = []
    for k, r in enumerate(range_list):
        ranges.append(_meter_range(k, r, canon[0] if canon else ""))
        if ranges[-1]["unit"] not in canon:
            canon.append(ranges[-1]["unit"])
    if not canon:
        raise InputError("Give at least one unit the meter displays.", "units")
    acc = _num(body, "accuracy_pct", "the stated accuracy in %")
    if acc is not None and not 0 < acc <= 50:
        raise InputError("Accuracy is a percentage between 0 and 50.", "accuracy_pct")
    return {"name": name, "units": canon, "ranges": ranges, "accuracy_pct": acc,
            **_meter_compensation(body),
            "tds_factor": _tds_factor(body), "notes": str(body.get("notes") or "")[:2000]}


def meter_from_body(body: dict) -> dict:
    """A validated meter profile from a body that may name a preset
    (``preset``: its name or label) instead of giving the ranges."""
    if isinstance(body, dict) and body.get("preset") and not body.get("ranges"):
        preset = next((p for p in presets() if body["preset"] in (p["name"], p["label"])),
                      None)
        if preset is None:
            raise InputError("Unknown preset; see GET /api/meters.", "preset")
        body = {**preset, **{k: v for k, v in body.items() if k != "preset"}}
    return validate_meter(body)


def record_check(conn, body: dict) -> dict:
    """Check a meter (``body["meter"]``, a profile's name) against a standard
    and keep the check; returns it with expected, deviation and passed."""
    from . import store
    name = body.get("meter") if isinstance(body, dict) else None
    meter = store.get_meter(conn, str(name)) if name else None
    if meter is None:
        raise InputError("Choose a meter profile (add it on the Meters page first).", "meter")
    stored = store.insert_calibration(conn, calibration_check(body, meter))
    return {**stored, "meter": meter["name"]}


def _tds_factor(body):
    f = _num(body, "tds_factor", "the meter's TDS factor")
    if f is not None:
        units.check_tds_factor(f)
    return f


def calibration_check(body: dict, meter: dict) -> dict:
    """Expected value of the standard at the measured temperature, deviation
    and pass/fail. For the 0.01 mol/L KCl standard the expected value comes
    from temperature.kcl_001_uS_cm (published table) when the meter does not
    compensate; a compensating meter should show 1413 µS/cm."""
    standard = str(body.get("standard") or "kcl_0.01")
    if standard not in STANDARDS:
        raise InputError("The standard is kcl_0.01 or user.", "standard")
    value = _num(body, "value", "the value the meter shows", True)
    if value < 0:
        raise InputError("The reading cannot be negative.", "value")
    unit = str(body.get("unit") or "").strip()
    if not unit:
        raise InputError("Choose the unit the meter displays.", "unit")
    pu = units.parse_unit(unit)
    if pu.kind != "ec":
        raise InputError("Check the meter in an EC unit (µS/cm or mS/cm), not TDS.", "unit")
    temp_c = _num(body, "temp_c", "the standard's temperature")
    if temp_c is not None:
        temperature.check_temp_c(temp_c)
    compensated = bool(body.get("compensated", meter.get("atc", False)))
    tol = _num(body, "tolerance_pct", "a tolerance in %") or DEFAULT_TOLERANCE_PCT
    if not 0.1 <= tol <= 50:
        raise InputError("The tolerance is a percentage between 0.1 and 50.", "tolerance_pct")
    nominal = None
    if standard == "kcl_0.01":
        nominal = float(temperature.kcl_001_uS_cm(25.0))
        if compensated or temp_c is None:
            expected = nominal
        else:
            expected = float(temperature.kcl_001_uS_cm(temp_c))
            if math.isnan(expected):
                raise InputError("The KCl table covers 0 to 50 °C; warm or cool the standard.",
                                 "temp_c")
    else:
        nominal = _num(body, "standard_uS_cm", "the standard's value at 25 °C in µS/cm", True)
        if nominal <= 0:
            raise InputError("The standard's value must be positive.", "standard_uS_cm")
        expected = nominal if (compensated or temp_c is None) else \
            nominal * (1 + USER_STANDARD_ALPHA * (temp_c - 25.0))
    measured = float(units.to_ec_dS_m(value, pu)) * 1000.0
    deviation = (measured - expected) / expected * 100.0
    return {"meter_id": meter["id"], "standard": standard, "standard_uS_cm": nominal,
            "value": value, "unit": unit, "temp_c": temp_c, "compensated": compensated,
            "expected_uS_cm": round(expected, 3), "measured_uS_cm": round(measured, 3),
            "deviation_pct": round(deviation, 2), "tolerance_pct": tol,
            "passed": abs(deviation) <= tol, "note": str(body.get("note") or "")[:2000]}


def check_status(check: dict | None, max_age_days: float = DEFAULT_MAX_AGE_DAYS,
                 at: dt.datetime | str | None = None) -> dict:
    """How a meter's last calibration check stands at a moment (now by
    default): 'passed', 'failed', 'due' (it passed, but longer ago than
    ``max_age_days``) or 'none' (no check on record). A failed check stays
    'failed' however old. Returns {state, label, age_days, max_age_days}."""
    if isinstance(at, str):
        at = _taken_utc(at)
    at = at or dt.datetime.now(dt.timezone.utc)
    limit = f"{max_age_days:g} day{'' if max_age_days == 1 else 's'}"
    if check is None:
        return {"state": "none", "label": "No calibration check on record: check it before use.",
                "age_days": None, "max_age_days": max_age_days}
    checked = dt.datetime.fromisoformat(str(check["checked_at"]).replace("Z", "+00:00"))
    if checked.tzinfo is None:
        checked = checked.replace(tzinfo=dt.timezone.utc)
    age = max(0.0, (at - checked).total_seconds() / 86400.0)
    dev = f"{check['deviation_pct']:+.1f} %".replace("-", "−")
    when = f"{checked.astimezone():%Y-%m-%d}"
    if not check["passed"]:
        state, label = "failed", (f"FAILED on {when} ({dev}): clean the probe, recalibrate "
                                  "and check again.")
    elif age > max_age_days:
        days = f"{age:.0f} day{'' if round(age) == 1 else 's'}"
        state, label = "due", (f"Check due: the last check ({when}, passed {dev}) was {days} "
                               f"ago; a check is good for {limit}.")
    else:
        state, label = "passed", f"Passed on {when} ({dev}), within the {limit} allowed."
    return {"state": state, "label": label, "age_days": round(age, 2),
            "max_age_days": max_age_days}


def _range_for(meter: dict, ec_dS_m: float, tds_factor):
    """(min, max, resolution) in dS/m of the range a reading falls in: the
    most sensitive range that holds it, else the top range (pegged)."""
    rs = []
    for r in meter["ranges"]:
        f = float(units.to_ec_dS_m(1.0, r["unit"], tds_factor=tds_factor))
        rs.append((r["min"] * f, r["max"] * f, (r["resolution"] or math.nan) * f))
    if not rs:
        return None
    rs.sort(key=lambda x: x[1])
    overall_min = min(r[0] for r in rs)
    for lo, hi, res in rs:
        if ec_dS_m < hi:
            return overall_min, rs[-1][1], res
    return overall_min, rs[-1][1], rs[-1][2]


def _taken_utc(taken_at, now=None) -> dt.datetime:
    if taken_at:
        try:
            t = dt.datetime.fromisoformat(str(taken_at).strip().replace("Z", "+00:00"))
            if t.tzinfo is None:
                t = t.astimezone()
            return t.astimezone(dt.timezone.utc)
        except ValueError:
            pass   # the record's own validation reports a bad time
    return now or dt.datetime.now(dt.timezone.utc)


def reading_context(conn, kw: dict, payload: dict, site, max_age_days: float,
                    now: dt.datetime | None = None) -> dict:
    """Context columns for one reading: meter, calibration, history, replicates."""
    ctx: dict = {}
    meter = None
    name = " ".join(str(payload.get("meter") or "").split())
    if name:
        meter = store.get_meter(conn, name)
    if meter is not None:
        ctx["meter_known"] = 1.0
        ctx["meter_units"] = tuple(meter["units"])
        tds_factor = kw.get("tds_factor") or meter.get("tds_factor")
        try:
            ec = float(units.to_ec_dS_m(kw["value"], kw["unit"], tds_factor=kw.get("tds_factor")))
            rng = _range_for(meter, ec, tds_factor)
        except InputError:
            rng = None   # a TDS range without a factor: no range check
        if rng:
            ctx["meter_min_dS_m"], ctx["meter_max_dS_m"], ctx["meter_resolution_dS_m"] = rng
        if meter.get("atc_min_c") is not None:
            ctx["meter_temp_min_c"] = meter["atc_min_c"]
        if meter.get("atc_max_c") is not None:
            ctx["meter_temp_max_c"] = meter["atc_max_c"]
        # the check that was valid when the reading was taken, and its age then
        taken = _taken_utc(payload.get("taken_at"), now)
        last = store.last_calibration(conn, meter["id"],
                                      before_utc=taken.isoformat(timespec="seconds"))
        ctx["cal_max_age_days"] = max_age_days
        if last is not None:
            ctx["cal_passed"] = 1.0 if last["passed"] else 0.0
            ctx["cal_deviation_pct"] = last["deviation_pct"]
            checked = dt.datetime.fromisoformat(last["checked_at"])
            ctx["cal_age_days"] = max(0.0, (taken - checked).total_seconds() / 86400.0)
    if site is not None:
        from .records import parse_depth   # the save validates it and says why
        try:
            depth = parse_depth(payload.get("depth_cm"))
        except InputError:
            depth = None
        hist = store.history_values(conn, site["id"], kw["sample"], depth,
                                    exclude_uuid=payload.get("uuid"))
        if hist:
            med = statistics.median(hist)
            ctx["history_median"] = med
            ctx["history_mad"] = statistics.median(abs(x - med) for x in hist)
            ctx["history_n"] = float(len(hist))
        group = " ".join(str(payload.get("replicate_group") or "").split())
        if group:
            day = str(payload.get("taken_at") or dt.date.today().isoformat())[:10]
            others = store.replicate_values(conn, site["id"], group, day, kw["sample"],
                                            exclude_uuid=payload.get("uuid"))
            ctx["replicate_others"] = tuple(others) if others else None
    return ctx
