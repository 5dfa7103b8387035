"""Meter profiles, their calibration checks, and the user's target ranges."""
from __future__ import annotations

import click

from ..science import InputError
from . import cli
from .common import check_days_option, data_option, open_log
from .output import emit, num, output_option, table

METER_COLUMNS = ["id", "name", "units", "ranges", "accuracy_pct", "atc", "atc_coeff_pct",
                 "tds_factor", "check_state", "check_label", "notes"]


@cli.group()
def meters():
    """Meter profiles (ranges, display step, accuracy, compensation) and checks."""


def _with_status(m: dict, max_age_days: float) -> dict:
    from .. import meters as meters_mod
    st = meters_mod.check_status(m.get("last_check"), max_age_days)
    return {**m, "check": st, "check_state": st.get("state"), "check_label": st.get("label")}


@meters.command("list")
@check_days_option
@data_option
@output_option
def meters_list(check_days, data, fmt):
    """Every meter profile with the state of its last calibration check."""
    from .. import store
    with open_log(data) as conn:
        ms = [_with_status(m, check_days) for m in store.list_meters(conn)]
    emit(ms, fmt, lambda rows: table(rows, [("name", "meter"), ("units", "units"),
                                            ("accuracy_pct", "± %"), ("atc", "ATC"),
                                            ("check_label", "last check")]), METER_COLUMNS)
    return 0


@meters.command("presets")
@output_option
def meters_presets(fmt):
    """Generic classes of meter to start a profile from (meters add --preset)."""
    from .. import meters as meters_mod
    ps = meters_mod.presets()
    emit(ps, fmt, lambda rows: table(rows, [("name", "preset"), ("label", "class of meter")]),
         ["name", "label", "units", "ranges", "accuracy_pct", "atc", "tds_factor", "source"])
    return 0


def _range(text: str) -> dict:
    parts = [p.strip() for p in text.split(":")]
    if len(parts) not in (3, 4):
        raise InputError(f"--range {text!r}: give MIN:MAX:STEP[:UNIT], e.g. 0:1999:1:µS/cm.",
                         "ranges")
    r = {"min": parts[0], "max": parts[1], "resolution": parts[2] or None}
    if len(parts) == 4:
        r["unit"] = parts[3]
    return r


@meters.command("add")
@click.argument("name")
@click.option("--preset", help="start from a class of meter (see 'meters presets')")
@click.option("--unit", "unit_list", multiple=True, help="a unit the meter displays (repeat)")
@click.option("--range", "ranges", multiple=True, metavar="MIN:MAX:STEP[:UNIT]",
              help="a display range, e.g. 0:1999:1:µS/cm (repeat for each range)")
@click.option("--accuracy", help="stated accuracy, % of reading")
@click.option("--atc", is_flag=True, default=None, help="the meter compensates to 25 °C")
@click.option("--atc-coeff", help="its compensation coefficient, %/°C")
@click.option("--tds-factor", help="its EC-to-TDS factor")
@click.option("--notes", help="notes")
@data_option
@output_option
def meters_add(name, preset, unit_list, ranges, accuracy, atc, atc_coeff, tds_factor, notes,
               data, fmt):
    """Add a meter profile."""
    from .. import meters as meters_mod
    from .. import store
    given = {"name": name, "preset": preset, "units": list(unit_list) or None,
             "ranges": [_range(r) for r in ranges] or None, "accuracy_pct": accuracy,
             "atc": atc, "atc_coeff_pct": atc_coeff, "tds_factor": tds_factor, "notes": notes}
    body = {k: v for k, v in given.items() if v is not None}
    with open_log(data) as conn:
        m = store.insert_meter(conn, meters_mod.meter_from_body(body))
    emit(m, fmt, lambda m: click.echo(f"fieldapp: meter {m['name']!r} added."), METER_COLUMNS)
    return 0


def _meter_or_fail(conn, name):
    from .. import store
    m = store.get_meter(conn, name)
    if m is None:
        raise store.StoreError(f"No meter called {name!r}; 'fieldapp meters list' shows them.",
                               "meter", 404)
    return m


