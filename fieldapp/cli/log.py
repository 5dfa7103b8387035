"""Sites and readings, as the page keeps them: list, show and change site
settings; list readings; void, correct and acknowledge a flag."""
from __future__ import annotations

import datetime as dt

import click

from ..science import InputError
from . import cli
from .common import check_days_option, data_option, open_log, site_or_fail
from .output import emit, num, output_option, table


# --------------------------------------------------------------------------- sites

@cli.group()
def sites():
    """The sites of the log and their settings."""


SITE_COLUMNS = ["id", "name", "kind", "crop", "texture", "sp_pct", "latitude", "longitude",
                "n_readings", "last_taken_at", "last_sample", "last_ec25_dS_m",
                "last_ece_dS_m", "notes"]


@sites.command("list")
@data_option
@output_option
def sites_list(data, fmt):
    """Every site with its reading count and latest reading."""
    from .. import sites as sitecfg
    from .. import store
    with open_log(data) as conn:
        rows = [sitecfg.site_dict(r) for r in store.list_sites(conn)]
    emit(rows, fmt, lambda rs: table(rs, [
        ("name", "site"), ("kind_label", "kind"), ("crop", "crop"),
        ("n_readings", "readings"), ("last_taken_at", "latest"),
        ("last_ec25_dS_m", "EC25 dS/m"), ("last_ece_dS_m", "ECe dS/m")]), SITE_COLUMNS)
    return 0


def _site_state(conn, site) -> dict:
    """The site, where it stands (the page's summary) and its settings history."""
    from .. import interpret, store
    from .. import sites as sitecfg
    site = dict(site)
    readings = store.view_readings(conn, site["id"])
    crop = interpret.site_crop(site)
    targets = store.list_targets(conn, crop.name) if crop else []
    site.setdefault("n_readings", len(readings))
    return {"site": sitecfg.site_dict(site),
            "summary": interpret.site_summary(site, readings, targets),
            "history": sitecfg.history_changes(store.site_history(conn, site["id"]))}


def _print_site(state: dict) -> None:
    from .. import interpret
    s = state["site"]
    click.echo(f"{s['name']}  ({s['kind_label']})")
    for key, label in (("crop", "crop"), ("texture", "texture"), ("sp_pct", "SP %"),
                       ("latitude", "latitude"), ("longitude", "longitude"),
                       ("notes", "notes")):
        if s.get(key) not in (None, ""):
            v = s[key]
            shown = num(v) if isinstance(v, float) and key == "sp_pct" else v
            click.echo(f"  {label:<10} {shown}")
    click.echo(f"  readings   {s.get('n_readings', 0)}")
    lines = interpret.headline(state["summary"])
    if lines:
        click.echo("Where it stands:")
        for line in lines:
            click.echo(f"  {line}")
    if state["history"]:
        click.echo("Settings history:")
        for h in state["history"]:
            click.echo(f"  {h['when']}  {h['action']}: {h['text']}")
    for c in state["summary"].get("cautions", ()):
        click.echo(f"Caution: {c}")


@sites.command("show")
@click.argument("name")
@data_option
@output_option
def sites_show(name, data, fmt):
    """One site: settings, where it stands (latest ECe, class, yield, water,
    targets) and the history of its settings."""
    with open_log(data) as conn:
        state = _site_state(conn, site_or_fail(conn, name))
    if fmt == "csv":
        emit(state["site"], fmt, None, SITE_COLUMNS)
    else:
        emit(state, fmt, _print_site)
    return 0


def _settings_options(f):
    for opt in reversed([
        click.option("--kind", help="field, orchard, greenhouse, water_source or drain"),
        click.option("--crop", help="the crop grown ('' clears it)"),
        click.option("--texture", help="soil texture class ('' clears it)"),
        click.option("--sp", help="saturation percentage, % ('' clears it)"),
        click.option("--lat", help="latitude, decimal degrees (south negative)"),
        click.option("--lon", help="longitude, decimal degrees (west negative)"),
        click.option("--notes", help="notes about the site"),
    ]):
        f = opt(f)
    return f


def _settings_body(kind, crop, texture, sp, lat, lon, notes) -> dict:
    given = {"kind": kind, "crop": crop, "texture": texture, "sp_pct": sp, "latitude": lat,
             "longitude": lon, "notes": notes}
    return {k: v for k, v in given.items() if v is not None}


