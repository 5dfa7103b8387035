"""Every method key a result can carry has a plain label and a source in
fieldapp/data/method_labels.csv (the page and the CSV read labels there)."""
from fieldapp.data import load_table
from fieldapp.science import extracts as ex, osmotic as o, temperature as tc


def _labels():
    return {r["key"]: r for r in load_table("method_labels")}


def test_every_method_key_has_a_label_and_a_source():
    labels = _labels()
    keys = {"meter", "assumed_25", "iso7888", "linear", "iso7888_linear_beyond_table",
            "paste", "sp_dilution", "sp_dilution:texture:<texture>",
            "tds_meter", "tds_estimate_handbook60", o.SEAWATER_ROUTE, *o.PSI_S_ROUTES}
    keys |= {f"regression:{k}" for k in ex.REGRESSIONS}
    keys |= {f"proportional_below_range:{k}" for k, r in ex.REGRESSIONS.items()
             if r.min_ec_dS_m > 0}
    assert keys <= set(labels)
    for k in keys:
        assert labels[k]["label"] and labels[k]["source"], k
        assert "from memory" not in labels[k]["label"] + labels[k]["source"], k


def test_temperature_methods_produced_are_labelled():
    labels = _labels()
    produced = set(tc.applied_method([-2.0, 10.0, 40.0, float("nan")], False))
    produced |= set(tc.applied_method([10.0], True)) | set(tc.applied_method([10.0], False,
                                                                             "linear"))
    assert produced <= set(labels)
