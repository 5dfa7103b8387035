"""Interpretation bands of substrate tests (``substrate_ranges.csv``)."""
from __future__ import annotations

import math
from dataclasses import dataclass

from .. import InputError
from ...data import load_table
from .textures import _norm


@dataclass(frozen=True)
class SubstrateRange:
    """One interpretation band of a substrate test (dS/m, lo inclusive)."""
    method: str
    level: str
    lo_dS_m: float
    hi_dS_m: float  # math.inf for the open top band
    source: str
    verified: str = "unverified"


_SUBSTRATE_ROWS = [
    SubstrateRange(r["method"], r["level"], float(r["lo_dS_m"]),
                   float(r["hi_dS_m"]) if r["hi_dS_m"] else math.inf, r["source"],
                   r.get("verified") or "unverified")
    for r in load_table("substrate_ranges")
]
SUBSTRATE_METHODS: tuple[str, ...] = tuple(dict.fromkeys(r.method for r in _SUBSTRATE_ROWS))
#: Which table applies to which sample kind.
SUBSTRATE_METHOD_FOR_SAMPLE = {"sme": "sme", "media": "media_1to2", "leachate": "pour_through"}


def substrate_ranges(method) -> list[SubstrateRange]:
    """Interpretation bands (very_low ... extreme) for a substrate test method.

    ``method`` is one of :data:`SUBSTRATE_METHODS` (``sme``, ``media_1to2``,
    ``pour_through``) or a sample kind mapped by
    :data:`SUBSTRATE_METHOD_FOR_SAMPLE`. The bands are general greenhouse
    guidance; crop-specific targets differ.
    """
    key = _norm(method or "").replace(" ", "_")
    key = SUBSTRATE_METHOD_FOR_SAMPLE.get(key, key)
    rows = [r for r in _SUBSTRATE_ROWS if r.method == key]
    if not rows:
        raise InputError(f"No interpretation ranges for {str(method)!r}; known: "
                         + ", ".join(SUBSTRATE_METHODS) + ".", "method")
    return rows
