"""Sites on a flat local plot (no map tiles) and great-circle distances."""
from __future__ import annotations

import math
from typing import Mapping, Sequence

from .svg import _f, _open_svg, esc

#: Mean radius of the Earth, km: R1 = (2a + b)/3 of the GRS 80 ellipsoid
#: (Moritz 2000, "Geodetic Reference System 1980", J. Geodesy 74: 128-133),
#: 6371.0088 km -- value from memory.
EARTH_MEAN_RADIUS_KM = 6371.0088


def haversine_km(lat1, lon1, lat2, lon2, radius_km: float = EARTH_MEAN_RADIUS_KM) -> float:
    """Great-circle distance between two points on a sphere, km.

    .. math:: d = 2R\\,\\arcsin\\sqrt{\\sin^2\\frac{\\Delta\\varphi}{2}
              + \\cos\\varphi_1\\cos\\varphi_2\\sin^2\\frac{\\Delta\\lambda}{2}}

    Latitudes and longitudes in decimal degrees. On the Earth the sphere is
    within about 0.5 % of the ellipsoidal distance (Sinnott 1984, "Virtues of
    the haversine", Sky and Telescope 68(2): 159 -- citation from memory),
    plenty for telling one field from the next.
    """
    p1, p2 = math.radians(float(lat1)), math.radians(float(lat2))
    dp = p2 - p1
    dl = math.radians(float(lon2) - float(lon1))
    a = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2.0 * radius_km * math.asin(min(1.0, math.sqrt(a)))


def format_distance(km: float) -> str:
    """'850 m', '2.4 km', '37 km'."""
    if km is None or not math.isfinite(km):
        return "—"
    if km < 1.0:
        return f"{round(km * 1000 / 10) * 10:.0f} m" if km >= 0.1 else f"{km * 1000:.0f} m"
    if km < 10:
        return f"{km:.1f} km"
    return f"{km:.0f} km"


def distance_matrix(sites: Sequence[Mapping]) -> list[list[float]]:
    """Pairwise great-circle distances (km) between sites with lat/lon."""
    return [[0.0 if i == j else haversine_km(a["lat"], a["lon"], b["lat"], b["lon"])
             for j, b in enumerate(sites)] for i, a in enumerate(sites)]


def _nice_distance(km: float) -> float:
    """A round scale-bar length not longer than ``km``."""
    if km <= 0:
        return 0.0
    mag = 10 ** math.floor(math.log10(km))
    for m in (5, 2, 1):
        if m * mag <= km:
            return m * mag
    return mag


def _local_plane(pts, width: float, height: float):
    """The equirectangular projection around the mean position, fitted to the
    picture: (lat0, lon0, [(x_km, y_km)], px per km, cx, cy) with (cx, cy)
    the pixel of (lat0, lon0)."""
    lat0 = sum(float(s["lat"]) for s in pts) / len(pts)
    lon0 = sum(float(s["lon"]) for s in pts) / len(pts)
    k = math.pi / 180.0 * EARTH_MEAN_RADIUS_KM
    coslat = math.cos(math.radians(lat0))

    def km_xy(lat, lon):
        return ((float(lon) - lon0) * k * coslat, (float(lat) - lat0) * k)

    xy = [km_xy(s["lat"], s["lon"]) for s in pts]
    xs, ys = [p[0] for p in xy], [p[1] for p in xy]
    span_x = max(max(xs) - min(xs), 0.2)
    span_y = max(max(ys) - min(ys), 0.2)
    pad = 34.0
    scale = min((width - 2 * pad) / span_x, (height - 2 * pad - 20) / span_y)
    midx, midy = (max(xs) + min(xs)) / 2, (max(ys) + min(ys)) / 2
    cx = width / 2 - midx * scale       # pixel of (lat0, lon0)
    cy = (height - 20) / 2 + midy * scale
    return lat0, lon0, xy, scale, cx, cy


