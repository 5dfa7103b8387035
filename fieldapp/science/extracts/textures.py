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
    """The :class:`Texture` for a class name; case, spaces, ``_`` and ``-`` are ignored."""
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
    """Typical saturation percentage SP (%) of a USDA texture class.

    A class-average value; real soils vary (see ``Texture.sp_low_pct`` and
    ``sp_high_pct``; organic matter, swelling clays and gypsum move SP a lot).
    A measured SP always beats this. Source per row in ``textures.csv``.
    """
    return find_texture(name).sp_pct
