"""Many readings converted in one pass (records.convert_readings: the import,
sync and bulk saves) give each reading the result it gets on its own
(records.convert_reading: a save, the preview, `convert --json`), number for
number and flag for flag: the batch rounds whole columns at once
(results.RoundedColumns) and writes flags field by field, and must not differ."""
from __future__ import annotations

import json

from fieldapp.records import convert_reading, convert_readings

READINGS = [
    {"value": "2.4", "unit": "dS/m", "sample": "paste", "compensated": True, "crop": "tomato"},
    {"value": "0.31", "unit": "mS/cm", "sample": "extract", "ratio": "1:5", "texture": "sand",
     "temp_c": "31"},
    {"value": "0.3", "unit": "dS/m", "sample": "extract", "ratio": "1:1", "temp_c": "18",
     "sp": "35"},
    {"value": "1413", "unit": "µS/cm", "sample": "water", "temp_c": "12", "crop": "corn"},
    {"value": "750", "unit": "ppm", "sample": "water", "tds_factor": "0.5", "temp_c": "25"},
    {"value": "9.8", "unit": "mS/cm", "sample": "water", "salt_type": "sea_salt", "temp_c": "22"},
    {"value": "2.2", "unit": "dS/m", "sample": "leachate", "compensated": True},
    {"value": "1.7", "unit": "dS/m", "sample": "sme", "compensated": True},
    {"value": "0.9", "unit": "dS/m", "sample": "media", "ratio": "1:2", "compensated": True},
    {"value": "3.1", "unit": "dS/m", "sample": "paste", "temp_c": "36.2", "theta_g_pct": "18",
     "matric_MPa": "-0.05", "crop": "barley"},
    {"value": "1.2", "unit": "mS/m", "sample": "feed", "temp_c": "20"},
    {"value": "0", "unit": "dS/m", "sample": "water", "compensated": True},
]


def test_a_batch_gives_each_reading_its_own_result():
    alone = [convert_reading(dict(d)) for d in READINGS]
    together = convert_readings([dict(d) for d in READINGS])
    assert len(together) == len(alone)
    for d, a, b in zip(READINGS, alone, together):
        assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True), d
    # the cases above reach the rounded figures and the flags with data
    assert any(r["flags"] for r in together)
    assert any(r["soil_solution"] for r in together)
    assert any(r["tds"]["meter"] for r in together)


def test_rounded_columns_round_as_round_sig_does_cell_by_cell():
    import math

    import numpy as np

    from fieldapp.results import RoundedColumns, round_sig
    rng = np.random.default_rng(7)
    values = np.concatenate([rng.uniform(-5, 5, 2000) * 10.0 ** rng.integers(-8, 8, 2000),
                             [0.0, -0.0, 1.5, 2.5, 0.1 + 0.2, 999999.5, 1e-30, math.nan,
                              math.inf, -math.inf]])
    cols = {"a": values.tolist(), "b": values, "c": [None, 1.0, "x" == "y", 2]}
    r = RoundedColumns(cols)
    for digits in (3, 4, 6):
        for name in ("a", "b"):
            want = [round_sig(v, digits) for v in values]
            got = [r(name, i, digits) for i in range(len(values))]
            assert got == want, (name, digits)
    assert [r("c", i) for i in range(4)] == [None, 1.0, 0.0, 2.0]


def test_flag_as_dict_is_asdict_with_undefined_figures_null():
    import dataclasses
    import math

    from fieldapp.science.flags import Flag
    f = Flag("over_range", "warning", "m", "a", {"x": 1.5, "y": math.nan, "z": [1, 2]})
    d = f.as_dict()
    want = dataclasses.asdict(f)
    want["data"]["y"] = None
    assert d == want and list(d) == list(want)
    assert d["data"]["z"] is not f.data["z"]            # a copy, as asdict gives
    plain = Flag("uncompensated", "info", "m").as_dict()
    assert plain == {"code": "uncompensated", "severity": "info", "message": "m", "action": ""}
