"""Scales, ticks and background bands: value axes, time axes, class bands."""
from __future__ import annotations

import datetime as dt
import math
from typing import Mapping, Sequence

from ..fmt import number as fmt   # data-value attributes carry 6 digits
from .svg import BAND_FILLS, _f, esc


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