@sites.command("add")
@click.argument("name")
@_settings_options
@data_option
@output_option
def sites_add(name, kind, crop, texture, sp, lat, lon, notes, data, fmt):
    """Set up a new site with its settings."""
    from .. import sites as sitecfg
    body = {"name": name, "kind": kind or "field",
            **_settings_body(None, crop, texture, sp, lat, lon, notes)}
    with open_log(data) as conn:
        row = sitecfg.create_site(conn, body)
    emit(row, fmt, lambda r: click.echo(f"fieldapp: site {r['name']!r} set up "
                                        f"({r['kind_label']})."), SITE_COLUMNS)
    return 0


@sites.command("set")
@click.argument("name")
@click.option("--name", "new_name", help="a new name (readings queued under the old name "
              "still find the site)")
@_settings_options
@data_option
@output_option
def sites_set(name, new_name, kind, crop, texture, sp, lat, lon, notes, data, fmt):
    """Change some settings of a site; the change is kept in its history.
    Later readings use the new SP, texture and crop; stored readings keep their
    numbers."""
    from .. import sites as sitecfg
    from .. import store
    body = _settings_body(kind, crop, texture, sp, lat, lon, notes)
    if new_name is not None:
        body["name"] = new_name
    if not body:
        raise InputError("Say what to change, e.g. --crop tomato (see --help).", "body")
    with open_log(data) as conn:
        site = site_or_fail(conn, name)
        row, change_no = store.change_site_settings(conn, site["id"],
                                                    sitecfg.validate_settings(body))
        out = {**sitecfg.site_dict(row), "change_no": change_no}
    emit(out, fmt, lambda r: click.echo(
        f"fieldapp: {r['name']!r} " + ("unchanged (the same settings)."
                                       if r["change_no"] is None else "changed.")),
        SITE_COLUMNS + ["change_no"])
    return 0


# --------------------------------------------------------------------------- readings

@cli.group()
def readings():
    """The readings of the log (every version: current, corrected, void)."""


READING_COLUMNS = ["uuid", "site", "taken_at", "sample", "depth_cm", "value", "unit",
                   "temp_c", "compensated", "ratio", "salt_type", "ec25_dS_m", "ece_dS_m", "ece_method",
                   "psi_s_MPa", "psi_s_method", "status", "void_reason", "supersedes_uuid",
                   "meter", "visited_by", "flags", "note"]


def _date(text, field):
    if text is None:
        return None
    try:
        return dt.date.fromisoformat(text.strip()).isoformat()
    except ValueError:
        raise InputError(f"--{field} must be a date like 2026-05-14.", field) from None


def _kind(text):
    from ..science import extracts
    if text is None:
        return None
    if text not in extracts.SAMPLE_KINDS:
        raise InputError("--kind is one of: " + ", ".join(extracts.SAMPLE_KINDS) + ".", "kind")
    return text


@readings.command("list")
@click.option("--site", help="only this site")
@click.option("--from", "date_from", metavar="DATE", help="taken on or after this day")
@click.option("--to", "date_to", metavar="DATE", help="taken on or before this day")
@click.option("--kind", help="only this sample kind (paste, extract, water, feed, ...)")
@data_option
@output_option
def readings_list(site, date_from, date_to, kind, data, fmt):
    """Readings, newest first, with the same filters as the site log."""
    from .. import store
    date_from, date_to, kind = _date(date_from, "from"), _date(date_to, "to"), _kind(kind)
    with open_log(data) as conn:
        site_id = site_or_fail(conn, site)["id"] if site else None
        rows = [store.reading_dict(r) for r in store.iter_readings(
            conn, site_id=site_id, sample=kind, date_from=date_from, date_to=date_to,
            newest_first=True)]
    emit(rows, fmt, lambda rs: table(rs, [
        ("uuid", "uuid"), ("site", "site"), ("taken_at", "taken"), ("sample", "kind"),
        ("depth_cm", "cm"), ("value", "value"), ("unit", "unit"), ("ec25_dS_m", "EC25"),
        ("ece_dS_m", "ECe"), ("salt_type", "water"), ("status", "status"),
        ("flags", "flags")]), READING_COLUMNS)
    return 0


def _reading_or_fail(conn, uuid):
    from .. import store
    row = store.get_reading(conn, uuid)
    if row is None:
        raise store.StoreError(f"No reading {uuid!r}; 'fieldapp readings list' shows them.",
                               "uuid", 404)
    return row


