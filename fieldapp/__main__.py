"""Command line: the same features as the web page, for the office and scripts.

    python -m fieldapp convert 1413 µS/cm --temp 18 --sample water --crop tomato
    python -m fieldapp convert-csv readings.csv > converted.csv
    python -m fieldapp serve [--host 127.0.0.1] [--port 8080] [--data DIR] [--demo]
    python -m fieldapp export [--site NAME] --data DIR > log.csv
    python -m fieldapp import FILE.csv --data DIR

Input that cannot be a reading exits with status 2 and one clear line on
stderr, never a traceback.
"""
from __future__ import annotations

import argparse
import json
import sys

from .science import InputError

EXIT_BAD_INPUT = 2


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, status 2, like every other bad input
        self.exit(EXIT_BAD_INPUT, f"fieldapp: {message}\n")


def _fmt(x, unit="", digits=3):
    if x is None:
        return "—"
    s = f"{x:.{digits}g}"
    if "e" in s:
        s = f"{x:.0f}" if abs(x) >= 1 else f"{x:.{digits + 3}f}".rstrip("0")
    return f"{s} {unit}".rstrip()


def format_result(r: dict) -> str:
    """The readable form of a conversion result for a terminal."""
    inp = r["input"]
    lines = [f"Reading        {inp['value']:g} {inp['unit']}  ({inp['sample']}"
             + (f", ratio {inp['ratio']}" if inp["ratio"] else "") + ")"]
    if r["unit_note"]:
        lines.append(f"               note: {r['unit_note']}")
    temp = ("meter compensated" if inp["compensated"]
            else f"sample at {inp['temp_c']:g} °C" if inp["temp_c"] is not None
            else "no temperature given")
    lines.append(f"EC at 25 °C    {_fmt(r['ec25_dS_m'], 'dS/m', 4)}"
                 f"  = {_fmt(r['ec25_uS_cm'], 'µS/cm', 4)}  ({temp})")
    if r["ece_dS_m"] is not None:
        unc = r["ece_uncertainty_pct"]
        lines.append(f"ECe            {_fmt(r['ece_dS_m'], 'dS/m')}  by {r['ece_method']}"
                     + (f" (about ±{unc:g} %)" if unc else ""))
        if r.get("ece_note"):
            lines.append(f"               {r['ece_note']}")
    if r["soil_class"]:
        lines.append(f"Soil class     {r['soil_class']}")
    if r["water_hazard"]:
        lines.append(f"Water hazard   {r['water_hazard']} (FAO 29 degree of restriction)")
    if r["psi_s_MPa"] is not None:
        lines.append(f"Solute pot.    {_fmt(r['psi_s_MPa'], 'MPa')}  by {r['psi_s_method']}")
        others = ", ".join(f"{k} {_fmt(v, 'MPa')}" for k, v in r["psi_s_by_method"].items())
        lines.append(f"               all routes: {others}")
        if r.get("salinity_pss78") is not None:
            lines.append(f"Salinity       {r['salinity_pss78']:.3g} (PSS-78 practical salinity; "
                         "sea-salt water)")
    ss = r["soil_solution"]
    if ss:
        lines.append(f"At field cap.  EC {_fmt(ss['ec_fc_dS_m'], 'dS/m')}, "
                     f"solute potential {_fmt(ss['psi_s_fc_MPa'], 'MPa')}")
        if ss["ec_sw_dS_m"] is not None:
            lines.append(f"At moisture    EC {_fmt(ss['ec_sw_dS_m'], 'dS/m')}, "
                         f"solute potential {_fmt(ss['psi_s_sw_MPa'], 'MPa')}")
        if ss["matric_MPa"] is not None:
            lines.append(f"Total water    {_fmt(ss['psi_total_MPa'], 'MPa')} "
                         f"(matric {_fmt(ss['matric_MPa'], 'MPa')}); "
                         f"{_fmt(ss['margin_to_pwp_MPa'], 'MPa')} above wilting point "
                         f"({ss['wilting_point_MPa']} MPa)")
    tds = r.get("tds") or {}
    if tds.get("meter"):
        lines.append(f"TDS, meter     {tds['meter']['label']}")
    lines.append(f"TDS, estimate  {_fmt(r['tds_mg_L'], 'mg/L')} (USDA Handbook 60, 640 x EC25; "
                 f"not a measurement); cations {_fmt(r['cations_meq_L'], 'meq/L')}")
    crop = r.get("crop")
    if crop:
        at = crop["ece_at_yield_dS_m"]
        lines.append(f"Crop           {crop['name']}: threshold {crop['threshold_dS_m']:g} dS/m; "
                     f"ECe at 90/75/50 % yield {at['90']}/{at['75']}/{at['50']} dS/m")
        if r.get("relative_yield_pct") is not None:
            lines.append(f"Rel. yield     {r['relative_yield_pct']:.0f} % (Maas-Hoffman)")
        if "leaching_requirement" in r:
            lr = r["leaching_requirement"]
            lines.append("Leaching req.  " + ("not reachable with this water" if lr is None
                                              else f"{lr:.2f} of the water applied"))
    for f in r["flags"]:
        lines.append(f"[{f['severity']}] {f['code']}: {f['message']} {f['action']}".rstrip())
    lines.append("")
    lines.extend(f"Caution: {c}" for c in r["cautions"])
    return "\n".join(lines)


