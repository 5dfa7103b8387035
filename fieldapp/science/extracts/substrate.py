"""Interpretation bands of substrate tests (``substrate_ranges.csv``)."""
from __future__ import annotations

import math
from dataclasses import dataclass

from .. import InputError
from ...data import load_table
from .textures import _norm


@dataclass(frozen=True)
class SubstrateRange:
    """One interpretation band of a substrate test (dS/m): above ``lo`` up to and
    including ``hi`` (the lowest band from 0 itself); see interpret.solutions._level."""
    method: str
    level: str
    lo_dS_m: float
    hi_dS_m: float  # math.inf for the open top band
    source: str
    verified: str = "unverified"
    #: the short citation a screen shows (``source`` says in full where each
    #: value was read and what was checked)
    cite: str = ""


_SUBSTRATE_ROWS = [
    SubstrateRange(r["method"], r["level"], float(r["lo_dS_m"]),
                   float(r["hi_dS_m"]) if r["hi_dS_m"] else math.inf, r["source"],
                   r.get("verified") or "unverified", r.get("cite") or "")
    for r in load_table("substrate_ranges")
]
SUBSTRATE_METHODS: tuple[str, ...] = tuple(dict.fromkeys(r.method for r in _SUBSTRATE_ROWS))
#: Which table applies to which sample kind.
SUBSTRATE_METHOD_FOR_SAMPLE = {"sme": "sme", "media": "media_1to2", "leachate": "pour_through"}


def substrate_ranges(method) -> list[SubstrateRange]:
    """Interpretation bands (very_low ... extreme) for a substrate test method.

    The bands are general greenhouse guidance; crop-specific targets differ.

    Parameters
    ----------
    method : str
        One of :data:`SUBSTRATE_METHODS` (``sme``, ``media_1to2``,
        ``pour_through``) or a sample kind mapped by
        :data:`SUBSTRATE_METHOD_FOR_SAMPLE`.

    Returns
    -------
    list of SubstrateRange
        The bands, lowest first, in dS/m (a shared limit in the lower band); an unknown method
        raises :class:`InputError` (field ``"method"``).

    References
    ----------
    ``substrate_ranges.csv``: read in a reworded web copy of a UMass Extension
    greenhouse table (1:2, SME and pour-through columns), the table attributed
    to Cavins et al. (2000), NC State University Horticulture Information
    Leaflet 590; each row says where it was read and stays "unverified" until
    someone checks it against the leaflet's or UMass's own table.

    Examples
    --------
    The saturated media extract's "normal" band, 2.0-3.5 dS/m, as the table
    row reads:

    >>> [(r.lo_dS_m, r.hi_dS_m) for r in substrate_ranges("sme") if r.level == "normal"]
    [(2.0, 3.5)]
    """
    key = _norm(method or "").replace(" ", "_")
    key = SUBSTRATE_METHOD_FOR_SAMPLE.get(key, key)
    rows = [r for r in _SUBSTRATE_ROWS if r.method == key]
    if not rows:
        raise InputError(f"No interpretation ranges for {str(method)!r}; known: "
                         + ", ".join(SUBSTRATE_METHODS) + ".", "method")
    return rows
