"""Plausibility rules: each looks at converted columns and returns flags.

A rule never raises for a doubtful value; it says what looks wrong in one
plain sentence and what to do about it. Rules are vectorized: each returns a
boolean mask over the batch and a function that builds the flag for one row,
so a million clean readings cost a few numpy comparisons and no Python loop.

Rules that need context beyond the reading itself (meter, site history,
replicates, calibration) take that context as extra columns; when a column
is absent the rule is silent.

Modules: ``registry`` (the rule decorator, RULES, column helpers), the rules in
the order they run -- ``reading`` (the converted reading), ``meter`` (meter and
unit), ``sample`` (ratio, ECe, temperature), ``context`` (replicates, history,
calibration) -- and ``table`` (:class:`FlagTable`, :func:`reading_flags`). This
package re-exports every public name, so ``from fieldapp.science.checks import X``
keeps working.
"""
from __future__ import annotations

from ..flags import Flag  # noqa: F401
from .registry import RULES, Rule, rule  # noqa: F401
# the rule modules register their rules on import, in this order
from .reading import (  # noqa: F401
    UNCOMPENSATED_NOTE_DELTA_C, leaching_not_possible, potential_route_fallback,
    tds_approximation_range, temperature_unknown, uncompensated, unit_shorthand,
)
from .meter import (  # noqa: F401
    PLAUSIBLE_dS_m, RESOLUTION_STEPS_MIN, TYPICAL_dS_m, below_resolution, over_range,
    under_range, unit_not_on_meter, unit_slip,
)
from .sample import (  # noqa: F401
    DILUTION_FACTOR_MAX, ECE_MAX_PLAUSIBLE_dS_m, FIELD_TEMP_RANGE_C, RATIO_RANGE,
    ece_implausible, ratio_below_saturation, ratio_implausible, temperature_range,
)
from .context import (  # noqa: F401
    HISTORY_MIN_N, HISTORY_MIN_SCALE_dS_m, HISTORY_Z_MAX, REPLICATE_CV_MAX_PCT,
    calibration_drift, calibration_stale, history_jump, replicate_spread,
)
from .table import FlagTable, reading_flags  # noqa: F401
