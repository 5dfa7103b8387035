"""What was put in the meter's cup (sample kinds) and the N of a 1:N extract."""
from __future__ import annotations

import math
from dataclasses import dataclass

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start


@dataclass(frozen=True)
class SampleKind:
    """What was put in the meter's cup.

    ``is_soil``: the reading can be turned into a soil ECe.
    ``takes_ratio``: the sample was diluted by a stated ratio (1:N).
    ``ratio_basis``: "mass" (soil:water by weight), "volume" or None.
    """
    key: str
    label: str
    description: str
    is_soil: bool
    takes_ratio: bool
    default_ratio: float | None
    ratio_basis: str | None
    interpretation_note: str


SAMPLE_KINDS: dict[str, SampleKind] = {k.key: k for k in (
    SampleKind(
        "paste", "Saturated paste extract (ECe)",
        "Soil wetted to saturation, extract drawn off and measured.",
        True, False, None, None,
        "This is ECe itself, the basis of crop salt-tolerance tables."),
    SampleKind(
        "extract", "Soil:water extract 1:N (by mass)",
        "Dry soil shaken with N parts of water by weight (1:1, 1:2, 1:2.5, 1:5).",
        True, True, 1.0, "mass",
        "More dilute than the paste; converted to an ECe estimate by saturation "
        "percentage or a published regression for that ratio."),
    SampleKind(
        "water", "Irrigation or source water (ECw)",
        "Water from a well, canal, pond or tap used for irrigation.",
        False, False, None, None,
        "Judged against water-quality guidelines and used for the leaching requirement."),
    SampleKind(
        "feed", "Nutrient solution (feed)",
        "Fertigation or hydroponic solution as delivered to the plants.",
        False, False, None, None,
        "Compared with the crop's target feed EC; not a soil value."),
    SampleKind(
        "leachate", "Pour-through or container leachate",
        "Solution collected from the bottom of a container after watering.",
        False, False, None, None,
        "Interpreted with pour-through ranges for substrates; not a soil value."),
    SampleKind(
        "drain", "Drainage or runoff water",
        "Water leaving a field, bed or bench through drains or as runoff.",
        False, False, None, None,
        "Shows how much salt leaves the root zone; compare with the water applied."),
    SampleKind(
        "sme", "Saturated media extract (substrate)",
        "Potting substrate wetted to saturation and the solution drawn off.",
        False, False, None, None,
        "Interpreted with saturated-media-extract ranges; substrates are not turned "
        "into a soil ECe."),
    SampleKind(
        "media", "Substrate:water extract 1:N (by volume)",
        "Substrate mixed with N volumes of water, usually 1:2.",
        False, True, 2.0, "volume",
        "Interpreted with 1:2 substrate ranges; substrates are not turned into a soil ECe."),
)}

# --------------------------------------------------------------------------
# Dilution ratio
# --------------------------------------------------------------------------

#: The most dilute extract any method here reads (1:N with N at most this).
MAX_RATIO_N = 1000.0


def check_ratio_n(n) -> float:
    """N of a 1:N extract as a number: finite, above 0, at most :data:`MAX_RATIO_N`.

    The pipeline passes N as a float. Text as typed ("1:5", "1:2,5") and any
    number out of range are handed to :func:`fieldapp.forms.parse_ratio`,
    which reads the text and words the message (field ``"ratio"``).

    Parameters
    ----------
    n : float or str
        Parts of water per part of sample (the N of 1:N), or text as typed.

    Returns
    -------
    float
        N.

    References
    ----------
    The 1:N notation of the extract methods (USDA Handbook 60; FAO 57).

    Examples
    --------
    >>> check_ratio_n(5), check_ratio_n("1:2.5")
    (5.0, 2.5)
    """
    if (isinstance(n, (int, float, np.integer, np.floating)) and not isinstance(n, bool)
            and math.isfinite(n) and 0 < n <= MAX_RATIO_N):
        return float(n)
    from ...forms import parse_ratio   # typed text is the forms' job
    return parse_ratio(n)
