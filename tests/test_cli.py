"""The command line as a user runs it: python -m fieldapp ..."""
from __future__ import annotations

import csv
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def run(*args, stdin=None):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-m", "fieldapp", *args], input=stdin,
                          capture_output=True, text=True, env=env, cwd=ROOT, timeout=120)


def test_convert_json_keys():
    p = run("convert", "1413", "µS/cm", "--sample", "water", "--temp", "25", "--crop", "bean",
            "--json")
    assert p.returncode == 0, p.stderr
    r = json.loads(p.stdout)
    for key in ("ec25_dS_m", "ece_dS_m", "ece_method", "psi_s_MPa", "psi_s_method",
                "psi_s_by_method", "tds_mg_L", "flags", "leaching_requirement"):
        assert key in r
    assert r["ec25_dS_m"] == pytest.approx(1.413, rel=1e-9)   # SI: 1 µS/cm = 0.001 dS/m
    assert r["ece_dS_m"] is None                              # water has no soil ECe
    assert set(r["psi_s_by_method"]) == {"handbook60", "rule_004", "nacl_pitzer", "seawater_pss78"}
    # FAO 29 eq. (Rhoades 1974): LR = ECw / (5·ECe − ECw) with bean threshold 1.0 dS/m
    assert r["leaching_requirement"] == pytest.approx(1.413 / (5 * 1.0 - 1.413), rel=1e-3)


def test_convert_with_crop_on_paste_gives_relative_yield():
    p = run("convert", "4", "dS/m", "--sample", "paste", "--compensated", "--crop", "tomato",
            "--json")
    r = json.loads(p.stdout)
    # Maas-Hoffman, tomato a = 2.5 dS/m, b = 9.9 %/(dS/m) (Maas and Hoffman 1977 / FAO 29)
    assert r["relative_yield_pct"] == pytest.approx(100 - 9.9 * (4 - 2.5), abs=0.5)


def test_convert_readable_output_has_cautions():
    p = run("convert", "0.5", "mS", "--sample", "extract", "--ratio", "1:5", "--texture", "loam",
            "--temp", "15")
    assert p.returncode == 0, p.stderr
    assert "EC at 25 °C" in p.stdout and "ECe" in p.stdout
    assert "laboratory" in p.stdout
    assert "mS/cm" in p.stdout          # shorthand read as per-centimetre, and said so


@pytest.mark.parametrize("args, word", [
    (("convert", "abc", "dS/m"), "number"),
    (("convert", "-1", "dS/m"), "negative"),
    (("convert", "1", "dS/m", "--temp", "-10"), "°C"),
    (("convert", "1", "dS/m", "--temp", "61"), "°C"),
    (("convert", "1", "dS/m", "--sample", "extract", "--ratio", "abc"), "1:"),
    (("convert", "1", "dS/m", "--crop", "moonflower"), "crop"),
    (("convert", "1", "furlongs"), "µS/cm"),
    (("convert", "500", "ppm"), "factor"),
    (("convert-csv", "/nonexistent.csv"), "cannot read"),
])
def test_bad_input_exits_2_with_one_line(args, word):
    p = run(*args)
    assert p.returncode == 2
    lines = p.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in p.stderr
    assert word.lower() in lines[0].lower()


def test_convert_csv_streams_rows_with_results(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("value,unit,sample,ratio,temp_c,compensated,texture,crop\n"
                   "1.2,dS/m,paste,,,yes,,barley\n"
                   "640,µS/cm,extract,1:5,20,no,loam,\n"
                   "2.0,mS/cm,feed,,,yes,,\n", encoding="utf-8")
    p = run("convert-csv", str(src))
    assert p.returncode == 0, p.stderr
    rows = list(csv.DictReader(io.StringIO(p.stdout)))
    assert len(rows) == 3
    assert float(rows[0]["ec25_dS_m"]) == pytest.approx(1.2)
    assert float(rows[0]["relative_yield_pct"]) == 100.0   # barley threshold 8 dS/m
    assert float(rows[1]["ece_dS_m"]) > float(rows[1]["ec25_dS_m"])
    assert rows[2]["ece_dS_m"] == ""                        # a feed has no soil ECe
    # the same numbers as a single convert
    one = json.loads(run("convert", "640", "µS/cm", "--sample", "extract", "--ratio", "1:5",
                         "--temp", "20", "--texture", "loam", "--json").stdout)
    assert float(rows[1]["ece_dS_m"]) == pytest.approx(one["ece_dS_m"], rel=1e-5)


def test_convert_csv_bad_row_names_the_line(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("value,unit\n1,dS/m\n2,dS/m\nabc,dS/m\n", encoding="utf-8")
    p = run("convert-csv", str(src))
    assert p.returncode == 2
    assert "line 4" in p.stderr


def test_export_and_import_from_the_command_line(tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    assert run("demo", "--data", str(a)).returncode == 0
    p = run("export", "--data", str(a))
    assert p.returncode == 0
    assert p.stdout.count("\n") > 10
    out = tmp_path / "log.csv"
    assert run("export", "--data", str(a), "-o", str(out)).returncode == 0
    p1 = run("import", str(out), "--data", str(b))
    assert p1.returncode == 0, p1.stderr
    p2 = run("import", str(out), "--data", str(b))
    assert "0 new readings" in p2.stderr
    again = run("export", "--data", str(b)).stdout
    strip = lambda t: sorted(r["uuid"] + r["ec25_dS_m"] + r["status"]
                             for r in csv.DictReader(io.StringIO(t.lstrip("\ufeff"))))
    assert strip(again) == strip(p.stdout)
    site = run("export", "--data", str(a), "--site", "Greenhouse B bench 4").stdout
    assert {r["site"] for r in csv.DictReader(io.StringIO(site.lstrip("\ufeff")))} == \
        {"Greenhouse B bench 4"}


def test_import_foreign_file_is_refused(tmp_path):
    f = tmp_path / "x.csv"
    f.write_text("a,b\n1,2\n")
    p = run("import", str(f), "--data", str(tmp_path / "d"))
    assert p.returncode == 2 and "not a fieldapp log export" in p.stderr


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
    p = run("export", "--data", str(d))
    assert p.returncode == 2 and "another program" in p.stderr
    assert db.read_bytes() == before
    (d / "fieldapp.sqlite3").write_bytes(b"this is not a database at all" * 100)
    p = run("export", "--data", str(d))
    assert p.returncode == 2 and "not a readable" in p.stderr
