"""The pairing QR code: the symbol from ``segno`` (ISO/IEC 18004, a well-kept
pure-Python package), drawn here as SVG for the page and as text for the
laptop's terminal, so the laptop can show the pairing address without any
network. The tests decode the symbols with an independent reader (zxing-cpp,
a test-only dependency).

    >>> m = encode("http://192.0.2.10:8080/pair#ABCD-EFGH")
    >>> svg = to_svg(m)
"""
from __future__ import annotations

from html import escape

__all__ = ["encode", "to_svg", "to_text", "QRError"]

_LEVELS = ("L", "M", "Q", "H")


class QRError(ValueError):
    """The text does not fit in a QR code, or the request makes no sense."""


def _capacity(ver: int, ecl: str) -> int:
    """Bytes a version-``ver`` symbol holds in byte mode at level ``ecl``:
    its data bits (ISO/IEC 18004 Table 7, as segno ships it) less the mode
    indicator (4 bits) and the character count (8 bits up to version 9, 16
    from version 10)."""
    from segno import consts
    bits = consts.SYMBOL_CAPACITY[ver][consts.ERROR_MAPPING[ecl.upper()]]
    return (bits - 4 - (8 if ver < 10 else 16)) // 8


def encode(text: str | bytes, ecl: str = "M", mask: int | None = None) -> list[list[bool]]:
    """The module matrix (True = dark), rows top to bottom, of the smallest
    symbol holding ``text`` (UTF-8) in byte mode at error-correction level
    ``ecl``.

    ``mask`` forces one of the eight masks (tests); by default segno chooses
    the mask with the lowest penalty, as the standard asks."""
    import segno
    ecl = str(ecl).upper()
    if ecl not in _LEVELS:
        raise QRError("error-correction level must be L, M, Q or H")
    data = text.encode("utf-8") if isinstance(text, str) else bytes(text)
    try:
        symbol = segno.make_qr(data, error=ecl, mode="byte", mask=mask, boost_error=False)
    except segno.DataOverflowError:
        raise QRError(f"{len(data)} bytes do not fit in a QR code at level {ecl}") from None
    except ValueError as e:          # a mask outside 0-7
        raise QRError(str(e)) from None
    return [[bool(v) for v in row] for row in symbol.matrix]


def to_svg(matrix: list[list[bool]], border: int = 4, label: str = "QR code",
           px: int | None = None) -> str:
    """An SVG drawing of the matrix: one path, a white quiet zone of
    ``border`` modules, scalable (viewBox; ``px`` sets a width and height).
    ``label`` is escaped and used as the accessible name."""
    n = len(matrix)
    size = n + 2 * border
    parts = []
    for y, row in enumerate(matrix):
        x = 0
        while x < n:
            if row[x]:
                start = x
                while x < n and row[x]:
                    x += 1
                parts.append(f"M{start + border},{y + border}h{x - start}v1h{start - x}z")
            else:
                x += 1
    dims = f'width="{int(px)}" height="{int(px)}" ' if px else ""
    return (f'<svg xmlns="http://www.w3.org/2000/svg" {dims}viewBox="0 0 {size} {size}" '
            f'shape-rendering="crispEdges" role="img" aria-label="{escape(label)}">'
            f'<rect width="{size}" height="{size}" fill="#fff"/>'
            f'<path fill="#000" d="{"".join(parts)}"/></svg>')


def to_text(matrix: list[list[bool]], border: int = 2, ansi: bool = True) -> str:
    """The matrix for a terminal, two module rows per text line with half
    blocks. With ``ansi`` the colours are forced to black on white, so the
    code scans on dark and light terminals alike."""
    n = len(matrix)
    size = n + 2 * border

    def dark(x, y):
        x, y = x - border, y - border
        return 0 <= x < n and 0 <= y < n and matrix[y][x]

    lines = []
    for y in range(0, size, 2):
        chars = []
        for x in range(size):
            top, bottom = dark(x, y), dark(x, y + 1) if y + 1 < size else False
            chars.append(" ▄▀█"[top * 2 + bottom] if ansi else "█▀▄ "[top * 2 + bottom])
        line = "".join(chars)
        lines.append(f"\x1b[30;47m{line}\x1b[0m" if ansi else line)
    return "\n".join(lines)
