"""The start pays only for the entry page (issue 12): numpy, the conversion,
charts, the site's meaning, the CSV code and the sync client load with the
first request that needs them, and then work as before.

Each check runs in a fresh interpreter, since this test process has long
imported everything. The time itself is measured by
tests/benchmarks/cold_start.py beside bare Flask + waitress, not here."""
from __future__ import annotations

import json
import os
import subprocess
import sys
import types

from conftest import ROOT

#: Not needed by the entry page; each costs start time (numpy alone about 70 ms).
DEFERRED = ["numpy", "fieldapp.science.osmotic", "fieldapp.science.temperature",
            "fieldapp.science.convert", "fieldapp.records", "fieldapp.demo", "fieldapp.sync",
            "fieldapp.charts", "fieldapp.interpret", "fieldapp.csvio"]

_SCRIPT = """
import json, sys
import fieldapp.__main__                      # the command line, as `python -m fieldapp`
from fieldapp import create_app
app = create_app({"DATA_DIR": sys.argv[1], "TESTING": True})
client = app.test_client()
page = client.get("/")
loaded = lambda: sorted(m for m in json.loads(sys.argv[2]) if m in sys.modules)
out = {"entry_status": page.status_code, "entry_has_units": "mS/cm" in page.text,
       "after_entry": loaded()}
r = client.post("/api/preview", json={"value": "1413", "unit": "µS/cm", "temp_c": "25",
                                      "compensated": True, "sample": "water"})
out.update(preview_status=r.status_code, ec25=r.get_json().get("ec25_dS_m"),
           after_preview=loaded())
print(json.dumps(out))
"""


def _run(tmp_path) -> dict:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    p = subprocess.run([sys.executable, "-c", _SCRIPT, str(tmp_path), json.dumps(DEFERRED)],
                       capture_output=True, text=True, env=env, timeout=120, cwd=tmp_path)
    assert p.returncode == 0, p.stderr
    return json.loads(p.stdout.strip().splitlines()[-1])


def test_entry_page_is_served_without_the_deferred_modules(tmp_path):
    got = _run(tmp_path)
    assert got["entry_status"] == 200 and got["entry_has_units"]
    assert got["after_entry"] == []


def test_the_first_preview_loads_them_and_converts(tmp_path):
    got = _run(tmp_path)
    assert got["preview_status"] == 200
    # 1413 µS/cm at 25 °C is the 0.01 mol/kg KCl standard: EC25 1.413 dS/m
    # (the unit definitions, BIPM SI Brochure: 1 µS/cm = 0.001 dS/m)
    assert abs(got["ec25"] - 1.413) < 1e-9
    assert {"numpy", "fieldapp.records", "fieldapp.science.convert"} <= set(got["after_preview"])


def test_late_numpy_becomes_numpy():
    """The stand-in science/ imports as np gives numpy's own objects and, after
    the first name, is a plain module holding numpy's names."""
    code = ("import sys, types; from fieldapp.lazy import numpy as np; "
            "before = 'numpy' in sys.modules; a = np.asarray([1.0, 2.0]); import numpy; "
            "print(before, type(a) is numpy.ndarray, type(np) is types.ModuleType, "
            "np.errstate is numpy.errstate, np.testing is numpy.testing)")
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env,
                       timeout=60)
    assert p.stdout.split() == ["False", "True", "True", "True", "True"], p.stderr


def test_later_reads_the_module_as_it_is_now(monkeypatch):
    """A Later stand-in reads each name from the real module at use, so a patch
    made after its first use is seen (the tests patch modules this way)."""
    from fieldapp import fmt
    from fieldapp.lazy import Later
    late = Later("fieldapp.fmt")
    assert late.number is fmt.number
    monkeypatch.setattr(fmt, "number", lambda *a, **k: "patched")
    assert late.number() == "patched"
    assert isinstance(fmt, types.ModuleType)