def _north_and_scale(width: float, height: float, scale: float) -> list[str]:
    """The frame, a north arrow and a scale bar of about a quarter of the width."""
    body = [f'<rect x="0.5" y="0.5" width="{_f(width - 1)}" height="{_f(height - 1)}" fill="#fbfcf9" '
            f'stroke="#000"/>']
    # north arrow
    body.append(f'<g transform="translate({_f(width - 22)},30)"><path d="M0,-16L6,2L0,-3L-6,2Z" '
                f'fill="#000"/><text x="0" y="15" text-anchor="middle" font-size="12" '
                f'font-weight="700">N</text></g>')
    # scale bar: about a quarter of the width
    bar_km = _nice_distance((width / 4) / scale)
    bar_px = bar_km * scale
    by = height - 14
    body.append(f'<g class="scale-bar"><line x1="12" y1="{_f(by)}" x2="{_f(12 + bar_px)}" y2="{_f(by)}" '
                f'stroke="#000" stroke-width="3"/><line x1="12" y1="{_f(by - 5)}" x2="12" '
                f'y2="{_f(by + 1)}" stroke="#000" stroke-width="1.5"/><line x1="{_f(12 + bar_px)}" '
                f'y1="{_f(by - 5)}" x2="{_f(12 + bar_px)}" y2="{_f(by + 1)}" stroke="#000" '
                f'stroke-width="1.5"/><text x="{_f(18 + bar_px)}" y="{_f(by + 4)}" '
                f'font-size="11">{esc(format_distance(bar_km))}</text></g>')
    return body


def _site_point(i: int, s: Mapping, x: float, y: float, width: float, n_sites: int) -> str:
    """One site: a dot, its number (and its name while there are few sites)."""
    n = s.get("n", i + 1)
    name = str(s.get("name") or "")
    short = name if len(name) <= 22 else name[:21] + "…"
    anchor, dx = ("end", -9) if x > width * 0.62 else ("start", 9)
    label = f"{n} {short}" if n_sites <= 8 else str(n)
    return (f'<g class="site-point" data-n="{esc(n)}"><title>{esc(name)}: '
            f'{float(s["lat"]):.5f}, {float(s["lon"]):.5f}</title>'
            f'<circle cx="{_f(x)}" cy="{_f(y)}" r="5.5" fill="#000" stroke="#fff" '
            f'stroke-width="1.5"/><text x="{_f(x + dx)}" y="{_f(y + 4)}" font-size="13" '
            f'text-anchor="{anchor}" paint-order="stroke" stroke="#fff" stroke-width="3.5">'
            f'{esc(label)}</text></g>')


def map_svg(sites: Sequence[Mapping], width: float = 360.0, height: float = 300.0) -> str:
    """Sites as numbered points on a flat local plot (north up), with a scale bar.

    ``sites``: ``{"lat", "lon", "name", "n"}`` (``n`` the number printed
    beside the point; defaults to the position in the list + 1). The
    projection is equirectangular around the mean position:
    x = R·Δλ·cos φ0, y = R·Δφ; fine over a farm or a district, distorted
    over hundreds of km (the distance table uses the haversine formula).
    The SVG carries ``data-lat0``, ``data-lon0``, ``data-cx``, ``data-cy`` and
    ``data-px-per-km`` so a script can add the device's own position.
    '' when no site has coordinates.
    """
    pts = [s for s in sites if s.get("lat") is not None and s.get("lon") is not None]
    if not pts:
        return ""
    lat0, lon0, xy, scale, cx, cy = _local_plane(pts, width, height)
    body = _north_and_scale(width, height, scale)
    for i, (s, (x_km, y_km)) in enumerate(zip(pts, xy)):
        body.append(_site_point(i, s, cx + x_km * scale, cy - y_km * scale, width, len(pts)))
    extra = (f' data-lat0="{lat0:.7f}" data-lon0="{lon0:.7f}" data-cx="{cx:.3f}" '
             f'data-cy="{cy:.3f}" data-px-per-km="{scale:.6f}" data-radius-km="{EARTH_MEAN_RADIUS_KM}"')
    return (_open_svg(width, height, "chart map", "Sites, north up", extra)
            + "".join(body) + "</svg>")
