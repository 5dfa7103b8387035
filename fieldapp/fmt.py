"""The one number formatter: a float as text for a page, a CSV cell, the
terminal or a chart label.

Every output calls :func:`number`; they differ only in its parameters:

==========================================  =================================
where                                       call
==========================================  =================================
pages (Jinja filter ``num``), site texts     ``number(x, 4)`` / ``number(x)``
CLI tables (``cli.output.num``)              ``number(x, 4)``
CLI ``convert`` lines                        ``number(x, 3 or 4, unit="dS/m")``
chart labels / ``data-value`` attributes     ``number(x)`` / ``number(x, 6)``
convert-csv computed columns                 ``number(x, 6, missing="")``
CSV export and import messages               ``number(x, None, missing="")``
                                             (``csvio.plain_number``)
==========================================  =================================

Never an exponent ("1e-05" means nothing to a scout and a spreadsheet may
read it as text): where ``%g`` would use one, the same significant digits are
written in plain decimals, and an integer part is never rounded into zeros.
``digits=None`` keeps every digit of the shortest text that reads back as the
same float (the CSV export, so an import gives back exactly what was stored).

>>> number(0.000012345), number(1234567.0), number(2.0), number(None)
('0.0000123', '1234567', '2', '—')
>>> number(1e-05, None, missing=""), number(float("nan"), missing=""), number(1.25, 4, unit="dS/m")
('0.00001', '', '1.25 dS/m')
"""
from __future__ import annotations

import math


def number(x, digits: int | None = 3, *, missing: str = "—", unit: str | None = None) -> str:
    """``x`` in plain decimal notation with ``digits`` significant digits.

    Parameters
    ----------
    x : float, int or None
        Anything ``float()`` takes; a text that is not a number raises
        ValueError (the page filter shows such a value as it is).
    digits : int or None
        Significant digits (trailing zeros dropped); None for every digit of
        the shortest exact representation.
    missing : str
        Shown for None, NaN and infinity (no unit then).
    unit : str, optional
        Appended after a space when there is a number.
    """
    if x is None:
        return missing
    x = float(x)
    if not math.isfinite(x):
        return missing
    s = _exact(x) if digits is None else _significant(x, digits)
    return f"{s} {unit}" if unit else s


def _significant(x: float, digits: int) -> str:
    if x == 0:
        return "0"
    s = f"{x:.{digits}g}"
    if "e" in s:
        decimals = max(0, digits - 1 - math.floor(math.log10(abs(x))))
        s = f"{x:.{decimals}f}"
        if "." in s:
            s = s.rstrip("0").rstrip(".")
    return s


def _exact(x: float) -> str:
    s = repr(x)
    if "e" in s or "E" in s:
        s = f"{x:.20f}".rstrip("0").rstrip(".")
        if float(s) != x:  # very small numbers: keep every significant digit
            s = format(x, ".40f").rstrip("0").rstrip(".")
    if s.endswith(".0"):
        s = s[:-2]
    return "0" if s == "-0" else s
