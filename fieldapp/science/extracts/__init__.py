"""Sample kinds, dilution ratios and estimation of the saturated-paste ECe.

Crop salt-tolerance data are stated as ECe, the electrical conductivity of the
extract of a saturated soil paste at 25 °C. Field and small laboratories often
measure something else: a 1:1, 1:2 or 1:5 soil:water extract, a substrate test
(saturated media extract, 1:2 by volume, pour-through leachate), irrigation
water or a nutrient solution. This module says which of those can be turned
into a soil ECe and how, with the expected uncertainty of each route.

Every estimate here is an approximation. A laboratory saturated-paste analysis
remains the reference before costly decisions (reclamation, replanting).

Routes (see :func:`estimate_ece`):

* ``paste``        the reading already is ECe.
* ``sp_dilution``  ECe ≈ EC(1:N) · 100·N / SP (ideal dilution; needs SP or texture).
* ``regression:<name>``  a published empirical line for one ratio (data table
  ``fieldapp/data/ece_regressions.csv``), within its range of use; with only a
  texture, 1:5 uses Slavich and Petterson (1993) and 1:1/1:2 the Hogg and Henry
  (1984) line of the texture group.
* ``proportional_below_range:<name>``  below a line's range of use with
  nothing else known: the line's ECe/EC ratio at its lower limit.

No ECe is below the EC of the extract it came from.

Tables: ``textures.csv`` (saturation percentage by USDA texture class),
``ece_regressions.csv``, ``substrate_ranges.csv`` (interpretation of substrate
tests). Each row carries its source.

Modules, one concern each (this package re-exports every public name, so
``from fieldapp.science.extracts import X`` keeps working):

``kinds``          sample kinds and the N of a 1:N extract
``textures``       texture classes and their typical SP
``dilution``       ECe by ideal dilution; checks of EC and SP
``regressions``    the published EC(1:N) -> ECe lines
``texture_lines``  the relation used when only the texture is known
``routes``         each route's rows and their combination into an EceEstimate
``estimate``       :func:`estimate_ece`, the routing rules
``substrate``      interpretation bands of substrate tests
"""
from __future__ import annotations

from .. import InputError  # noqa: F401
from .kinds import (  # noqa: F401
    MAX_RATIO_N, SAMPLE_KINDS, SampleKind, check_ratio_n,
)
from .textures import (  # noqa: F401
    TEXTURES, Texture, find_texture, sp_for_texture,
)
from .dilution import (  # noqa: F401
    ESTIMATE_CAUTION, PASTE_UNCERTAINTY_PCT, PASTE_UNCERTAINTY_SOURCE,
    SP_DILUTION_UNCERTAINTY_PCT, SP_DILUTION_UNCERTAINTY_SOURCE, ece_sp_dilution,
)
from .regressions import (  # noqa: F401
    ECE_METHODS, REGRESSIONS, Regression, default_regression, ece_regression,
    find_regression, regressions_for_ratio, _same_ratio,
)
from .texture_lines import (  # noqa: F401
    HOGG_HENRY_GROUP, ORIGIN_FALLBACK, SLAVICH_PETTERSON, hogg_henry_for_texture,
    slavich_petterson_factor,
)
from .routes import (  # noqa: F401
    EceEstimate,
)
from .estimate import (  # noqa: F401
    estimate_ece,
)
from .substrate import (  # noqa: F401
    SUBSTRATE_METHODS, SUBSTRATE_METHOD_FOR_SAMPLE, SubstrateRange, substrate_ranges,
)

__all__ = [
    "MAX_RATIO_N", "SAMPLE_KINDS", "SampleKind", "check_ratio_n", "TEXTURES", "Texture",
    "find_texture", "sp_for_texture", "ESTIMATE_CAUTION", "PASTE_UNCERTAINTY_PCT",
    "PASTE_UNCERTAINTY_SOURCE", "SP_DILUTION_UNCERTAINTY_PCT",
    "SP_DILUTION_UNCERTAINTY_SOURCE", "ece_sp_dilution", "ECE_METHODS", "REGRESSIONS",
    "Regression", "default_regression", "ece_regression", "find_regression",
    "regressions_for_ratio", "HOGG_HENRY_GROUP", "ORIGIN_FALLBACK", "SLAVICH_PETTERSON",
    "hogg_henry_for_texture", "slavich_petterson_factor", "EceEstimate", "estimate_ece",
    "SUBSTRATE_METHODS", "SUBSTRATE_METHOD_FOR_SAMPLE", "SubstrateRange",
    "substrate_ranges",
]
