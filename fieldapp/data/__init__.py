"""Reference tables shipped with fieldapp, as CSV with a ``source`` column.

Each row says where its numbers came from (author, year, table); a value that
was recalled rather than read says "from memory", a rule of thumb of the trade
says "common practice".
"""
from __future__ import annotations

import csv
import io
from functools import lru_cache
from importlib import resources


@lru_cache(maxsize=None)
def _read(name: str) -> tuple[tuple[tuple[str, str], ...], ...]:
    fname = name if name.endswith(".csv") else name + ".csv"
    try:
        text = resources.files(__name__).joinpath(fname).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise KeyError(f"no data table named {name!r}") from None
    rows = []
    for row in csv.DictReader(io.StringIO(text)):
        rows.append(tuple((k.strip(), (v or "").strip()) for k, v in row.items()
                          if k is not None))
    return tuple(rows)


def load_table(name: str) -> list[dict]:
    """Rows of ``fieldapp/data/<name>.csv`` as a list of dicts of stripped strings.

    A fresh list of fresh dicts is returned on every call, so callers may
    mutate them; the file itself is read once per process.
    """
    return [dict(r) for r in _read(name)]
