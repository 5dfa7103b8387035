"""The command line, run in-process with click's CliRunner: every command,
its --json/--csv output, and one line with status 2 for bad input.

Where a command mirrors the page, the test compares it with the web API on
the same log (the same functions must give the same answer)."""
from __future__ import annotations

import csv
import io
import json

import pytest
from click.testing import CliRunner

from fieldapp import create_app, store
from fieldapp.cli import cli


def run(*args, input=None):
    r = CliRunner().invoke(cli, [str(a) for a in args], input=input, catch_exceptions=False)
    return r


def ok(*args, input=None):
    r = run(*args, input=input)
    assert r.exit_code == 0, (args, r.stdout, r.stderr)
    return r


def js(*args):
    return json.loads(ok(*args, "--json").stdout)


def refused(r, word):
    """Status 2, one line on stderr naming the problem, no traceback."""
    assert r.exit_code == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    assert word.lower() in lines[0].lower(), lines[0]


@pytest.fixture
def log(tmp_path):
    """A log folder with the invented demo scenario."""
    d = tmp_path / "log"
    r = ok("demo", "--data", d)
    assert "demo scenario loaded" in r.stderr
    return d


@pytest.fixture
def api(log):
    """The web API on the same log."""
    return create_app({"TESTING": True, "DATA_DIR": str(log)}).test_client()


# ------------------------------------------------------------------ convert

def test_convert_json_keys():
    r = js("convert", "1413", "µS/cm", "--sample", "water", "--temp", "25", "--crop", "bean")
    for key in ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method",
                "psi_s_by_method", "tds_mg_L", "flags", "leaching_requirement"):
        assert key in r
    assert r["ec25_dS_m"] == pytest.approx(1.413, rel=1e-9)   # SI: 1 µS/cm = 0.001 dS/m
    assert r["ece_dS_m"] is None                              # water has no soil ECe
    assert set(r["psi_s_by_method"]) == {"handbook60", "rule_004", "nacl_pitzer", "seawater_pss78"}
    # FAO 29 eq. (Rhoades 1974): LR = ECw / (5·ECe − ECw) with bean threshold 1.0 dS/m
    assert r["leaching_requirement"] == pytest.approx(1.413 / (5 * 1.0 - 1.413), rel=1e-3)


def test_convert_with_crop_on_paste_gives_relative_yield():
    r = js("convert", "4", "dS/m", "--sample", "paste", "--compensated", "--crop", "tomato")
    # Maas-Hoffman, tomato a = 2.5 dS/m, b = 9.9 %/(dS/m) (Maas and Hoffman 1977 / FAO 29)
    assert r["relative_yield_pct"] == pytest.approx(100 - 9.9 * (4 - 2.5), abs=0.5)


def test_convert_readable_output_has_cautions():
    r = ok("convert", "0.5", "mS", "--sample", "extract", "--ratio", "1:5", "--texture", "loam",
           "--temp", "15")
    assert "EC at 25 °C" in r.stdout and "ECe" in r.stdout
    assert "laboratory" in r.stdout
    assert "mS/cm" in r.stdout          # shorthand read as per-centimetre, and said so


def test_convert_csv_output_is_one_row_of_the_json_numbers():
    one = js("convert", "640", "µS/cm", "--sample", "extract", "--ratio", "1:5", "--temp",
             "20", "--texture", "loam")
    rows = list(csv.DictReader(io.StringIO(ok(
        "convert", "640", "µS/cm", "--sample", "extract", "--ratio", "1:5", "--temp", "20",
        "--texture", "loam", "--csv").stdout)))
    assert len(rows) == 1
    assert float(rows[0]["ece_dS_m"]) == one["ece_dS_m"]
    assert rows[0]["flags"] == ";".join(f["code"] for f in one["flags"])


def test_negative_matric_potential_is_a_value_not_an_option():
    r = js("convert", "2", "dS/m", "--compensated", "--matric", "-0.05", "--water-content",
           "20", "--sp", "40")
    assert r["soil_solution"]["matric_MPa"] == pytest.approx(-0.05)


