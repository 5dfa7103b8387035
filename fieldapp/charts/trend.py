"""The trend chart: value against time, one series per depth or sample kind.

:func:`trend_svg` reads these keys of its ``spec``:

* ``title`` (str), ``y_label`` (str, with its unit)
* ``series``: list of ``{"name", "points": [{"t", "y", "key", "label",
  "flagged"}]}``; ``t`` an ISO date or date-time. Each point becomes one
  ``path.mark`` carrying ``data-key`` (the reading's id).
* ``bands`` (optional): ``{"lo", "hi" (None = open), "label", "key"}`` in
  the value's unit, drawn as background.
* ``lines`` (optional): ``{"y", "label", "key", "dash"}`` horizontal
  reference lines (a crop's threshold, its 90/75/50 % yield ECe, a target).
* ``highlight`` (optional): a date drawn as a vertical line ("this visit").
* ``label_flagged`` (optional): how many flagged points keep a mark with
  its ``data-key`` and label (the latest, :func:`latest_flagged`); the
  others are drawn as ring and mark only (``g.flagged-more``), so a long
  series of unit slips stays a small picture. Default: all of them.
* ``flagged_picked`` (optional): those latest points as
  :func:`latest_flagged` gave them for ``label_flagged``, where the caller
  has picked them already (to list them beside the chart).
* ``ref`` (optional): prefix of the ids of the chart's ``<defs>``, unique
  in the page (default ``fm-`` and the spec's ``id``).
"""
from __future__ import annotations

import math
from typing import Mapping

from ..fmt import number as fmt   # chart labels 3 digits, data-value attributes 6
from .axes import _axis_top, _band_rects, _day_number, parse_time, time_ticks
from .svg import LINE_DASHES, _f, _legend, _legend_items, _mark, _open_svg, marks_group, _style, esc


def _time_span(pts, highlight):
    """Day numbers (d0, d1) covering the points and the highlight, padded, and
    the highlight's day number (None without one)."""
    times = [_day_number(parse_time(p["t"])) for _, p in pts]
    hl = None
    if highlight:
        hl = _day_number(parse_time(highlight))
        times_all = times + [hl]
    else:
        times_all = times
    d0, d1 = min(times_all), max(times_all)
    pad = max((d1 - d0) * 0.04, 0.5)
    return d0 - pad, d1 + pad, hl


def _value_axis(ticks, Y, box, y_label: str, plot_height: float) -> list[str]:
    """Horizontal grid lines with their values, and the axis name."""
    x0, x1, mt, _ = box
    body = []
    for v in ticks:
        y = Y(v)
        body.append(f'<line class="tick" data-value="{fmt(v, 6)}" x1="{_f(x0)}" y1="{_f(y)}" '
                    f'x2="{_f(x1)}" y2="{_f(y)}" stroke="#000" stroke-opacity="0.15"/>')
        body.append(f'<text x="{_f(x0 - 4)}" y="{_f(y + 4)}" text-anchor="end" '
                    f'font-size="11">{fmt(v)}</text>')
    body.append(f'<text x="11" y="{_f(mt + plot_height / 2)}" font-size="11" text-anchor="middle" '
                f'transform="rotate(-90 11 {_f(mt + plot_height / 2)})">{esc(y_label)}</text>')
    return body


def _time_axis(d0: float, d1: float, X, box) -> list[str]:
    """Vertical grid lines at the time ticks, with their dates."""
    _, _, mt, y_base = box
    body = []
    for d, label in time_ticks(d0, d1):
        x = X(d)
        body.append(f'<line x1="{_f(x)}" y1="{_f(mt)}" x2="{_f(x)}" y2="{_f(y_base + 4)}" '
                    f'stroke="#000" stroke-opacity="0.12"/>')
        body.append(f'<text x="{_f(x)}" y="{_f(y_base + 16)}" text-anchor="middle" '
                    f'font-size="11">{esc(label)}</text>')
    return body


def _reference_lines(shown, Y, box) -> list[str]:
    """Horizontal reference lines (threshold, yield ECe, target) with short names."""
    x0, x1, _, _ = box
    body = []
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
    return body


def _highlight(x: float, box) -> list[str]:
    """The "this visit" line at pixel x."""
    _, x1, mt, y_base = box
    right = x > x1 - 60
    return [f'<line class="highlight" x1="{_f(x)}" y1="{_f(mt)}" x2="{_f(x)}" '
            f'y2="{_f(y_base)}" stroke="#000" stroke-width="1.2" stroke-dasharray="5 2 1 2"/>',
            f'<text x="{_f(x - 3 if right else x + 3)}" y="{_f(y_base - 5)}" '
            f'text-anchor="{"end" if right else "start"}" font-size="10" '
            f'paint-order="stroke" stroke="#fff" stroke-width="3">this visit</text>']