def cmd_convert(a) -> int:
    from .science.convert import convert_reading, meter_context, parse_meter_range, parse_number
    lo = hi = res = None
    if a.meter_range:
        lo, hi = parse_meter_range(a.meter_range)
    if a.resolution is not None:
        res = parse_number(a.resolution, "resolution", "a resolution")
        if res is None or res <= 0:
            raise InputError("The resolution must be a positive number in the reading's unit.",
                             "resolution")
    result = convert_reading({
        "value": a.value, "unit": a.unit, "sample": a.sample, "ratio": a.ratio,
        "temp_c": a.temp, "compensated": a.compensated, "sp": a.sp, "texture": a.texture,
        "crop": a.crop, "matric_MPa": a.matric, "tds_factor": a.tds_factor,
        "theta_g_pct": a.water_content, "ece_method": a.method,
        "salt_type": a.salt_type,
    }, context=lambda kw: meter_context(kw, lo, hi, res))
    if a.json:
        json.dump(result, sys.stdout, ensure_ascii=False, indent=2)
        sys.stdout.write("\n")
    else:
        print(format_result(result))
    return 0


def cmd_convert_csv(a) -> int:
    from .batch import convert_csv
    if a.file == "-":
        n = convert_csv(sys.stdin, sys.stdout)
    else:
        try:
            src = open(a.file, newline="", encoding="utf-8-sig")
        except OSError as e:
            raise InputError(f"cannot read {a.file}: {e.strerror}", "file") from None
        with src:
            n = convert_csv(src, sys.stdout)
    print(f"fieldapp: converted {n} readings", file=sys.stderr)
    return 0


def _data_dir(a):
    from . import default_data_dir
    return a.data or str(default_data_dir())


def _open_store(a):
    from pathlib import Path
    from . import store
    folder = Path(_data_dir(a))
    folder.mkdir(parents=True, exist_ok=True)
    return store.connect(folder / store.DB_NAME)


def cmd_serve(a) -> int:
    import waitress
    from . import create_app, demo, store
    from .web.security import binds_to_network, start_lan
    bind = a.host or ("0.0.0.0" if a.lan else "127.0.0.1")
    lan = a.lan or binds_to_network(bind)      # never on the network without pairing
    try:
        app = create_app({"DATA_DIR": _data_dir(a), "CALIBRATION_MAX_AGE_DAYS": a.check_days,
                          "PAIRING_IDLE_DAYS": a.pairing_idle_days,
                          "LAN": lan})
    except store.StoreError as e:
        raise InputError(e.message, "data") from None
    if app.config.get("LOG_READ_ONLY"):
        print(f"fieldapp: READ-ONLY. {app.config['LOG_READ_ONLY']}", flush=True)
    elif a.demo:
        conn = store.connect(app.config["DATABASE"])
        try:
            n = demo.load(conn)
        finally:
            conn.close()
        print(f"Demo scenario loaded ({n} new readings; invented data).", flush=True)
    print(f"fieldapp {__import__('fieldapp').__version__}: log in {app.config['DATABASE']}",
          flush=True)
    https = None
    if lan and a.https_port:     # --- https for tablets: one call into fieldapp/tls.py ---
        from . import tls
        https = tls.start_https(app, bind, a.https_port, _data_dir(a), a.tls_name)
    if lan:
        print("\n".join(start_lan(app, bind, a.port)), flush=True)
    print(f"Open http://localhost:{a.port}/ in a browser on this machine (Ctrl+C stops).",
          flush=True)
    from .web import connections
    server = waitress.create_server(
        app, host=bind, port=a.port, threads=a.threads, ident="fieldapp",
        max_request_body_size=app.config["MAX_CONTENT_LENGTH"],
        **connections.waitress_options(idle_timeout_s=a.idle_timeout))
    connections.guard(server)        # the laptop always gets a slot; caps per address
    try:
        server.run()
    except KeyboardInterrupt:
        pass
    finally:
        if https is not None:
            https.stop()
    return 0


