"""What the readings of a site mean: where it stands, where it is heading.

Pure: a site and its reading records in, a JSON-ready dict out. No Flask,
no SQL, no I/O. A record is either shaped as ``store.view_readings`` gives
it (columns only: ``status``, ``sample``, ``depth_cm``, ``taken_at``,
``visit_date``, the computed values and the soil solution estimates as
columns, ``flag_list`` from the flag rows; what the pages use, no JSON
decoded) or as ``store.reading_dict`` gives it (the stored conversion
``result``); the values read are the same.

Only *current* readings (neither corrected nor void) are interpreted. The
numbers of each reading are the ones stored with it (the conversion made
when it was saved); this module adds what needs several readings or the
site's crop: the root-zone mean ECe and its class, the expected relative
yield (Maas-Hoffman), the direction of change, the water's hazard class and
leaching requirement, the ratio of leachate to feed EC in a greenhouse, the
substrate tests against their published ranges and the user's own targets.

Every interpretation is an estimate. The caller shows :data:`CAUTIONS`.
"""
from __future__ import annotations

# One interface: callers say ``interpret.name``; the modules hold one part each.
from .common import (CAUTIONS, SOIL_KINDS, SOLUTION_KINDS, crop_dict, current_readings,
                     depth_label, is_flagged, site_crop, soil_class)  # noqa: F401
from .targets import (TARGET_MAX_dS_m, TARGET_MEASURES, TARGET_NOTE_MAX, compare_to_target,
                      targets_for_crop, validate_target)  # noqa: F401
from .soil import FALLBACK_UNCERTAINTY_PCT, soil_state  # noqa: F401
from .solutions import (LEACHATE_FEED_BANDS, LEACHATE_FEED_SOURCE, SUBSTRATE_LEVELS,
                        SUBSTRATE_LEVELS_SOURCE, FEED_LEACHATE_VISITS, feed_leachate,
                        feed_leachate_days, leachate_feed_band,
                        substrate_tests, water_state)  # noqa: F401
from .summary import headline, needs_crop, site_summary, summary_from_rows  # noqa: F401
from .trends import (MAX_POINTS_PER_SERIES, YIELD_LINE_DASHES, chart_specs, crop_lines,
                     day_buckets, profile_spec, soil_bands, specs_from_series, thin_points,
                     water_bands)  # noqa: F401