@pytest.mark.parametrize("args, word", [
    (("convert", "abc", "dS/m"), "number"),
    (("convert", "-1", "dS/m"), "negative"),
    (("convert", "1", "dS/m", "--temp", "-10"), "°C"),
    (("convert", "1", "dS/m", "--temp", "61"), "°C"),
    (("convert", "1", "dS/m", "--sample", "extract", "--ratio", "abc"), "1:"),
    (("convert", "1", "dS/m", "--crop", "moonflower"), "crop"),
    (("convert", "1", "furlongs"), "µS/cm"),
    (("convert", "500", "ppm"), "factor"),
    (("convert", "1", "dS/m", "--tmep", "3"), "--tmep"),
    (("convert", "1"), "UNIT"),
    (("convert-csv", "/nonexistent.csv"), "cannot read"),
    (("nosuchcommand",), "nosuchcommand"),
])
def test_bad_input_exits_2_with_one_line(args, word):
    refused(run(*args), word)


def test_convert_csv_streams_rows_with_results(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("value,unit,sample,ratio,temp_c,compensated,texture,crop\n"
                   "1.2,dS/m,paste,,,yes,,barley\n"
                   "640,µS/cm,extract,1:5,20,no,loam,\n"
                   "2.0,mS/cm,feed,,,yes,,\n", encoding="utf-8")
    r = ok("convert-csv", src)
    assert "converted 3 readings" in r.stderr
    rows = list(csv.DictReader(io.StringIO(r.stdout)))
    assert len(rows) == 3
    assert float(rows[0]["ec25_dS_m"]) == pytest.approx(1.2)
    assert float(rows[0]["relative_yield_pct"]) == 100.0   # barley threshold 8 dS/m
    assert float(rows[1]["ece_dS_m"]) > float(rows[1]["ec25_dS_m"])
    assert rows[2]["ece_dS_m"] == ""                        # a feed has no soil ECe
    # the same numbers as a single convert
    one = js("convert", "640", "µS/cm", "--sample", "extract", "--ratio", "1:5",
             "--temp", "20", "--texture", "loam")
    assert float(rows[1]["ece_dS_m"]) == pytest.approx(one["ece_dS_m"], rel=1e-5)
    # --json: one object per line, the same numbers unrounded
    lines = [json.loads(x) for x in ok("convert-csv", src, "--json").stdout.splitlines()]
    assert len(lines) == 3
    assert lines[1]["ece_dS_m"] == pytest.approx(one["ece_dS_m"], rel=1e-5)   # convert rounds
    assert lines[2]["ece_dS_m"] is None and lines[0]["value"] == "1.2"
    assert lines[1]["flags"] == [f["code"] for f in one["flags"]]
    # standard input
    again = ok("convert-csv", "-", input=src.read_text(encoding="utf-8")).stdout
    assert again == r.stdout


def test_convert_csv_bad_row_names_the_line(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("value,unit\n1,dS/m\n2,dS/m\nabc,dS/m\n", encoding="utf-8")
    refused(run("convert-csv", src), "line 4")


@pytest.mark.parametrize("cell", ["1_0", "1e999", "nan", "0x10"])
def test_convert_csv_reads_a_value_by_the_api_rule(tmp_path, cell):
    """A value column of plain decimals is read in one numpy call; a cell the
    API's parse_number refuses (underscores, overflow to infinity, words) is
    refused here too, naming its line, not read by float()'s looser rule."""
    src = tmp_path / "in.csv"
    src.write_text(f"value,unit\n1,dS/m\n{cell},dS/m\n2.5,dS/m\n", encoding="utf-8")
    refused(run("convert-csv", src), "line 3")


def test_convert_csv_writes_the_cells_as_the_csv_module_does(tmp_path):
    """The output lines are joined a column at a time; Python's csv module
    (the reference) must read back every input cell unchanged: commas, quotes,
    line breaks, a short row's missing cells (empty) and a long row's extras
    (dropped), blank lines skipped, and the header."""
    notes = ["plain", "a, b", 'say "hi"', "two\nlines", "", " padded ", "=1+1"]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(["note", "value", "unit", "site"])
    for i, note in enumerate(notes * 20):
        w.writerow([note, f"{0.5 + i / 100:.2f}", "dS/m", "Farm A, Block 3"])
    text = buf.getvalue() + "\r\nx,1.5,dS/m\r\ny,2.5,dS/m,Block 4,extra\r\n"
    src = tmp_path / "in.csv"
    src.write_text(text, encoding="utf-8", newline="")
    out = ok("convert-csv", src).stdout
    got = list(csv.reader(io.StringIO(out, newline="")))
    assert got[0][:4] == ["note", "value", "unit", "site"] and "ec25_dS_m" in got[0]
    want = [r for r in csv.reader(io.StringIO(text, newline="")) if r][1:]
    assert len(got) - 1 == len(want) == len(notes) * 20 + 2
    for g, row in zip(got[1:], want[:-2]):
        assert g[:4] == row and len(g) == len(got[0])
    assert got[-2][:4] == ["x", "1.5", "dS/m", ""]       # a short row: an empty cell
    assert got[-1][:4] == ["y", "2.5", "dS/m", "Block 4"] and "extra" not in got[-1]
    ec25 = got[0].index("ec25_dS_m")
    assert float(got[1][ec25]) == pytest.approx(0.5)    # a compensated-free 25 °C paste


# ------------------------------------------------------------------ export, import

def test_export_and_import_from_the_command_line(tmp_path, log):
    b = tmp_path / "b"
    text = ok("export", "--data", log).stdout
    assert text.count("\n") > 10
    out = tmp_path / "log.csv"
    ok("export", "--data", log, "-o", out)
    assert ok("import", out, "--data", b).stderr.startswith("fieldapp: imported 17 new")
    assert "0 new readings" in ok("import", out, "--data", b).stderr
    again = ok("export", "--data", b).stdout
    strip = lambda t: sorted(r["uuid"] + r["ec25_dS_m"] + r["status"]
                             for r in csv.DictReader(io.StringIO(t.lstrip("\ufeff"))))
    assert strip(again) == strip(text)
    site = ok("export", "--data", log, "--site", "Greenhouse B bench 4").stdout
    assert {r["site"] for r in csv.DictReader(io.StringIO(site.lstrip("\ufeff")))} == \
        {"Greenhouse B bench 4"}
    refused(run("export", "--data", log, "--site", "Nowhere"), "no site")


def test_import_foreign_file_is_refused(tmp_path):
    f = tmp_path / "x.csv"
    f.write_text("a,b\n1,2\n")
    refused(run("import", f, "--data", tmp_path / "d"), "not a fieldapp log export")
    refused(run("import", tmp_path / "missing.csv", "--data", tmp_path / "d"), "cannot read")


def test_foreign_database_is_left_alone(tmp_path):
    import sqlite3
    d = tmp_path / "d"
    d.mkdir()
    db = d / "fieldapp.sqlite3"
    c = sqlite3.connect(db)
    c.execute("CREATE TABLE other (x)")
    c.commit()
    c.close()
    before = db.read_bytes()
    refused(run("export", "--data", d), "another program")
    refused(run("sites", "list", "--data", d), "another program")
    assert db.read_bytes() == before
    db.write_bytes(b"this is not a database at all" * 100)
    refused(run("export", "--data", d), "not a readable")


def test_backup_and_restore_in_process(tmp_path, log):
    out = tmp_path / "copy.sqlite3"
    r = ok("backup", out, "--data", log)
    assert "17 readings" in r.stdout and out.exists()
    fresh = tmp_path / "fresh"
    r = ok("restore", out, "--data", fresh)
    assert "restored 17 readings" in r.stdout
    assert len(js("readings", "list", "--data", fresh)) == 17
    refused(run("restore", tmp_path / "nothing.sqlite3", "--data", fresh), "does not exist")


# ------------------------------------------------------------------ sites

def test_sites_list_is_the_api_list(log, api):
    mine = js("sites", "list", "--data", log)
    theirs = api.get("/api/sites").get_json()
    assert mine == theirs
    text = ok("sites", "list", "--data", log).stdout
    assert "Greenhouse B bench 4" in text and "Water source" in text
    rows = list(csv.DictReader(io.StringIO(ok("sites", "list", "--data", log, "--csv").stdout)))
    assert [r["name"] for r in rows] == [s["name"] for s in theirs]
    assert [int(r["n_readings"]) for r in rows] == [s["n_readings"] for s in theirs]


def test_site_show_is_the_pages_summary(log, api):
    s = js("sites", "show", "Farm A Block 3", "--data", log)
    site_id = s["site"]["id"]
    summary = api.get(f"/api/sites/{site_id}/summary").get_json()
    for key in ("soil", "water", "crop"):
        assert s["summary"].get(key) == summary.get(key)
    assert s["history"] == api.get(f"/api/sites/{site_id}/history").get_json()
    text = ok("sites", "show", "Farm A Block 3", "--data", log).stdout
    assert "Soil ECe" in text and "Caution" in text and "laboratory" in text
    refused(run("sites", "show", "Nowhere", "--data", log), "no site")


def test_sites_add_and_set_keep_history(log, api):
    r = js("sites", "add", "Block 9", "--kind", "orchard", "--crop", "orange", "--data", log)
    assert r["kind"] == "orchard" and r["crop"] == "orange"
    refused(run("sites", "add", "Block 9", "--data", log), "exists already")
    r = js("sites", "set", "Block 9", "--crop", "date palm", "--sp", "45", "--data", log)
    assert r["crop"] == "date palm" and r["sp_pct"] == 45 and r["change_no"]
    hist = api.get(f"/api/sites/{r['id']}/history").get_json()
    assert [h["action"] for h in hist] == ["created", "changed"]
    assert "orange → date palm" in hist[1]["text"].lower()
    # a rename: the site keeps its id and the old name still finds it
    r2 = js("sites", "set", "Block 9", "--name", "Block 9 north", "--data", log)
    assert r2["id"] == r["id"] and r2["name"] == "Block 9 north"
    assert js("sites", "show", "Block 9", "--data", log)["site"]["id"] == r["id"]
    before = api.get("/api/sites").get_json()
    refused(run("sites", "set", "Block 9 north", "--kind", "moon", "--data", log), "kind")
    refused(run("sites", "set", "Block 9 north", "--sp", "1", "--data", log), "saturation")
    refused(run("sites", "set", "Block 9 north", "--data", log), "what to change")
    assert api.get("/api/sites").get_json() == before        # nothing changed


# ------------------------------------------------------------------ readings

@pytest.mark.parametrize("filters, query", [
    ((), ""),
    (("--site", "Farm A Block 3"), "site=Farm A Block 3"),
    (("--kind", "water"), "sample=water"),
    (("--from", "2026-10-01", "--to", "2026-11-25"), "from=2026-10-01&to=2026-11-25"),
])
def test_readings_list_filters_are_the_apis(log, api, filters, query):
    mine = js("readings", "list", *filters, "--data", log)
    theirs = api.get(f"/api/readings?{query}").get_json()
    assert [r["uuid"] for r in mine] == [r["uuid"] for r in theirs]
    assert mine == theirs
    assert mine, "the demo log has readings for each filter"


def test_readings_list_text_and_csv(log):
    text = ok("readings", "list", "--site", "Farm A well 2", "--data", log).stdout
    assert text.splitlines()[0].split()[:3] == ["uuid", "site", "taken"]
    assert len(text.strip().splitlines()) == 1 + 3
    rows = list(csv.DictReader(io.StringIO(
        ok("readings", "list", "--kind", "water", "--csv", "--data", log).stdout)))
    assert {r["sample"] for r in rows} == {"water"} and len(rows) == 3
    refused(run("readings", "list", "--kind", "lava", "--data", log), "--kind")
    refused(run("readings", "list", "--from", "2026-13-01", "--data", log), "date")


def _a_reading(log, site="Farm A well 2"):
    return js("readings", "list", "--site", site, "--data", log)[0]


def test_correct_then_void_keep_every_version(log, api):
    old = _a_reading(log)
    new = js("correct", old["uuid"], "--value", "1.5", "--unit", "mS/cm", "--data", log)
    assert new["supersedes_uuid"] == old["uuid"] and new["taken_at"] == old["taken_at"]
    assert new["ec25_dS_m"] == pytest.approx(1.5)             # compensated: 1 mS/cm = 1 dS/m
    assert api.get(f"/api/readings/{old['uuid']}").get_json()["status"] == "corrected"
    refused(run("void", old["uuid"], "--reason", "probe not rinsed", "--data", log),
            "corrected")
    r = js("void", new["uuid"], "--reason", "probe not rinsed", "--data", log)
    assert r["status"] == "void" and r["void_reason"] == "probe not rinsed"
    assert api.get(f"/api/readings/{new['uuid']}").get_json()["status"] == "void"
    shown = js("readings", "show", new["uuid"], "--data", log)
    assert shown == api.get(f"/api/readings/{new['uuid']}").get_json()
    text = ok("readings", "show", new["uuid"], "--data", log).stdout
    assert "void: probe not rinsed" in text and "EC at 25 °C" in text
    refused(run("readings", "show", "no-such-reading", "--data", log), "no reading")
    refused(run("correct", new["uuid"], "--data", log), "what to correct")
    refused(run("void", "no-such-reading", "--reason", "x", "--data", log), "no such reading")


def test_correct_refuses_what_a_save_refuses_and_stores_nothing(log):
    old = _a_reading(log)
    before = ok("readings", "list", "--data", log, "--json").stdout
    refused(run("correct", old["uuid"], "--value", "abc", "--data", log), "number")
    refused(run("correct", old["uuid"], "--depth", "0-30", "--data", log), "depth")
    assert ok("readings", "list", "--data", log, "--json").stdout == before


def test_ack_a_flag(log, api):
    flagged = next(r for r in js("readings", "list", "--data", log) if r["flags"])
    code = flagged["flags"][0]
    acks = js("ack", flagged["uuid"], code, "--note", "checked the next morning", "--data", log)
    assert acks[-1]["code"] == code and acks[-1]["note"] == "checked the next morning"
    refused(run("ack", flagged["uuid"], code, "--note", "again", "--data", log), "already")
    refused(run("ack", flagged["uuid"], "no_such_flag", "--note", "x", "--data", log), "no flag")
    refused(run("ack", flagged["uuid"], code, "--note", "  ", "--data", log), "note")
    page = api.get(f"/sites/{flagged['site_id']}").get_data(as_text=True)
    assert "checked the next morning" in page


# ------------------------------------------------------------------ meters, checks, targets

def test_meters_list_presets_and_add(log, api):
    mine = js("meters", "list", "--data", log)
    theirs = api.get("/api/meters").get_json()["meters"]
    assert [m["name"] for m in mine] == [m["name"] for m in theirs]
    assert {m["check_state"] for m in mine} >= {"passed", "failed"}
    presets = js("meters", "presets")
    assert presets == api.get("/api/meters").get_json()["presets"]
    m = js("meters", "add", "probe 9", "--preset", presets[0]["name"], "--data", log)
    assert m["ranges"] == [{**r} for r in presets[0]["ranges"]]
    m2 = js("meters", "add", "probe 10", "--unit", "mS/cm", "--range", "0:20:0.01",
            "--accuracy", "2", "--data", log)
    assert m2["ranges"] == [{"min": 0.0, "max": 20.0, "resolution": 0.01, "unit": "mS/cm"}]
    refused(run("meters", "add", "probe 11", "--range", "5:1:1:µS/cm", "--data", log),
            "minimum")
    refused(run("meters", "add", "probe 12", "--preset", "no such", "--data", log), "preset")
    assert [x["name"] for x in js("meters", "list", "--data", log)] == \
        [x["name"] for x in api.get("/api/meters").get_json()["meters"]]


def test_calibrate_against_the_kcl_standard(log, api):
    js("meters", "add", "probe 9", "--unit", "µS/cm", "--range", "0:1999:1", "--data", log)
    # 0.01 mol/L KCl: 1413 µS/cm at 25 °C (ISO 7888 Table; APHA 2510 B)
    c = js("calibrate", "probe 9", "1390", "µS/cm", "--temp", "25", "--not-compensated",
           "--data", log)
    assert c["expected_uS_cm"] == pytest.approx(1413, abs=0.5)
    assert c["deviation_pct"] == pytest.approx((1390 - 1413) / 1413 * 100, abs=0.01)
    assert c["passed"] is True                       # within the default ±5 %
    bad = js("calibrate", "probe 9", "1200", "µS/cm", "--temp", "25", "--not-compensated",
             "--data", log)
    assert bad["passed"] is False
    assert "recalibrate" in ok("calibrate", "probe 9", "1200", "µS/cm", "--temp", "25",
                               "--not-compensated", "--data", log).stdout
    shown = js("meters", "show", "probe 9", "--data", log)
    assert len(shown["checks"]) == 3 and shown["check_state"] == "failed"
    assert shown["checks"] == api.get("/api/calibrations?meter=probe 9").get_json()
    refused(run("calibrate", "no meter", "1413", "µS/cm", "--data", log), "meter profile")
    refused(run("calibrate", "probe 9", "1413", "ppm", "--data", log), "EC unit")
    refused(run("calibrate", "probe 9", "1413", "µS/cm", "--temp", "70", "--data", log), "°C")
    assert len(js("meters", "show", "probe 9", "--data", log)["checks"]) == 3


def test_targets_set_list_delete(log, api):
    t = js("targets", "set", "tomato", "ece", "--hi", "2.5", "--note", "our own", "--data", log)
    assert t["crop"] == "tomato" and t["hi_dS_m"] == 2.5 and t["lo_dS_m"] is None
    t2 = js("targets", "set", "tomato", "ece", "--lo", "1", "--hi", "3", "--data", log)
    assert t2["id"] == t["id"] and t2["lo_dS_m"] == 1       # replaced, not added
    assert js("targets", "list", "--data", log) == api.get("/api/targets").get_json()
    assert js("targets", "list", "--crop", "tomato", "--data", log)[0]["id"] == t["id"]
    refused(run("targets", "set", "tomato", "ece", "--lo", "3", "--hi", "1", "--data", log),
            "above")
    refused(run("targets", "set", "tomato", "nonsense", "--hi", "1", "--data", log), "choose")
    ok("targets", "delete", t["id"], "--data", log)
    assert js("targets", "list", "--data", log) == []
    refused(run("targets", "delete", t["id"], "--data", log), "no target")


# ------------------------------------------------------------------ the rest

def test_help_and_version():
    r = ok("--help")
    for name in ("sites", "readings", "void", "correct", "ack", "meters", "calibrate",
                 "targets", "convert", "convert-csv", "export", "import", "backup", "restore",
                 "serve", "demo", "bench"):
        assert f"\n  {name} " in r.stdout, name
    assert "--lan" in ok("serve", "--help").stdout
    from fieldapp import __version__
    assert __version__ in ok("--version").stdout


def test_bench_runs_from_the_checkout():
    r = ok("bench", "convert", "--n", "2000", "--repeat", "1")
    assert "readings                 2,000" in r.stdout and "ratio" in r.stdout
    assert run("bench", "nonsense").exit_code == 2


def test_default_data_folder_follows_the_platform(monkeypatch, tmp_path):
    import sys
    from fieldapp import default_data_dir
    if sys.platform.startswith("linux"):
        monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))
        assert default_data_dir() == tmp_path / "fieldapp"    # XDG Base Directory spec
    else:
        assert default_data_dir().name == "fieldapp"


def test_lan_addresses_come_from_the_interfaces(monkeypatch):
    import ifaddr
    from fieldapp import lan

    def ip(a, prefix=24):
        return ifaddr.IP(a, prefix, "eth0")

    adapters = [ifaddr.Adapter("lo", "lo", [ip("127.0.0.1", 8), ip(("::1", 0, 0), 128)]),
                ifaddr.Adapter("wlan0", "wlan0", [ip("203.0.113.7"), ip("192.168.43.20"),
                                                  ip("169.254.3.3", 16),
                                                  ip(("fe80::1", 0, 4), 64)]),
                ifaddr.Adapter("eth1", "eth1", [ip("10.0.0.5", 8)])]
    monkeypatch.setattr(ifaddr, "get_adapters", lambda: adapters)
    # private networks first (a hotspot or home network), then public; no loopback,
    # link-local or IPv6 entries
    assert lan.lan_addresses() == ["10.0.0.5", "192.168.43.20", "203.0.113.7"]
    assert lan.usable("192.0.2.10") and not lan.usable("127.0.0.1")
    assert not lan.usable("not an address")