@meters.command("show")
@click.argument("name")
@check_days_option
@data_option
@output_option
def meters_show(name, check_days, data, fmt):
    """One meter profile and its calibration checks, newest first."""
    from .. import store
    with open_log(data) as conn:
        m = _meter_or_fail(conn, name)
        m["last_check"] = store.last_calibration(conn, m["id"])
        out = {**_with_status(m, check_days), "checks": store.list_calibrations(conn, m["id"])}

    def text(m):
        click.echo(f"{m['name']}: {', '.join(m['units'])}; "
                   + "; ".join(f"{num(r['min'])}-{num(r['max'])} {r['unit']}"
                               for r in m["ranges"]))
        click.echo(f"  last check: {m['check_label']}")
        if m["checks"]:
            table(m["checks"], [("checked_at", "checked"), ("standard", "standard"),
                                ("measured_uS_cm", "µS/cm"), ("expected_uS_cm", "expected"),
                                ("deviation_pct", "dev. %"), ("passed", "passed")])

    if fmt == "csv":
        emit(out["checks"], fmt, None)
    else:
        emit(out, fmt, text)
    return 0


@cli.command()
@click.argument("meter")
@click.argument("value")
@click.argument("unit")
@click.option("--temp", help="the standard's temperature, °C")
@click.option("--standard", default="kcl_0.01", show_default=True,
              help="kcl_0.01 (1413 µS/cm at 25 °C) or user")
@click.option("--standard-us-cm", help="your standard's value at 25 °C, µS/cm (--standard user)")
@click.option("--compensated/--not-compensated", default=None,
              help="the meter compensated to 25 °C (default: its profile's ATC)")
@click.option("--tolerance", help="allowed deviation, % (default 5)")
@click.option("--note", help="a note")
@data_option
@output_option
def calibrate(meter, value, unit, temp, standard, standard_us_cm, compensated, tolerance, note,
              data, fmt):
    """Check METER in a standard solution: what it shows (VALUE UNIT) against
    what the standard should read at its temperature. The check is kept."""
    from .. import meters as meters_mod
    given = {"meter": meter, "value": value, "unit": unit, "temp_c": temp,
             "standard": standard, "standard_uS_cm": standard_us_cm,
             "compensated": compensated, "tolerance_pct": tolerance, "note": note}
    body = {k: v for k, v in given.items() if v is not None}
    with open_log(data) as conn:
        c = meters_mod.record_check(conn, body)
    emit(c, fmt, lambda c: click.echo(
        f"fieldapp: {c['meter']} read {num(c['measured_uS_cm'])} µS/cm where "
        f"{num(c['expected_uS_cm'])} µS/cm was expected ({c['deviation_pct']:+.2f} %): "
        + ("passed." if c["passed"] else
           f"failed (over ±{c['tolerance_pct']:g} %); clean the cell and recalibrate.")))
    return 0


# --------------------------------------------------------------------------- targets

@cli.group()
def targets():
    """Your target ranges per crop and measure (settings, not readings)."""


TARGET_COLUMNS = ["id", "crop", "measure", "lo_dS_m", "hi_dS_m", "note", "updated_at"]


@targets.command("list")
@click.option("--crop", help="only this crop")
@data_option
@output_option
def targets_list(crop, data, fmt):
    """The target ranges kept."""
    from .. import store
    from ..science import tolerance
    with open_log(data) as conn:
        rows = store.list_targets(conn, tolerance.find_crop(crop).name if crop else None)
    emit(rows, fmt, lambda rs: table(rs, [("id", "id"), ("crop", "crop"), ("measure", "measure"),
                                          ("lo_dS_m", "from dS/m"), ("hi_dS_m", "to dS/m"),
                                          ("note", "note")]), TARGET_COLUMNS)
    return 0


@targets.command("set")
@click.argument("crop")
@click.argument("measure")
@click.option("--lo", help="lower limit, dS/m")
@click.option("--hi", help="upper limit, dS/m")
@click.option("--note", help="a note (where the target comes from)")
@data_option
@output_option
def targets_set(crop, measure, lo, hi, note, data, fmt):
    """Keep (or replace) the target range of CROP for MEASURE."""
    from .. import interpret, store
    t = interpret.validate_target({"crop": crop, "measure": measure, "lo_dS_m": lo,
                                   "hi_dS_m": hi, "note": note})
    with open_log(data) as conn:
        row, created = store.save_target(conn, t)
    emit(row, fmt, lambda r: click.echo(
        f"fieldapp: target for {r['crop']} {r['measure']} "
        f"{'kept' if created else 'replaced'}."), TARGET_COLUMNS)
    return 0


@targets.command("delete")
@click.argument("target_id", type=int)
@data_option
def targets_delete(target_id, data):
    """Remove a target range (its id from 'targets list')."""
    from .. import store
    with open_log(data) as conn:
        if not store.delete_target(conn, target_id):
            raise store.StoreError(f"No target {target_id}.", "target", 404)
    click.echo(f"fieldapp: target {target_id} removed.")
    return 0
