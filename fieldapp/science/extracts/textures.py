"""USDA texture classes and their typical saturation percentage (``textures.csv``)."""
from __future__ import annotations

import difflib
import re
from dataclasses import dataclass

from .. import InputError
from ...data import load_table


@dataclass(frozen=True)
class Texture:
    """A USDA texture class with a typical saturation percentage SP (g water
    per 100 g oven-dry soil in a saturated paste) and its usual range."""
    name: str
    sp_pct: float
    sp_low_pct: float
    sp_high_pct: float
    source: str
    #: "derived" (computed from a read table by a stated rule) or "unverified".
    verified: str = "unverified"

    @property
    def sp_text(self) -> str:
        """The class SP as a note quotes it: value, range and how far it is
        checked (``39 %, range 30-45 %; class SP not checked ...``)."""
        return (f"{self.sp_pct:g} %, range {self.sp_low_pct:g}-{self.sp_high_pct:g} %; "
                f"{self.sp_status}")

    @property
    def check(self) -> str:
        """How far the class SP is checked: "yes", "derived" or "unverified"
        (anything else the data file says reads as unverified)."""
        v = (self.verified or "").strip().lower()
        return v if v in ("yes", "derived") else "unverified"

    @property
    def sp_status(self) -> str:
        """How far the class SP is checked, in words for a note on a screen:
        every note that uses the class SP carries it, so a value nobody has
        read in a published SP table never reaches a screen unmarked."""
        v = self.check
        if v == "yes":
            return "class SP checked against its published table"
        if v == "derived":
            return ("class SP derived from a published field-capacity table by the "
                    "rule SP ≈ 2 × field capacity, not read in a published SP table; unverified")
        return "class SP not checked against a published table; unverified"


def _norm(name: str) -> str:
    s = str(name).strip().lower().replace("_", " ").replace("-", " ")
    s = re.sub(r"[^a-z0-9. ]+", " ", s)
    return re.sub(r"\s+", " ", s).strip()


TEXTURES: dict[str, Texture] = {
    r["name"]: Texture(r["name"], float(r["sp_pct"]), float(r["sp_low_pct"]),
                       float(r["sp_high_pct"]), r["source"], r.get("verified") or "unverified")
    for r in load_table("textures")
}
_TEXTURE_KEYS = {_norm(k).replace(" ", ""): k for k in TEXTURES}


def find_texture(name) -> Texture:
    """The :class:`Texture` for a class name; case, spaces, ``_`` and ``-`` are ignored.

    Parameters
    ----------
    name : str
        A USDA texture class name, e.g. "silt loam".

    Returns
    -------
    Texture
        The class with its typical SP and range (``textures.csv``, a source
        per row). An unknown name raises :class:`InputError` (field
        ``"texture"``) with the closest names.

    References
    ----------
    USDA texture classes (Soil Survey Manual); SP per class in ``textures.csv``.

    Examples
    --------
    >>> find_texture("Silt_Loam").name
    'silt loam'
    """
    if name is None or not str(name).strip():
        raise InputError("Choose a soil texture class, e.g. " + ", ".join(TEXTURES) + ".",
                         "texture")
    key = _norm(name).replace(" ", "")
    if key in _TEXTURE_KEYS:
        return TEXTURES[_TEXTURE_KEYS[key]]
    close = difflib.get_close_matches(_norm(name), list(TEXTURES), n=3, cutoff=0.6)
    msg = f"Unknown soil texture {str(name)!r}."
    if close:
        msg += " Did you mean " + " or ".join(close) + "?"
    msg += " Known textures: " + ", ".join(TEXTURES) + "."
    raise InputError(msg, "texture")


def sp_for_texture(name) -> float:
    """Typical saturation percentage SP of a USDA texture class.

    A class-average value; real soils vary (see ``Texture.sp_low_pct`` and
    ``sp_high_pct``; organic matter, swelling clays and gypsum move SP a lot).
    A measured SP always beats this.

    Parameters
    ----------
    name : str
        A USDA texture class name.

    Returns
    -------
    float
        SP, g water per 100 g oven-dry soil.

    References
    ----------
    Source per row in ``textures.csv`` (derived rows: SP ≈ 2 × field capacity,
    UC Davis ANLAB note and USDA Handbook 60, from the Green-Ampt parameter
    table by texture; others unverified).

    Examples
    --------
    Loam: field capacity 0.28 m³/m³ and porosity 0.46 in the Green-Ampt table
    give SP = 2 × 0.28 / (2.65 × (1 - 0.46)) = 39 % (the row's stated rule):

    >>> sp_for_texture("loam")
    39.0
    """
    return find_texture(name).sp_pct