def _print_reading(r: dict) -> None:
    from .convert import format_result
    click.echo(f"{r['uuid']}  {r['site']}  {r['taken_at']}  ({r['status']}"
               + (f": {r['void_reason']}" if r.get("void_reason") else "")
               + (f"; replaces {r['supersedes_uuid']}" if r.get("supersedes_uuid") else "")
               + (f"; corrected by {r['corrected_by_uuid']}" if r.get("corrected_by_uuid")
                  else "") + ")")
    click.echo(format_result(r["result"]))


@readings.command("show")
@click.argument("uuid")
@data_option
@output_option
def readings_show(uuid, data, fmt):
    """One reading with everything computed for it."""
    from .. import store
    with open_log(data) as conn:
        r = store.reading_dict(_reading_or_fail(conn, uuid))
    emit(r, fmt, _print_reading, READING_COLUMNS)
    return 0


@cli.command()
@click.argument("uuid")
@click.option("--reason", required=True, help="why the reading is void, e.g. 'probe not rinsed'")
@data_option
@output_option
def void(uuid, reason, data, fmt):
    """Void a reading: it stays in the log, marked void with the reason."""
    from .. import store
    with open_log(data) as conn:
        r = store.reading_dict(store.void_reading(conn, uuid, reason))
    emit(r, fmt, lambda r: click.echo(f"fieldapp: {r['uuid']} is void ({r['void_reason']})."),
         READING_COLUMNS)
    return 0


@cli.command()
@click.argument("uuid")
@click.option("--value", help="the number the meter showed")
@click.option("--unit", help="the unit the meter showed")
@click.option("--sample", help="sample kind")
@click.option("--ratio", help="soil:water ratio of an extract, e.g. 1:5")
@click.option("--temp", help="sample temperature in °C")
@click.option("--compensated/--not-compensated", default=None,
              help="whether the meter compensated to 25 °C")
@click.option("--depth", help="depth in cm (the bottom of the layer)")
@click.option("--texture", help="texture class")
@click.option("--sp", help="saturation percentage, %")
@click.option("--tds-factor", help="the meter's EC-to-TDS factor")
@click.option("--meter", help="the meter profile used")
@click.option("--taken-at", help="when it was taken (ISO 8601); default: unchanged")
@click.option("--note", help="a note")
@click.option("--confirm", "confirmed", multiple=True, metavar="CODE",
              help="an error-level flag seen and accepted (repeat for several)")
@check_days_option
@data_option
@output_option
def correct(uuid, value, unit, sample, ratio, temp, compensated, depth, texture, sp,
            tds_factor, meter, taken_at, note, confirmed, check_days, data, fmt):
    """Correct a reading: a new version that replaces it (same site, same time
    unless --taken-at), with only the given values changed."""
    from .. import records, store
    given = {"value": value, "unit": unit, "sample": sample, "ratio": ratio, "temp_c": temp,
             "compensated": compensated, "depth_cm": depth, "texture": texture, "sp": sp,
             "tds_factor": tds_factor, "meter": meter, "taken_at": taken_at, "note": note}
    changes = {k: v for k, v in given.items() if v is not None}
    if confirmed:
        changes["confirmed_flags"] = list(confirmed)
    if not changes:
        raise InputError("Say what to correct, e.g. --value 1.32 (see --help).", "body")
    with open_log(data) as conn:
        row, created = records.correct_reading(conn, uuid, changes, check_days)
        r = store.reading_dict(row)
    emit(r, fmt, lambda r: (click.echo(f"fieldapp: {r['uuid']} replaces {uuid}."),
                            _print_reading(r)), READING_COLUMNS)
    return 0


@cli.command()
@click.argument("uuid")
@click.argument("code")
@click.option("--note", required=True, help="why the flag is acceptable for this reading")
@data_option
@output_option
def ack(uuid, code, note, data, fmt):
    """Acknowledge a flag of a reading with a note: the flag stays, the note
    says why it is fine."""
    from .. import records
    with open_log(data) as conn:
        acks = records.ack_flag(conn, uuid, code, note)
    emit(acks, fmt, lambda a: click.echo(f"fieldapp: {code} acknowledged on {uuid}."),
         ["code", "note", "acked_at"])
    return 0