def latest_flagged(series, most: int | None) -> list[tuple[int, dict]]:
    """The flagged points that keep a mark and label of their own: the latest
    ``most`` by time over all ``series`` (all of them when ``most`` is None), as
    (series index, point), oldest first."""
    pts = [(str(p["t"]), i, p) for i, s in enumerate(series) for p in s["points"]
           if p.get("flagged") and p.get("y") is not None and math.isfinite(float(p["y"]))]
    pts.sort(key=lambda a: a[0])
    if most is not None:
        pts = pts[-most:] if most > 0 else []
    return [(i, p) for _, i, p in pts]


def _labelled(spec: Mapping, series) -> set | None:
    """Ids of the flagged points drawn with a label (``label_flagged``, the
    caller's ``flagged_picked`` where given); None: every one."""
    most = spec.get("label_flagged")
    if most is None:
        return None
    picked = spec.get("flagged_picked")
    return {id(p) for _, p in (latest_flagged(series, most) if picked is None else picked)}


def _series(series, X, Y, labelled=None, ref: str = "f") -> list[str]:
    """Each series: its line in time order, then its marks. ``labelled``: ids
    of the flagged points drawn with a label (None: every one); the other
    flagged points are drawn as ring and mark alone (:func:`svg.flagged_more`)."""
    body = []
    for i, s in enumerate(series):
        sp = sorted(((_day_number(parse_time(p["t"])), float(p["y"]), p) for p in s["points"]
                     if p.get("y") is not None and math.isfinite(float(p["y"]))),
                    key=lambda a: a[0])
        shape, filled, dash, colour = _style(i)
        if len(sp) > 1:
            path = " ".join(f"{_f(X(d))},{_f(Y(v))}" for d, v, _ in sp)
            body.append(f'<polyline class="series-line" points="{path}" fill="none" '
                        f'stroke="{colour}" stroke-width="1.6" stroke-dasharray="{dash}"/>')
        bare = [labelled is not None and bool(p.get("flagged")) and id(p) not in labelled
                for _, _, p in sp]
        more = [(X(d), Y(v)) for (d, v, _), b in zip(sp, bare) if b]
        marks = [_mark(i, X(d), Y(v), p.get("key"), p.get("label") or f'{s["name"]}: {fmt(v)}',
                       bool(p.get("flagged"))) for (d, v, p), b in zip(sp, bare) if not b]
        body.append(marks_group(i, marks, more, f"{ref}{i}"))
    return body


def trend_svg(spec: Mapping, width: float = 360.0, plot_height: float = 190.0) -> str:
    """A trend chart of ``spec`` (its keys: the module's docstring). Returns
    '' when there is no point to draw.
    """
    series = [s for s in spec.get("series", ()) if s.get("points")]
    pts = [(i, p) for i, s in enumerate(series) for p in s["points"]
           if p.get("y") is not None and math.isfinite(float(p["y"]))]
    if not pts:
        return ""
    lines = list(spec.get("lines") or ())
    ticks, shown, hidden = _axis_top([float(p["y"]) for _, p in pts], lines)
    y_top = ticks[-1]
    d0, d1, hl = _time_span(pts, spec.get("highlight"))
    ml, mr, mt = 40.0, 8.0, 10.0
    x0, x1 = ml, width - mr
    y_base = mt + plot_height
    box = (x0, x1, mt, y_base)

    def X(d):
        return x0 + (d - d0) / (d1 - d0) * (x1 - x0)

    def Y(v):
        return y_base - v / y_top * plot_height

    body = [f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" '
            f'fill="#ffffff"/>']
    rects, band_labels = _band_rects(list(spec.get("bands") or ()), Y, y_top, x0, x1)
    body.append(rects)
    body += _value_axis(ticks, Y, box, spec.get("y_label", ""), plot_height)
    body += _time_axis(d0, d1, X, box)
    body += _reference_lines(shown, Y, box)
    body.append(band_labels)
    if hl is not None:
        body += _highlight(X(hl), box)
    body += _series(series, X, Y, _labelled(spec, series),
                    spec.get("ref") or f'fm-{spec.get("id", "c")}-')
    body.append(f'<rect x="{_f(x0)}" y="{_f(mt)}" width="{_f(x1 - x0)}" height="{_f(plot_height)}" '
                f'fill="none" stroke="#000" stroke-width="1"/>')
    items = _legend_items(series, any(p.get("flagged") for _, p in pts), shown, hidden,
                          "above the chart")
    legend, lh = _legend(items, 6.0, y_base + 34, width - 12)
    height = y_base + 28 + lh
    return (_open_svg(width, height, "chart trend", spec.get("title", "trend"),
                      f' data-y-top="{fmt(y_top, 6)}"')
            + "".join(body) + legend + "</svg>")
