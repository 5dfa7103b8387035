"""Outside checks of the science through ``python -m fieldapp convert ... --json``.

Each check names its published source. These are the cases an independent
check found wrong or unlabelled before: 1:5 extracts with only a texture,
dilute 1:1 extracts under a regression with a negative intercept, the
temperature factor just past the end of the ISO 7888 table, brackish
sea-salt water, and the two TDS figures.
"""
from __future__ import annotations

import json
import subprocess
import sys

import pytest

iapws = pytest.importorskip("iapws")
gsw = pytest.importorskip("gsw")


def convert(*args):
    p = subprocess.run([sys.executable, "-m", "fieldapp", "convert", *args, "--json"],
                       capture_output=True, text=True, timeout=60)
    assert p.returncode == 0, p.stderr
    return json.loads(p.stdout)


def test_1to5_sand_texture_uses_slavich_petterson():
    # Slavich & Petterson 1993: ECe = (2.46 + 3.03/θSP) EC1:5; sand SP 18 %
    # (textures.csv) -> f = 19.29, not the ideal-dilution 500/18 = 27.8
    r = convert("0.5", "dS/m", "--sample", "extract", "--ratio", "1:5", "--texture", "sand",
                "--compensated")
    assert r["ece_method"] == "regression:slavich_petterson_1993_1to5"
    assert r["ece_dS_m"] == pytest.approx(0.5 * (2.46 + 3.03 / 0.18), rel=1e-4)
    assert r["ece_uncertainty_pct"] is not None and r["ece_uncertainty_basis"]
    assert "Slavich and Petterson 1993" in r["ece_note"]


def test_dilute_1to1_never_below_the_extract_and_says_out_of_range():
    # PLoS ONE 13(6):e0198290 (2018) Table 2 ref [63]: 2.23 EC1:1 - 0.58 gave
    # 0.089 at 0.3 dS/m; the same source's line through the origin is 2.11 EC1:1
    r = convert("0.3", "dS/m", "--sample", "extract", "--ratio", "1:1", "--compensated")
    assert r["ece_dS_m"] == pytest.approx(2.11 * 0.3)
    assert r["ece_dS_m"] >= 0.3
    assert r["ece_out_of_range"] is True
    assert r["ece_method"] == "regression:plos2018_ref63_1to1_combined_origin"
    assert "below" in r["ece_note"]


def test_temperature_past_the_iso7888_table_is_continuous_and_named():
    # ISO 7888 f25(35 °C) = 0.822; at 35.5 °C the value must be lower, not 0.826
    a = convert("1", "dS/m", "--sample", "water", "--temp", "35")
    b = convert("1", "dS/m", "--sample", "water", "--temp", "35.5")
    assert a["ec25_dS_m"] == pytest.approx(0.822)
    assert a["temp_method"] == "iso7888"
    assert b["ec25_dS_m"] < a["ec25_dS_m"]
    assert b["temp_method"] == "iso7888_linear_beyond_table"


@pytest.mark.parametrize("sp, temp_c", [(5.0, 20.0), (10.0, 12.0), (35.0, 25.0)])
def test_sea_salt_water_gets_the_seawater_route_beside_nacl(sp, temp_c):
    # conductivity of practical salinity sp at temp_c from TEOS-10 (gsw), read
    # by a meter without compensation; IAPWS-08 (iapws) solute potential
    c = float(gsw.C_from_SP(sp, temp_c, 0.0))
    r = convert(f"{c:.4f}", "mS/cm", "--sample", "water", "--temp", str(temp_c),
                "--salt-type", "sea_salt")
    assert r["salinity_pss78"] == pytest.approx(sp, abs=0.01)
    sa = gsw.SR_from_SP(sp) / 1000.0
    sw = iapws.SeaWater(T=temp_c + 273.15, P=0.101325, S=sa)
    m_sw = sa / ((1.0 - sa) * 0.0314038218)
    rho_w = iapws.IAPWS95(T=temp_c + 273.15, P=0.101325).rho
    ref = -sw.osm * m_sw * 8.314462618 * (temp_c + 273.15) * rho_w / 1e6
    assert r["psi_s_method"] == "seawater_pss78"
    assert r["psi_s_by_method"]["seawater_pss78"] == pytest.approx(ref, rel=3e-2)
    assert r["psi_s_by_method"]["nacl_pitzer"] is not None   # reported beside it


def test_without_salt_type_no_seawater_route():
    r = convert("10", "mS/cm", "--sample", "water", "--compensated")
    assert r["psi_s_by_method"]["seawater_pss78"] is None
    assert r["salinity_pss78"] is None and r["psi_s_method"] == "nacl_pitzer"


def test_tds_meter_reading_and_estimate_are_labelled():
    # a TDS meter at factor 0.5 showing 750 ppm is 1.5 dS/m; USDA Handbook 60
    # estimates TDS as 640 mg/L per dS/m -> 960 mg/L
    r = convert("750", "ppm", "--tds-factor", "0.5", "--sample", "water", "--compensated")
    tds = r["tds"]
    assert tds["meter"]["value"] == 750 and tds["meter"]["factor"] == 0.5
    assert "meter" in tds["meter"]["label"] and "0.5" in tds["meter"]["label"]
    assert tds["estimate_mg_L"] == pytest.approx(960.0)
    assert "Handbook 60" in tds["estimate_label"] and "estimate" in tds["estimate_label"]
    r = convert("1.5", "dS/m", "--sample", "water", "--compensated")
    assert r["tds"]["meter"] is None and r["tds"]["estimate_mg_L"] == pytest.approx(960.0)


def test_readable_output_labels_both_tds_figures():
    p = subprocess.run([sys.executable, "-m", "fieldapp", "convert", "750", "ppm",
                        "--tds-factor", "0.5", "--sample", "water", "--compensated"],
                       capture_output=True, text=True, timeout=60)
    assert "TDS, meter" in p.stdout and "TDS, estimate" in p.stdout
