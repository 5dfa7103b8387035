"""convert and convert-csv: one reading, or a CSV file of them, through the
same conversion the page's preview and the stored record use."""
from __future__ import annotations

import json
import sys

import click

from ..fmt import number
from ..science import InputError
from . import cli
from .output import output_option, write_csv


def _fmt(x, unit="", digits=3):
    return number(x, digits, unit=unit or None)


def _solute_lines(r: dict) -> list[str]:
    from ..labels import route_label
    if r["psi_s_MPa"] is None:
        return []
    others = "; ".join(f"{route_label(k)} {_fmt(v, 'MPa') if v is not None else 'not computed'}"
                       for k, v in r["psi_s_by_method"].items())
    lines = [f"Solute pot.    {_fmt(r['psi_s_MPa'], 'MPa')}  by {route_label(r['psi_s_method'])}",
             f"               all routes: {others}"]
    if r.get("salinity_pss78") is not None:
        lines.append(f"Salinity       {r['salinity_pss78']:.3g} (PSS-78 practical salinity; "
                     "sea-salt water)")
    return lines


def _soil_solution_lines(ss: dict | None) -> list[str]:
    if not ss:
        return []
    lines = [f"At field cap.  EC {_fmt(ss['ec_fc_dS_m'], 'dS/m')}, "
             f"solute potential {_fmt(ss['psi_s_fc_MPa'], 'MPa')}"]
    if ss["ec_sw_dS_m"] is not None:
        lines.append(f"At moisture    EC {_fmt(ss['ec_sw_dS_m'], 'dS/m')}, "
                     f"solute potential {_fmt(ss['psi_s_sw_MPa'], 'MPa')}")
    if ss["matric_MPa"] is not None:
        lines.append(f"Total water    {_fmt(ss['psi_total_MPa'], 'MPa')} "
                     f"(matric {_fmt(ss['matric_MPa'], 'MPa')}); "
                     f"{_fmt(ss['margin_to_pwp_MPa'], 'MPa')} above wilting point "
                     f"({ss['wilting_point_MPa']} MPa)")
    return lines


def _crop_lines(r: dict) -> list[str]:
    crop = r.get("crop")
    if not crop:
        return []
    at = crop["ece_at_yield_dS_m"]
    lines = [f"Crop           {crop['name']}: threshold {crop['threshold_dS_m']:g} dS/m; "
             f"ECe at 90/75/50 % yield {at['90']}/{at['75']}/{at['50']} dS/m"]
    if r.get("relative_yield_pct") is not None:
        lines.append(f"Rel. yield     {r['relative_yield_pct']:.0f} % (Maas-Hoffman)")
    if "leaching_requirement" in r:
        lr = r["leaching_requirement"]
        lines.append("Leaching req.  " + ("not reachable with this water" if lr is None
                                          else f"{lr:.2f} of the water applied"))
    return lines


def format_result(r: dict) -> str:
    """The readable form of a conversion result for a terminal."""
    from ..labels import flag_label, method_label, sample_label
    inp = r["input"]
    lines = [f"Reading        {inp['value']:g} {inp['unit']}  - {sample_label(inp['sample'])}"
             + (f", ratio {inp['ratio']}" if inp["ratio"] else "")]
    if r["unit_note"]:
        lines.append(f"               note: {r['unit_note']}")
    if inp.get("salt_type") == "sea_salt":
        lines.append("Water type     like diluted seawater (seawater route beside the NaCl one)")
    temp = ("meter compensated" if inp["compensated"]
            else f"sample at {inp['temp_c']:g} °C" if inp["temp_c"] is not None
            else "no temperature given")
    lines.append(f"EC at 25 °C    {_fmt(r['ec25_dS_m'], 'dS/m', 4)}"
                 f"  = {_fmt(r['ec25_uS_cm'], 'µS/cm', 4)}  ({temp})")
    if r["ece_dS_m"] is not None:
        unc = r["ece_uncertainty_pct"]
        lines.append(f"ECe            {_fmt(r['ece_dS_m'], 'dS/m')}  by {method_label(r['ece_method'])}"
                     + (f" (about ±{unc:g} %)" if unc else ""))
        if r.get("ece_note"):
            lines.append(f"               {r['ece_note']}")
    if r["soil_class"]:
        lines.append(f"Soil class     {r['soil_class'].replace('_', ' ')}")
    if r["water_hazard"]:
        lines.append(f"Water hazard   {r['water_hazard'].replace('_', ' ')} "
                     "(FAO 29 degree of restriction)")
    lines += _solute_lines(r) + _soil_solution_lines(r["soil_solution"])
    tds = r.get("tds") or {}
    if tds.get("meter"):
        lines.append(f"TDS, meter     {tds['meter']['label']}")
    lines.append(f"TDS, estimate  {_fmt(r['tds_mg_L'], 'mg/L')} (USDA Handbook 60, 640 x EC25; "
                 f"not a measurement); cations {_fmt(r['cations_meq_L'], 'meq/L')}")
    lines += _crop_lines(r)
    for f in r["flags"]:
        lines.append(f"[{f['severity']}] {flag_label(f['code'])} ({f['code']}): {f['message']} "
                     f"{f['action']}".rstrip())
    lines.append("")
    lines.extend(f"Caution: {c}" for c in r["cautions"])
    return "\n".join(lines)


