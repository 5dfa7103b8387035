"""The command line in a real pipe (``fieldapp convert-csv many.csv | head -1``):
when the reader stops early, no traceback and no 'Exception ignored' line."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture
def many_csv(tmp_path):
    f = tmp_path / "many.csv"
    rows = ["value,unit,sample,temp_c"] + [f"{0.5 + i % 50 * 0.1:.2f},dS/m,water,{10 + i % 20}"
                                           for i in range(6000)]
    f.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return f


def _start(*args):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, "-m", "fieldapp", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env=env, cwd=ROOT)


def test_convert_csv_into_a_reader_that_stops_after_one_line(many_csv):
    p = _start("convert-csv", str(many_csv))
    header = p.stdout.readline()              # like `| head -1`
    p.stdout.close()                          # the reader goes away
    err = p.stderr.read().decode()
    p.wait(60)
    assert header.startswith(b"value,unit")
    assert "Traceback" not in err and "BrokenPipeError" not in err, err
    assert "Exception ignored" not in err, err
    assert p.returncode in (0, 1)             # 1: the output was cut short


def test_shell_pipe_to_head(many_csv):
    if os.name == "nt" or not Path("/usr/bin/head").exists():
        pytest.skip("needs a POSIX shell and head")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    p = subprocess.run(f'"{sys.executable}" -m fieldapp convert-csv "{many_csv}" | head -1',
                       shell=True, capture_output=True, text=True, env=env, cwd=ROOT,
                       timeout=120)
    assert p.stdout.count("\n") == 1 and p.stdout.startswith("value,unit")
    assert "Traceback" not in p.stderr and "Exception ignored" not in p.stderr, p.stderr