def cmd_export(a) -> int:
    from pathlib import Path
    from . import csvio, store
    db_path = Path(_data_dir(a)) / store.DB_NAME
    state = store.inspect_log(db_path)       # export never writes: open read-only
    if state["state"] == "new":
        raise InputError(f"there is no log at {db_path}.", "data")
    if state["state"] == "refused":
        raise InputError(state["problem"], "data")
    if state["problem"]:
        print(f"fieldapp: {state['problem']}", file=sys.stderr)
    conn = store.connect_readonly(db_path)
    try:
        site_id = None
        if a.site:
            site = store.get_site(conn, a.site)
            if site is None:
                raise InputError(f"no site called {a.site!r}.", "site")
            site_id = site["id"]
        out = open(a.output, "w", encoding="utf-8", newline="") if a.output else sys.stdout
        try:
            report: dict = {}
            csvio.export(conn, out, site_id, report=report)
            if report.get("skipped"):
                print(f"fieldapp: {report['skipped']} damaged row(s) could not be read and "
                      "are missing from the export.", file=sys.stderr)
        finally:
            if a.output:
                out.close()
    finally:
        conn.close()
    return 0


def cmd_import(a) -> int:
    from . import csvio
    try:
        src = open(a.file, encoding="utf-8-sig", newline="")
    except OSError as e:
        raise InputError(f"cannot read {a.file}: {e.strerror}", "file") from None
    conn = _open_store(a)
    try:
        with src:
            counts = csvio.import_csv(conn, src)
    except UnicodeDecodeError:
        raise InputError(f"{a.file} is not UTF-8 text; choose a fieldapp log export.",
                         "file") from None
    finally:
        conn.close()
    print(f"fieldapp: imported {counts['added']} new readings, {counts['skipped']} already "
          f"in the log, {counts['voided']} voids.", file=sys.stderr)
    return 0