#: The columns of ``convert --csv`` (those of convert-csv's output).
CSV_COLUMNS = ("value", "unit", "sample", "ratio", "temp_c", "compensated", "ec25_dS_m",
               "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method", "tds_mg_L",
               "relative_yield_pct", "leaching_requirement", "flags")


def _csv_row(r: dict) -> dict:
    inp = r["input"]
    row = {k: inp.get(k) for k in ("value", "unit", "sample", "ratio", "temp_c", "compensated")}
    row.update({k: r.get(k) for k in CSV_COLUMNS if k not in row})
    row["flags"] = [f["code"] for f in r["flags"]]
    return row


class _NumberFriendly(click.Command):
    """A reading's VALUE may be negative ("-1" is refused with a message about
    negative EC, not taken for an option); a mistyped --option still says so."""

    def parse_args(self, ctx, args):
        known = {o for p in self.params
                 for o in getattr(p, "opts", []) + getattr(p, "secondary_opts", [])}
        known.update(ctx.help_option_names)
        for a in args:
            if a == "--":
                break
            if a.startswith("--") and a.split("=", 1)[0] not in known:
                raise click.NoSuchOption(a.split("=", 1)[0], ctx=ctx)
        return super().parse_args(ctx, args)


@cli.command(cls=_NumberFriendly, context_settings={"ignore_unknown_options": True})
@click.argument("value")
@click.argument("unit")
@click.option("--sample", default="paste", show_default=True,
              help="paste, extract, water, feed, leachate, drain, sme, media")
@click.option("--ratio", help="soil:water ratio of an extract, e.g. 1:5")
@click.option("--temp", help="sample temperature in °C")
@click.option("--compensated", is_flag=True, help="the meter already compensated to 25 °C (ATC)")
@click.option("--sp", help="saturation percentage of the soil, %")
@click.option("--texture", help="texture class, used for SP when --sp is not given")
@click.option("--method", help="ECe method: a regression name (see DEVELOPERS.md)")
@click.option("--crop", help="crop name, for relative yield and leaching requirement")
@click.option("--salt-type", help="sea_salt for water like diluted seawater (coastal wells, "
              "seawater intrusion): adds the PSS-78 seawater route")
@click.option("--matric", help="matric potential in MPa (e.g. -0.05)")
@click.option("--water-content", help="gravimetric water content now, %")
@click.option("--tds-factor", help="the meter's EC-to-TDS factor (0.5, 0.64, 0.7)")
@click.option("--meter-range", help="the meter's range MIN:MAX in the reading's unit, e.g. 0:1999")
@click.option("--resolution", help="the meter's display step in the reading's unit, e.g. 1")
@output_option
def convert(value, unit, sample, ratio, temp, compensated, sp, texture, method, crop, salt_type,
            matric, water_content, tds_factor, meter_range, resolution, fmt):
    """Convert one reading (VALUE UNIT as the meter shows them) and print
    everything derived: EC at 25 °C, ECe, solute potential, crop, flags."""
    from ..forms import meter_context, parse_meter_range, parse_number
    from ..records import convert_reading
    lo = hi = res = None
    if meter_range:
        lo, hi = parse_meter_range(meter_range)
    if resolution is not None:
        res = parse_number(resolution, "resolution", "a resolution")
        if res is None or res <= 0:
            raise InputError("The resolution must be a positive number in the reading's unit.",
                             "resolution")
    result = convert_reading({
        "value": value, "unit": unit, "sample": sample, "ratio": ratio,
        "temp_c": temp, "compensated": compensated, "sp": sp, "texture": texture,
        "crop": crop, "matric_MPa": matric, "tds_factor": tds_factor,
        "theta_g_pct": water_content, "ece_method": method, "salt_type": salt_type,
    }, context=lambda kw: meter_context(kw, lo, hi, res))
    if fmt == "json":
        json.dump(result, sys.stdout, ensure_ascii=False, indent=2)
        sys.stdout.write("\n")
    elif fmt == "csv":
        write_csv([_csv_row(result)], list(CSV_COLUMNS))
    else:
        click.echo(format_result(result))
    return 0


@cli.command("convert-csv")
@click.argument("file")
@output_option
@click.option("--jobs", type=click.IntRange(1, 8), default=None,
              help="processes converting side by side on a long file (default: 2 on Linux "
                   "with a second core, else 1); the output is the same")
def convert_csv(file, fmt, jobs):
    """Convert a CSV file of readings (header: value,unit[,sample,ratio,temp_c,...];
    - for standard input) and write each row with its results: CSV, or with
    --json one JSON object per line."""
    from ..batch import convert_csv as batch_convert, parallel

    def run(src, dst, fmt):
        return batch_convert(src, dst, fmt=fmt, jobs=jobs or parallel.default_jobs())
    if file == "-":
        n = run(sys.stdin, sys.stdout, fmt=fmt or "csv")
    else:
        try:
            src = open(file, newline="", encoding="utf-8-sig")
        except OSError as e:
            raise InputError(f"cannot read {file}: {e.strerror}", "file") from None
        try:
            with src:
                n = run(src, sys.stdout, fmt=fmt or "csv")
        except UnicodeDecodeError:
            raise InputError(f"{file} is not UTF-8 text; save it as CSV (UTF-8).",
                             "file") from None
    click.echo(f"fieldapp: converted {n} readings", err=True)
    return 0
