"""Pure SVG builders for the site views: salinity trend, depth profile, map plot.

Numbers and labels in, an SVG string out: no Flask, no SQL, no I/O. Every
piece of text that may come from a person (site names, series names, notes)
goes through :func:`esc` before it reaches the markup.

The pictures are drawn to be read on a 360 px phone and printed in black and
white: series differ by marker shape and line dash, background bands by grey
level *and* a written label, reference lines by dash pattern, a raised flag
by a dashed ring around the mark; colour only adds to these, never replaces
them. The SVG has a ``viewBox`` and no fixed size, so it scales to the page.

The map is a flat local projection of latitude and longitude (no map tiles:
the app runs without internet); distances are great-circle distances by the
haversine formula.

Modules: ``svg`` (escaping, styles, markers, legends), ``axes`` (ticks, time
axes, bands), ``trend``, ``profile`` and ``map`` (one picture each). This
package re-exports every public name, so ``from fieldapp import charts`` and
``charts.trend_svg(...)`` keep working.
"""
from __future__ import annotations

import re

from .axes import MONTHS, _day_number, nice_ticks, parse_time, time_ticks  # noqa: F401
from .map import (  # noqa: F401
    EARTH_MEAN_RADIUS_KM, distance_matrix, format_distance, haversine_km, map_svg,
)
from .profile import profile_svg  # noqa: F401
from .svg import (  # noqa: F401
    BAND_FILLS, FLAG_SWATCH, FONT, LINE_DASHES, SERIES_STYLES, esc, marker_path,
)
from .trend import latest_flagged, trend_svg  # noqa: F401


def svg_marks(svg: str) -> int:
    """How many reading marks an SVG from this package holds (for checks):
    marks of their own and the flagged ones drawn without a label."""
    if not svg:
        return 0
    more = sum(int(n) for n in re.findall(r'class="flagged-more" data-n="(\d+)"', svg))
    return svg.count('class="mark') + more


__all__ = ["trend_svg", "profile_svg", "map_svg", "haversine_km", "distance_matrix",
           "format_distance", "nice_ticks", "time_ticks", "esc", "EARTH_MEAN_RADIUS_KM"]