def cmd_demo(a) -> int:
    from . import demo
    conn = _open_store(a)
    try:
        n = demo.load(conn)
    finally:
        conn.close()
    print(f"fieldapp: demo scenario loaded, {n} new readings (invented data).", file=sys.stderr)
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="fieldapp", description="Field EC readings: convert, log, export.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    c = sub.add_parser("convert", help="convert one reading and print everything derived")
    c.add_argument("value", help="the number the meter shows")
    c.add_argument("unit", help="the unit the meter shows, e.g. µS/cm, mS, dS/m, ppm")
    c.add_argument("--sample", default="paste",
                   help="paste, extract, water, feed, leachate, drain, sme, media")
    c.add_argument("--ratio", help="soil:water ratio of an extract, e.g. 1:5")
    c.add_argument("--temp", help="sample temperature in °C")
    c.add_argument("--compensated", action="store_true",
                   help="the meter already compensated to 25 °C (ATC)")
    c.add_argument("--sp", help="saturation percentage of the soil, %%")
    c.add_argument("--texture", help="texture class, used for SP when --sp is not given")
    c.add_argument("--method", help="ECe method: a regression name (see DEVELOPERS.md)")
    c.add_argument("--crop", help="crop name, for relative yield and leaching requirement")
    c.add_argument("--salt-type", help="sea_salt for water like diluted seawater (coastal "
                   "wells, seawater intrusion): adds the PSS-78 seawater route")
    c.add_argument("--matric", help="matric potential in MPa (e.g. -0.05)")
    c.add_argument("--water-content", help="gravimetric water content now, %%")
    c.add_argument("--tds-factor", help="the meter's EC-to-TDS factor (0.5, 0.64, 0.7)")
    c.add_argument("--meter-range", help="the meter's range MIN:MAX in the reading's unit, "
                   "e.g. 0:1999")
    c.add_argument("--resolution", help="the meter's display step in the reading's unit, e.g. 1")
    c.add_argument("--json", action="store_true", help="print JSON")
    c.set_defaults(func=cmd_convert)

    cc = sub.add_parser("convert-csv", help="convert a CSV file of readings to stdout")
    cc.add_argument("file", help="CSV with a header: value,unit[,sample,ratio,temp_c,...]; - for stdin")
    cc.set_defaults(func=cmd_convert_csv)

    sv = sub.add_parser("serve", help="start the local web app")
    sv.add_argument("--host", default=None,
                    help="address to listen on (default 127.0.0.1: this machine only; "
                         "with --lan every address)")
    sv.add_argument("--lan", action="store_true",
                    help="share the log with tablets on this network; they pair once with "
                         "a code shown here")
    sv.add_argument("--port", type=int, default=8080)
    sv.add_argument("--data", help="folder for the log (default: your user data folder)")
    sv.add_argument("--demo", action="store_true", help="load an invented demo scenario")
    sv.add_argument("--pairing-idle-days", type=float, default=90.0,
                    help="a paired tablet not seen for this many days must pair again "
                         "(default 90)")
    sv.add_argument("--check-days", type=float, default=7.0,
                    help="flag readings from a meter whose last calibration check is older "
                         "than this many days (default 7)")
    # --- https for tablets (fieldapp/tls.py) ---
    sv.add_argument("--https-port", type=int, default=8443,
                    help="with --lan, also serve https on this port for tablets that "
                         "installed this log's certificate (default 8443; 0: no https)")
    sv.add_argument("--tls-name", action="append", default=[],
                    help="another name or address the https certificate must carry "
                         "(may be repeated)")
    sv.add_argument("--threads", type=int, default=8, help=argparse.SUPPRESS)
    sv.add_argument("--idle-timeout", type=int, default=30, help=argparse.SUPPRESS)
    sv.set_defaults(func=cmd_serve)
    from .backup import add_commands as add_backup_commands
    add_backup_commands(sub)                    # backup, restore

    ex = sub.add_parser("export", help="write the log (or one site) as CSV")
    ex.add_argument("--site", help="only this site")
    ex.add_argument("--data", help="folder of the log")
    ex.add_argument("-o", "--output", help="file to write (default: standard output)")
    ex.set_defaults(func=cmd_export)

    im = sub.add_parser("import", help="merge a CSV export into the log (same uuid = same reading)")
    im.add_argument("file")
    im.add_argument("--data", help="folder of the log")
    im.set_defaults(func=cmd_import)

    dm = sub.add_parser("demo", help="load the invented demo scenario into a log")
    dm.add_argument("--data", help="folder of the log")
    dm.set_defaults(func=cmd_demo)
    return p


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv[:1] == ["bench"]:
        from .bench import main as bench_main
        return bench_main(argv[1:])
    args = build_parser().parse_args(argv)
    try:
        return args.func(args)
    except InputError as e:
        print(f"fieldapp: {e.message}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as e:  # noqa: BLE001 - one line, never a traceback, for any store error
        import sqlite3
        from .store import StoreError
        if isinstance(e, StoreError):
            print(f"fieldapp: {e.message}", file=sys.stderr)
            return EXIT_BAD_INPUT
        if isinstance(e, sqlite3.DatabaseError):
            print(f"fieldapp: the log could not be read or written ({e}). If it is damaged, "
                  "export what can be read and restore a backup (python -m fieldapp "
                  "restore --data DIR FILE).", file=sys.stderr)
            return EXIT_BAD_INPUT
        raise
    except BrokenPipeError:
        return 0
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
