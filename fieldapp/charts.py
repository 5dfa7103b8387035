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
"""
from __future__ import annotations

import datetime as dt
import html
import math
from typing import Mapping, Sequence

from .fmt import number as fmt   # the one formatter; chart labels use 3 digits, data-value 6

#: Mean radius of the Earth, km: R1 = (2a + b)/3 of the GRS 80 ellipsoid
#: (Moritz 2000, "Geodetic Reference System 1980", J. Geodesy 74: 128-133),
#: 6371.0088 km -- value from memory.
EARTH_MEAN_RADIUS_KM = 6371.0088

FONT = "system-ui, -apple-system, 'Segoe UI', Roboto, 'DejaVu Sans', sans-serif"

#: (shape, filled, line dash, colour) per series, in order. Shape and dash
#: tell the series apart in black and white; colour is a help on screen.
SERIES_STYLES = (
    ("circle", True, "", "#1f3d7a"),
    ("square", False, "7 3", "#7a3b12"),
    ("triangle", True, "2 3", "#1d5e2a"),
    ("diamond", False, "9 3 2 3", "#5a2a6e"),
    ("triangle_down", True, "1 3", "#222222"),
    ("cross", False, "12 4", "#6b4a00"),
)

#: Fills of background bands from the lowest to the highest class: light
#: tints whose grey levels also step down, so they stay apart when printed in
#: black and white (each band also carries its name as text).
BAND_FILLS = ("#ffffff", "#eef3e4", "#f3e2b6", "#eccbb0", "#e0adad", "#d29a9a")

#: Dash patterns of reference lines, by index (the caller may set its own).
LINE_DASHES = ("", "8 4", "3 3", "1 3", "10 3 2 3")


def esc(text) -> str:
    """Text for SVG/HTML: &, <, >, quotes escaped; None becomes ''."""
    return html.escape("" if text is None else str(text), quote=True)


def _f(x: float) -> str:
    """A coordinate in the SVG: 1 decimal is plenty at these sizes."""
    return f"{x:.1f}"


# --------------------------------------------------------------------------
# scales and ticks
# --------------------------------------------------------------------------

def nice_ticks(lo: float, hi: float, max_ticks: int = 6) -> list[float]:
    """Round tick values covering [lo, hi] with a 1-2-2.5-5 × 10^k step.

    The last tick is >= hi, so it can serve as the top of the axis.
    """
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise ValueError("ticks need finite bounds")
    if hi <= lo:
        hi = lo + 1.0
    raw = (hi - lo) / max(1, max_ticks - 1)
    mag = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        step = m * mag
        if (hi - lo) / step <= max_ticks - 1 + 1e-9:
            break
    start = math.floor(lo / step + 1e-9) * step
    ticks = []
    v = start
    while v < hi - 1e-9 * step:
        ticks.append(round(v, 10))
        v += step
    ticks.append(round(v, 10))
    return ticks


def parse_time(t) -> dt.datetime:
    """An ISO date or date-time as a naive wall-clock datetime.

    The offset is dropped on purpose: a reading taken at 09:00 local time is
    drawn on the day the person wrote down, not on its UTC day.
    """
    if isinstance(t, dt.datetime):
        return t.replace(tzinfo=None)
    if isinstance(t, dt.date):
        return dt.datetime(t.year, t.month, t.day)
    s = str(t).strip().replace("Z", "+00:00")
    return dt.datetime.fromisoformat(s).replace(tzinfo=None)


def _day_number(t: dt.datetime) -> float:
    return t.toordinal() + (t.hour * 3600 + t.minute * 60 + t.second) / 86400.0


MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


def time_ticks(d0: float, d1: float, max_ticks: int = 5) -> list[tuple[float, str]]:
    """Tick positions (day numbers) and labels for a time axis from d0 to d1."""
    span = max(d1 - d0, 1e-6)
    out: list[tuple[float, str]] = []
    if span <= 70:
        for step in (1, 2, 7, 14, 28):
            if span / step <= max_ticks:
                break
        first = math.ceil(d0)
        if step >= 7:  # weeks start on Mondays
            first += (7 - dt.date.fromordinal(first).weekday()) % 7
        d = first
        while d <= d1 + 1e-9:
            day = dt.date.fromordinal(int(d))
            out.append((float(d), f"{day.day} {MONTHS[day.month - 1]}"))
            d += step
        return out
    for months in (1, 2, 3, 6, 12, 24, 60):
        if span / (30.44 * months) <= max_ticks:
            break
    first = dt.date.fromordinal(int(math.ceil(d0)))
    idx = first.year * 12 + first.month - 1          # months since year 0
    if first.day != 1:
        idx += 1
    idx = -(-idx // months) * months                 # Jan, Apr, Jul ... for a 3-month step
    prev_year = None
    while True:
        y, m = divmod(idx, 12)
        d = dt.date(y, m + 1, 1).toordinal()
        if d > d1 + 1e-9:
            break
        if months >= 12:
            label = str(y)
        elif y != prev_year:
            label = f"{MONTHS[m]} {y}"
        else:
            label = MONTHS[m]
        prev_year = y
        out.append((float(d), label))
        idx += months
    return out


# --------------------------------------------------------------------------
# markers
# --------------------------------------------------------------------------

def marker_path(shape: str, x: float, y: float, r: float = 4.5) -> str:
    """Path data of a marker of ``shape`` centred on (x, y)."""
    if shape == "circle":
        return (f"M{_f(x - r)},{_f(y)}a{r:.1f},{r:.1f} 0 1,0 {2 * r:.1f},0"
                f"a{r:.1f},{r:.1f} 0 1,0 {-2 * r:.1f},0Z")
    if shape == "square":
        s = r * 0.9
        return f"M{_f(x - s)},{_f(y - s)}h{2 * s:.1f}v{2 * s:.1f}h{-2 * s:.1f}Z"
    if shape == "triangle":
        return (f"M{_f(x)},{_f(y - 1.15 * r)}L{_f(x + r)},{_f(y + 0.75 * r)}"
                f"L{_f(x - r)},{_f(y + 0.75 * r)}Z")
    if shape == "triangle_down":
        return (f"M{_f(x)},{_f(y + 1.15 * r)}L{_f(x + r)},{_f(y - 0.75 * r)}"
                f"L{_f(x - r)},{_f(y - 0.75 * r)}Z")
    if shape == "diamond":
        s = r * 1.2
        return f"M{_f(x)},{_f(y - s)}L{_f(x + s)},{_f(y)}L{_f(x)},{_f(y + s)}L{_f(x - s)},{_f(y)}Z"
    if shape == "cross":
        s = r
        return (f"M{_f(x - s)},{_f(y - s)}L{_f(x + s)},{_f(y + s)}"
                f"M{_f(x - s)},{_f(y + s)}L{_f(x + s)},{_f(y - s)}")
    raise ValueError(f"unknown marker shape {shape!r}")


def _style(i: int) -> tuple[str, bool, str, str]:
    return SERIES_STYLES[i % len(SERIES_STYLES)]


def _mark(i: int, x: float, y: float, key, label: str, flagged: bool) -> str:
    shape, filled, _, colour = _style(i)
    fill = colour if filled and shape != "cross" else "#ffffff"
    if shape == "cross":
        fill = "none"
    cls = "mark flagged" if flagged else "mark"
    ring = ""
    if flagged:
        ring = (f'<circle class="flag-ring" cx="{_f(x)}" cy="{_f(y)}" r="8.5" fill="none" '
                f'stroke="#000" stroke-width="1.3" stroke-dasharray="2.5 1.8"/>')
    return (f'{ring}<path class="{cls}" data-series="{i}" data-key="{esc(key)}" '
            f'd="{marker_path(shape, x, y)}" fill="{fill}" stroke="{colour}" '
            f'stroke-width="1.6"><title>{esc(label)}</title></path>')


def _legend(items: list[tuple[str, str]], x0: float, y0: float, width: float,
            row_h: float = 17.0) -> tuple[str, float]:
    """Lay out (swatch svg at (0, 0), text) items in rows; returns (svg, height)."""
    parts, x, y = [], x0, y0
    for swatch, text in items:
        w = 26 + 6.3 * len(text)
        if x > x0 and x + w > x0 + width:
            x, y = x0, y + row_h
        parts.append(f'<g transform="translate({_f(x)},{_f(y)})">{swatch}'
                     f'<text x="24" y="4" font-size="11">{esc(text)}</text></g>')
        x += w + 10
    return "".join(parts), (y - y0) + row_h if items else 0.0


def _series_swatch(i: int) -> str:
    shape, filled, dash, colour = _style(i)
    fill = "none" if shape == "cross" else (colour if filled else "#ffffff")
    return (f'<line x1="0" y1="0" x2="20" y2="0" stroke="{colour}" stroke-width="1.4" '
            f'stroke-dasharray="{dash}"/><path d="{marker_path(shape, 10, 0, 4)}" '
            f'fill="{fill}" stroke="{colour}" stroke-width="1.5"/>')


FLAG_SWATCH = ('<circle cx="10" cy="0" r="6.5" fill="none" stroke="#000" stroke-width="1.3" '
               'stroke-dasharray="2.5 1.8"/><circle cx="10" cy="0" r="2" fill="#000"/>')


def _line_swatch(dash: str, width: float = 1.5) -> str:
    return (f'<line x1="0" y1="0" x2="20" y2="0" stroke="#000" stroke-width="{width}" '
            f'stroke-dasharray="{dash}"/>')


def _open_svg(width: float, height: float, cls: str, title: str, extra: str = "") -> str:
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="{cls}" role="img" '
            f'viewBox="0 0 {_f(width)} {_f(height)}" preserveAspectRatio="xMidYMin meet" '
            f'font-family="{FONT}" font-size="12"{extra}><title>{esc(title)}</title>')


# --------------------------------------------------------------------------
# trend chart
# --------------------------------------------------------------------------

def _band_rects(bands, y_of, y_top, x0, x1, vertical=False, label_min=12.0):
    """Background bands between data values; returns (rects svg, labels svg)
    so the labels can go above the reference lines. ``y_of`` maps a value to
    a pixel; vertical=True draws them across x instead of y."""
    out, labels = [], []
    for k, b in enumerate(bands):
        lo = max(0.0, float(b["lo"]))
        hi = y_top if b.get("hi") is None else min(float(b["hi"]), y_top)
        if lo >= y_top or hi <= lo:
            continue
        fill = b.get("fill") or BAND_FILLS[min(k, len(BAND_FILLS) - 1)]
        p_lo, p_hi = y_of(lo), y_of(hi)
        data = (f'class="band" data-key="{esc(b.get("key", ""))}" data-lo="{fmt(float(b["lo"]), 6)}" '
                f'data-hi="{"" if b.get("hi") is None else fmt(float(b["hi"]), 6)}"')
        title = f'<title>{esc(b.get("label", ""))}</title>'
        if not vertical:
            top, h = min(p_lo, p_hi), abs(p_lo - p_hi)
            out.append(f'<rect {data} x="{_f(x0)}" y="{_f(top)}" width="{_f(x1 - x0)}" '
                       f'height="{_f(h)}" fill="{fill}">{title}</rect>')
            if h >= label_min and b.get("label"):
                labels.append(f'<text class="band-label" x="{_f(x1 - 4)}" y="{_f(top + 11)}" '
                           f'text-anchor="end" font-size="10" fill="#333" paint-order="stroke" '
                           f'stroke="{fill}" stroke-width="3">{esc(b["label"])}</text>')
        else:
            left, w = min(p_lo, p_hi), abs(p_lo - p_hi)
            out.append(f'<rect {data} x="{_f(left)}" y="{_f(x0)}" width="{_f(w)}" '
                       f'height="{_f(x1 - x0)}" fill="{fill}">{title}</rect>')
            short = b.get("short") or b.get("label") or ""
            if short and w >= 6.2 * len(short) + 4:
                labels.append(f'<text class="band-label" x="{_f(left + w / 2)}" y="{_f(x1 - 4)}" '
                           f'text-anchor="middle" font-size="10" fill="#333">{esc(short)}</text>')
    return "".join(out), "".join(labels)


def _axis_top(values: Sequence[float], lines: Sequence[Mapping], reach: float = 2.0):
    """Top of a value axis and which reference lines fit under it.

    Lines up to ``reach`` × max(data, lowest line) are drawn; higher ones are
    named in the legend as above the chart, so a far 50 % yield line does not
    squash the readings into the bottom of the picture.
    """
    top_data = max([v for v in values if math.isfinite(v)] or [0.0])
    line_vals = sorted(float(l["y"]) for l in lines if l.get("y") is not None
                       and math.isfinite(float(l["y"])))
    ref = max(top_data, line_vals[0] if line_vals else 0.0)
    shown = [l for l in lines if l.get("y") is not None and float(l["y"]) <= reach * ref]
    hidden = [l for l in lines if l.get("y") is not None and float(l["y"]) > reach * ref]
    raw = max([top_data] + [float(l["y"]) for l in shown]) * 1.08
    ticks = nice_ticks(0.0, max(raw, 0.5), 6)
    return ticks, shown, hidden


def trend_svg(spec: Mapping, width: float = 360.0, plot_height: float = 190.0) -> str:
    """A trend chart: value against time, one series per depth or sample kind.

    ``spec`` keys:

    * ``title`` (str), ``y_label`` (str, with its unit)
    * ``series``: list of ``{"name", "points": [{"t", "y", "key", "label",
      "flagged"}]}``; ``t`` an ISO date or date-time. Each point becomes one
      ``path.mark`` carrying ``data-key`` (the reading's id).
    * ``bands`` (optional): ``{"lo", "hi" (None = open), "label", "key"}`` in
      the value's unit, drawn as background.
    * ``lines`` (optional): ``{"y", "label", "key", "dash"}`` horizontal
      reference lines (a crop's threshold, its 90/75/50 % yield ECe, a target).
    * ``highlight`` (optional): a date drawn as a vertical line ("this visit").

    Returns '' when there is no point to draw.
    """
    series = [s for s in spec.get("series", ()) if s.get("points")]
    pts = [(i, p) for i, s in enumerate(series) for p in s["points"]
           if p.get("y") is not None and math.isfinite(float(p["y"]))]
    if not pts:
        return ""
    lines = list(spec.get("lines") or ())
    bands = list(spec.get("bands") or ())
    ticks, shown, hidden = _axis_top([float(p["y"]) for _, p in pts], lines)
    y_top = ticks[-1]

    times = [_day_number(parse_time(p["t"])) for _, p in pts]
    hl = None
    if spec.get("highlight"):
        hl = _day_number(parse_time(spec["highlight"]))
        times_all = times + [hl]
    else:
        times_all = times
    d0, d1 = min(times_all), max(times_all)
    pad = max((d1 - d0) * 0.04, 0.5)
    d0, d1 = d0 - pad, d1 + pad

    ml, mr, mt = 40.0, 8.0, 10.0
    x0, x1 = ml, width - mr
    y_base = mt + plot_height

    def X(d):
        return x0 + (d - d0) / (d1 - d0) * (x1 - x0)

    def Y(v):
        return y_base - v / y_top * plot_height

    body = []
    body.append(f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" '
                f'fill="#ffffff"/>')
    rects, band_labels = _band_rects(bands, Y, y_top, x0, x1)
    body.append(rects)
    # grid and y axis
    for v in ticks:
        y = Y(v)
        body.append(f'<line class="tick" data-value="{fmt(v, 6)}" x1="{_f(x0)}" y1="{_f(y)}" '
                    f'x2="{_f(x1)}" y2="{_f(y)}" stroke="#000" stroke-opacity="0.15"/>')
        body.append(f'<text x="{_f(x0 - 4)}" y="{_f(y + 4)}" text-anchor="end" '
                    f'font-size="11">{fmt(v)}</text>')
    body.append(f'<text x="11" y="{_f(mt + plot_height / 2)}" font-size="11" text-anchor="middle" '
                f'transform="rotate(-90 11 {_f(mt + plot_height / 2)})">{esc(spec.get("y_label", ""))}</text>')
    # time axis
    for d, label in time_ticks(d0, d1):
        x = X(d)
        body.append(f'<line x1="{_f(x)}" y1="{_f(mt)}" x2="{_f(x)}" y2="{_f(y_base + 4)}" '
                    f'stroke="#000" stroke-opacity="0.12"/>')
        body.append(f'<text x="{_f(x)}" y="{_f(y_base + 16)}" text-anchor="middle" '
                    f'font-size="11">{esc(label)}</text>')
    # reference lines
    for k, l in enumerate(shown):
        y = Y(float(l["y"]))
        dash = l.get("dash", LINE_DASHES[k % len(LINE_DASHES)])
        body.append(f'<line class="ref-line" data-key="{esc(l.get("key", ""))}" '
                    f'data-value="{fmt(float(l["y"]), 6)}" x1="{_f(x0)}" y1="{_f(y)}" x2="{_f(x1)}" '
                    f'y2="{_f(y)}" stroke="#000" stroke-width="1.5" stroke-dasharray="{dash}">'
                    f'<title>{esc(l.get("label", ""))}</title></line>')
        if l.get("short"):
            body.append(f'<text x="{_f(x0 + 3)}" y="{_f(y - 3)}" font-size="10" '
                        f'paint-order="stroke" stroke="#fff" stroke-width="3">{esc(l["short"])}</text>')
    body.append(band_labels)
    if hl is not None:
        x = X(hl)
        body.append(f'<line class="highlight" x1="{_f(x)}" y1="{_f(mt)}" x2="{_f(x)}" '
                    f'y2="{_f(y_base)}" stroke="#000" stroke-width="1.2" stroke-dasharray="5 2 1 2"/>')
        right = x > x1 - 60
        body.append(f'<text x="{_f(x - 3 if right else x + 3)}" y="{_f(y_base - 5)}" '
                    f'text-anchor="{"end" if right else "start"}" font-size="10" '
                    f'paint-order="stroke" stroke="#fff" stroke-width="3">this visit</text>')
    # series: line, then marks
    for i, s in enumerate(series):
        sp = sorted(((_day_number(parse_time(p["t"])), float(p["y"]), p) for p in s["points"]
                     if p.get("y") is not None and math.isfinite(float(p["y"]))),
                    key=lambda a: a[0])
        shape, filled, dash, colour = _style(i)
        if len(sp) > 1:
            path = " ".join(f"{_f(X(d))},{_f(Y(v))}" for d, v, _ in sp)
            body.append(f'<polyline class="series-line" points="{path}" fill="none" '
                        f'stroke="{colour}" stroke-width="1.6" stroke-dasharray="{dash}"/>')
        for d, v, p in sp:
            body.append(_mark(i, X(d), Y(v), p.get("key"), p.get("label") or
                              f'{s["name"]}: {fmt(v)}', bool(p.get("flagged"))))
    body.append(f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" '
                f'fill="none" stroke="#000" stroke-width="1"/>')

    items = [(_series_swatch(i), s["name"]) for i, s in enumerate(series)]
    if any(p.get("flagged") for _, p in pts):
        items.append((FLAG_SWATCH, "flag raised"))
    for k, l in enumerate(shown):
        items.append((_line_swatch(l.get("dash", LINE_DASHES[k % len(LINE_DASHES)])),
                      l.get("label", "")))
    for l in hidden:
        items.append(("", f'{l.get("label", "")}: {fmt(float(l["y"]))} (above the chart)'))
    legend, lh = _legend(items, 6.0, y_base + 34, width - 12)
    height = y_base + 28 + lh
    return (_open_svg(width, height, "chart trend", spec.get("title", "trend"),
                      f' data-y-top="{fmt(y_top, 6)}"')
            + "".join(body) + legend + "</svg>")


# --------------------------------------------------------------------------
# depth profile
# --------------------------------------------------------------------------

def profile_svg(spec: Mapping, width: float = 360.0, plot_height: float = 170.0) -> str:
    """A depth profile: value across, depth down, one series per visit.

    ``spec``: ``title``, ``x_label``, ``series`` of ``{"name", "points":
    [{"depth", "x", "key", "label", "flagged"}]}``, optional ``bands``
    (vertical, with an optional ``short`` label) and ``lines`` (vertical
    reference lines). Points without a depth are left out. '' when fewer
    than one point.
    """
    series = []
    for s in spec.get("series", ()):
        p = [q for q in s.get("points", ()) if q.get("depth") is not None and
             q.get("x") is not None and math.isfinite(float(q["x"]))]
        if p:
            series.append({"name": s["name"], "points": p})
    pts = [p for s in series for p in s["points"]]
    if not pts:
        return ""
    lines = list(spec.get("lines") or ())
    ticks, shown, hidden = _axis_top([float(p["x"]) for p in pts], lines)
    x_top = ticks[-1]
    dmax = max(float(p["depth"]) for p in pts)
    dticks = nice_ticks(0.0, max(dmax * 1.12, 10.0), 5)
    d_top = dticks[-1]

    ml, mr, mt = 40.0, 8.0, 22.0
    x0, x1 = ml, width - mr
    y_base = mt + plot_height

    def X(v):
        return x0 + v / x_top * (x1 - x0)

    def Y(d):
        return mt + d / d_top * plot_height

    body = [f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" fill="#fff"/>']
    rects, band_labels = _band_rects(spec.get("bands") or (), X, x_top, mt, y_base, vertical=True)
    body.append(rects)
    for v in ticks:
        x = X(v)
        body.append(f'<line class="tick" data-value="{fmt(v, 6)}" x1="{_f(x)}" y1="{_f(mt)}" '
                    f'x2="{_f(x)}" y2="{_f(y_base)}" stroke="#000" stroke-opacity="0.15"/>')
        body.append(f'<text x="{_f(x)}" y="{_f(mt - 5)}" text-anchor="middle" font-size="11">{fmt(v)}</text>')
    for d in dticks:
        y = Y(d)
        body.append(f'<line x1="{_f(x0)}" y1="{_f(y)}" x2="{_f(x1)}" y2="{_f(y)}" stroke="#000" '
                    f'stroke-opacity="0.12"/>')
        body.append(f'<text x="{_f(x0 - 4)}" y="{_f(y + 4)}" text-anchor="end" font-size="11">{fmt(d)}</text>')
    body.append(f'<text x="11" y="{_f(mt + plot_height / 2)}" font-size="11" text-anchor="middle" '
                f'transform="rotate(-90 11 {_f(mt + plot_height / 2)})">depth, cm</text>')
    body.append(f'<text x="{_f((x0 + x1) / 2)}" y="{_f(y_base + 15)}" font-size="11" '
                f'text-anchor="middle">{esc(spec.get("x_label", ""))}</text>')
    for k, l in enumerate(shown):
        x = X(float(l["y"]))
        dash = l.get("dash", LINE_DASHES[k % len(LINE_DASHES)])
        body.append(f'<line class="ref-line" data-key="{esc(l.get("key", ""))}" '
                    f'data-value="{fmt(float(l["y"]), 6)}" x1="{_f(x)}" y1="{_f(mt)}" x2="{_f(x)}" '
                    f'y2="{_f(y_base)}" stroke="#000" stroke-width="1.5" stroke-dasharray="{dash}">'
                    f'<title>{esc(l.get("label", ""))}</title></line>')
    body.append(band_labels)
    for i, s in enumerate(series):
        sp = sorted(s["points"], key=lambda p: float(p["depth"]))
        shape, filled, dash, colour = _style(i)
        if len(sp) > 1:
            path = " ".join(f"{_f(X(float(p['x'])))},{_f(Y(float(p['depth'])))}" for p in sp)
            body.append(f'<polyline class="series-line" points="{path}" fill="none" '
                        f'stroke="{colour}" stroke-width="1.6" stroke-dasharray="{dash}"/>')
        for p in sp:
            body.append(_mark(i, X(float(p["x"])), Y(float(p["depth"])), p.get("key"),
                              p.get("label") or f'{s["name"]}: {fmt(float(p["x"]))}',
                              bool(p.get("flagged"))))
    body.append(f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" '
                f'fill="none" stroke="#000"/>')
    items = [(_series_swatch(i), s["name"]) for i, s in enumerate(series)]
    if any(p.get("flagged") for p in pts):
        items.append((FLAG_SWATCH, "flag raised"))
    for k, l in enumerate(shown):
        items.append((_line_swatch(l.get("dash", LINE_DASHES[k % len(LINE_DASHES)])),
                      l.get("label", "")))
    for l in hidden:
        items.append(("", f'{l.get("label", "")}: {fmt(float(l["y"]))} (off the chart)'))
    legend, lh = _legend(items, 6.0, y_base + 32, width - 12)
    height = y_base + 26 + lh
    return (_open_svg(width, height, "chart profile", spec.get("title", "depth profile"))
            + "".join(body) + legend + "</svg>")


# --------------------------------------------------------------------------
# map plot
# --------------------------------------------------------------------------

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

    def P(x_km, y_km):
        return cx + x_km * scale, cy - y_km * scale

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
    for i, (s, (x_km, y_km)) in enumerate(zip(pts, xy)):
        x, y = P(x_km, y_km)
        n = s.get("n", i + 1)
        name = str(s.get("name") or "")
        short = name if len(name) <= 22 else name[:21] + "…"
        anchor, dx = ("end", -9) if x > width * 0.62 else ("start", 9)
        label = f"{n} {short}" if len(pts) <= 8 else str(n)
        body.append(f'<g class="site-point" data-n="{esc(n)}"><title>{esc(name)}: '
                    f'{float(s["lat"]):.5f}, {float(s["lon"]):.5f}</title>'
                    f'<circle cx="{_f(x)}" cy="{_f(y)}" r="5.5" fill="#000" stroke="#fff" '
                    f'stroke-width="1.5"/><text x="{_f(x + dx)}" y="{_f(y + 4)}" font-size="13" '
                    f'text-anchor="{anchor}" paint-order="stroke" stroke="#fff" stroke-width="3.5">'
                    f'{esc(label)}</text></g>')
    extra = (f' data-lat0="{lat0:.7f}" data-lon0="{lon0:.7f}" data-cx="{cx:.3f}" '
             f'data-cy="{cy:.3f}" data-px-per-km="{scale:.6f}" data-radius-km="{EARTH_MEAN_RADIUS_KM}"')
    return (_open_svg(width, height, "chart map", "Sites, north up", extra)
            + "".join(body) + "</svg>")


def svg_marks(svg: str) -> int:
    """How many reading marks an SVG from this module holds (for checks)."""
    return svg.count('class="mark') if svg else 0


__all__ = ["trend_svg", "profile_svg", "map_svg", "haversine_km", "distance_matrix",
           "format_distance", "nice_ticks", "time_ticks", "esc", "EARTH_MEAN_RADIUS_KM"]
