"""The depth profile: value across, depth down, one series per visit."""
from __future__ import annotations

import math
from typing import Mapping

from ..fmt import number as fmt   # chart labels 3 digits, data-value attributes 6
from .axes import _axis_top, _band_rects, nice_ticks
from .svg import LINE_DASHES, _f, _legend, _legend_items, _mark, _open_svg, marks_group, _style, esc


def _profile_series(spec: Mapping) -> list[dict]:
    """The series with their drawable points (a depth and a finite value)."""
    series = []
    for s in spec.get("series", ()):
        p = [q for q in s.get("points", ()) if q.get("depth") is not None and
             q.get("x") is not None and math.isfinite(float(q["x"]))]
        if p:
            series.append({"name": s["name"], "points": p})
    return series


def _axes(ticks, dticks, X, Y, box, x_label: str, plot_height: float) -> list[str]:
    """Value ticks along the top, depth ticks down the side, both axis names."""
    x0, x1, mt, y_base = box
    body = []
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
                f'text-anchor="middle">{esc(x_label)}</text>')
    return body


def _reference_lines(shown, X, box) -> list[str]:
    """Vertical reference lines."""
    _, _, mt, y_base = box
    body = []
    for k, l in enumerate(shown):
        x = X(float(l["y"]))
        dash = l.get("dash", LINE_DASHES[k % len(LINE_DASHES)])
        body.append(f'<line class="ref-line" data-key="{esc(l.get("key", ""))}" '
                    f'data-value="{fmt(float(l["y"]), 6)}" x1="{_f(x)}" y1="{_f(mt)}" x2="{_f(x)}" '
                    f'y2="{_f(y_base)}" stroke="#000" stroke-width="1.5" stroke-dasharray="{dash}">'
                    f'<title>{esc(l.get("label", ""))}</title></line>')
    return body


def _series(series, X, Y) -> list[str]:
    """Each visit: its line from the top down, then its marks."""
    body = []
    for i, s in enumerate(series):
        sp = sorted(s["points"], key=lambda p: float(p["depth"]))
        shape, filled, dash, colour = _style(i)
        if len(sp) > 1:
            path = " ".join(f"{_f(X(float(p['x'])))},{_f(Y(float(p['depth'])))}" for p in sp)
            body.append(f'<polyline class="series-line" points="{path}" fill="none" '
                        f'stroke="{colour}" stroke-width="1.6" stroke-dasharray="{dash}"/>')
        body.append(marks_group(i, [_mark(i, X(float(p["x"])), Y(float(p["depth"])), p.get("key"),
                                          p.get("label") or f'{s["name"]}: {fmt(float(p["x"]))}',
                                          bool(p.get("flagged"))) for p in sp]))
    return body


def profile_svg(spec: Mapping, width: float = 360.0, plot_height: float = 170.0) -> str:
    """A depth profile: value across, depth down, one series per visit.

    ``spec``: ``title``, ``x_label``, ``series`` of ``{"name", "points":
    [{"depth", "x", "key", "label", "flagged"}]}``, optional ``bands``
    (vertical, with an optional ``short`` label) and ``lines`` (vertical
    reference lines). Points without a depth are left out. '' when fewer
    than one point.
    """
    series = _profile_series(spec)
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
    box = (x0, x1, mt, y_base)

    def X(v):
        return x0 + v / x_top * (x1 - x0)

    def Y(d):
        return mt + d / d_top * plot_height

    body = [f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" fill="#fff"/>']
    rects, band_labels = _band_rects(spec.get("bands") or (), X, x_top, mt, y_base, vertical=True)
    body.append(rects)
    body += _axes(ticks, dticks, X, Y, box, spec.get("x_label", ""), plot_height)
    body += _reference_lines(shown, X, box)
    body.append(band_labels)
    body += _series(series, X, Y)
    body.append(f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" '
                f'fill="none" stroke="#000"/>')
    items = _legend_items(series, any(p.get("flagged") for p in pts), shown, hidden,
                          "off the chart")
    legend, lh = _legend(items, 6.0, y_base + 32, width - 12)
    height = y_base + 26 + lh
    return (_open_svg(width, height, "chart profile", spec.get("title", "depth profile"))
            + "".join(body) + legend + "</svg>")
