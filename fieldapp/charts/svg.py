"""SVG pieces every chart shares: escaping, coordinates, series styles,
markers, legends and the opening tag."""
from __future__ import annotations

import html

from ..fmt import number as fmt   # the one formatter; chart labels use 3 digits

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

def marker_path(shape: str, x: float, y: float, r: float = 4.5) -> str:
    """Path data of a marker of ``shape`` centred on (x, y)."""
    if shape == "circle":
        return (f"M{_f(x - r)},{_f(y)}a{r:g} {r:g} 0 1 0 {2 * r:g} 0"
                f"a{r:g} {r:g} 0 1 0-{2 * r:g} 0Z")
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


def _mark(i: int, x: float, y: float, key, label: str, flagged: bool) -> tuple[str, str]:
    """One reading's marker, and its dashed ring when flagged (else ''). The
    paint of both comes from the groups :func:`marks_group` puts them in: a
    long series repeats no paint attributes per mark."""
    shape = _style(i)[0]
    cls = "mark flagged" if flagged else "mark"
    ring = f'<circle class="flag-ring" cx="{_f(x)}" cy="{_f(y)}" r="8.5"/>' if flagged else ""
    return ring, (f'<path class="{cls}" data-key="{esc(key)}" '
                  f'd="{marker_path(shape, x, y)}"><title>{esc(label)}</title></path>')


#: The paint of every flag ring (a dashed black circle around the mark).
RING_PAINT = 'fill="none" stroke="#000" stroke-width="1.3" stroke-dasharray="2.5 1.8"'


def marks_group(i: int, marks: list[tuple[str, str]], more: list[tuple[float, float]] = (),
                ref: str = "") -> str:
    """The markers of series ``i`` (pairs from :func:`_mark`) in one group that
    names the series (``data-series``) and paints them: filled or white with the series colour as outline (a cross
    is a stroke only), so a chart printed in black and white still tells the
    series apart; their flag rings in a group of their own, behind them.

    ``more``: flagged points drawn without a label of their own (``(x, y)``
    pixels, see :func:`flagged_more`), each one ``<use>`` of a ring and a mark
    defined once as ``ref``, in a group of class ``flagged-more``."""
    shape, filled, _, colour = _style(i)
    fill = "none" if shape == "cross" else colour if filled else "#ffffff"
    paint = f'data-series="{i}" fill="{fill}" stroke="{colour}" stroke-width="1.6"'
    rings = "".join(r for r, _ in marks)
    return ((f'<g class="flag-rings" {RING_PAINT}>{rings}</g>' if rings else "")
            + (flagged_more(shape, more, ref, paint) if more else "")
            + f'<g class="series-marks" {paint}>' + "".join(m for _, m in marks) + "</g>")


def flagged_more(shape: str, points: list[tuple[float, float]], ref: str, paint: str) -> str:
    """Flagged marks beyond the labelled ones: the ring and the marker are
    defined once (``<defs>``, id ``ref``) and each point is one ``<use>`` at
    whole pixels (a 9 px marker on a 360 px chart; half a pixel does not show),
    about 30 bytes a point instead of some 280 for a mark, a ring and a label.
    Points on the same whole pixel are drawn once (a second copy would look
    the same); the group says how many readings it stands for (``data-n``)."""
    at = dict.fromkeys((f"{x:.0f}", f"{y:.0f}") for x, y in points)
    uses = "".join(f'<use href="#{ref}" x="{x}" y="{y}"/>' for x, y in at)
    return (f'<defs><g id="{ref}"><circle r="8.5" {RING_PAINT}/>'
            f'<path d="{marker_path(shape, 0, 0)}"/></g></defs>'
            f'<g class="flagged-more" data-n="{len(points)}" {paint}>{uses}</g>')


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


def _legend_items(series, flagged: bool, shown, hidden, where: str) -> list[tuple[str, str]]:
    """Legend entries: each series, the flag ring if any mark carries it, the
    reference lines drawn, and the lines too high to draw (``where`` says so)."""
    items = [(_series_swatch(i), s["name"]) for i, s in enumerate(series)]
    if flagged:
        items.append((FLAG_SWATCH, "flag raised"))
    for k, l in enumerate(shown):
        items.append((_line_swatch(l.get("dash", LINE_DASHES[k % len(LINE_DASHES)])),
                      l.get("label", "")))
    for l in hidden:
        items.append(("", f'{l.get("label", "")}: {fmt(float(l["y"]))} ({where})'))
    return items
