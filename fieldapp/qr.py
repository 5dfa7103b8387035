"""A small QR code encoder (byte mode, versions 1-40, levels L/M/Q/H) that
draws SVG and terminal text, so the laptop can show the pairing address
without any extra package or network.

The symbol follows ISO/IEC 18004 (QR Code bar code symbology): byte-mode
segment, Reed-Solomon error correction over GF(2^8) with the polynomial
x^8 + x^4 + x^3 + x^2 + 1 (0x11D), block interleaving, the eight data masks
and the mask penalty rules N1-N4, and the BCH-coded format and version
information. The table of error-correction codewords and blocks per version
is the standard's Table 9, written here from memory; the tests check every
version and level by decoding the symbols with an independent reader
(zxing-cpp, a test-only dependency).

    >>> m = encode("http://192.0.2.10:8080/pair#ABCD-EFGH")
    >>> svg = to_svg(m)
"""
from __future__ import annotations

from html import escape

__all__ = ["encode", "to_svg", "to_text", "QRError"]

# Error-correction codewords per block and number of blocks, index = version
# (ISO/IEC 18004 Table 9; from memory, verified by decoding in the tests).
_ECC_PER_BLOCK = {
    "L": (-1, 7, 10, 15, 20, 26, 18, 20, 24, 30, 18, 20, 24, 26, 30, 22, 24, 28, 30, 28, 28,
          28, 28, 30, 30, 26, 28, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30),
    "M": (-1, 10, 16, 26, 18, 24, 16, 18, 22, 22, 26, 30, 22, 22, 24, 24, 28, 28, 26, 26, 26,
          26, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28, 28),
    "Q": (-1, 13, 22, 18, 26, 18, 24, 18, 22, 20, 24, 28, 26, 24, 20, 30, 24, 28, 28, 26, 30,
          28, 30, 30, 30, 30, 28, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30),
    "H": (-1, 17, 28, 22, 16, 22, 28, 26, 26, 24, 28, 24, 28, 22, 24, 24, 30, 28, 28, 26, 28,
          30, 24, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30, 30),
}
_NUM_BLOCKS = {
    "L": (-1, 1, 1, 1, 1, 1, 2, 2, 2, 2, 4, 4, 4, 4, 4, 6, 6, 6, 6, 7, 8, 8, 9, 9, 10, 12, 12,
          12, 13, 14, 15, 16, 17, 18, 19, 19, 20, 21, 22, 24, 25),
    "M": (-1, 1, 1, 1, 2, 2, 4, 4, 4, 5, 5, 5, 8, 9, 9, 10, 10, 11, 13, 14, 16, 17, 17, 18, 20,
          21, 23, 25, 26, 28, 29, 31, 33, 35, 37, 38, 40, 43, 45, 47, 49),
    "Q": (-1, 1, 1, 2, 2, 4, 4, 6, 6, 8, 8, 8, 10, 12, 16, 12, 17, 16, 18, 21, 20, 23, 23, 25,
          27, 29, 34, 34, 35, 38, 40, 43, 45, 48, 51, 53, 56, 59, 62, 65, 68),
    "H": (-1, 1, 1, 2, 4, 4, 4, 5, 6, 8, 8, 11, 11, 16, 16, 18, 16, 19, 21, 25, 25, 25, 34, 30,
          32, 35, 37, 40, 42, 45, 48, 51, 54, 57, 60, 63, 66, 70, 74, 77, 81),
}
#: The two format bits of each error-correction level (ISO/IEC 18004 Table 12).
_ECL_BITS = {"L": 1, "M": 0, "Q": 3, "H": 2}

_MASKS = (
    lambda x, y: (x + y) % 2 == 0,
    lambda x, y: y % 2 == 0,
    lambda x, y: x % 3 == 0,
    lambda x, y: (x + y) % 3 == 0,
    lambda x, y: (x // 3 + y // 2) % 2 == 0,
    lambda x, y: x * y % 2 + x * y % 3 == 0,
    lambda x, y: (x * y % 2 + x * y % 3) % 2 == 0,
    lambda x, y: ((x + y) % 2 + x * y % 3) % 2 == 0,
)


class QRError(ValueError):
    """The text does not fit in a QR symbol at the requested level."""


# ------------------------------------------------------------ Reed-Solomon

def _gf_mul(x: int, y: int) -> int:
    """Product in GF(2^8) modulo 0x11D (Russian peasant multiplication)."""
    z = 0
    for i in range(7, -1, -1):
        z = (z << 1) ^ ((z >> 7) * 0x11D)
        z ^= ((y >> i) & 1) * x
    return z


def _rs_divisor(degree: int) -> list[int]:
    """Coefficients of prod_{i<degree} (x - a^i), highest power first, the
    leading 1 dropped; a = 0x02."""
    result = [0] * (degree - 1) + [1]
    root = 1
    for _ in range(degree):
        for j in range(degree):
            result[j] = _gf_mul(result[j], root)
            if j + 1 < degree:
                result[j] ^= result[j + 1]
        root = _gf_mul(root, 0x02)
    return result


def _rs_remainder(data: list[int], divisor: list[int]) -> list[int]:
    result = [0] * len(divisor)
    for b in data:
        factor = b ^ result.pop(0)
        result.append(0)
        for i, coef in enumerate(divisor):
            result[i] ^= _gf_mul(coef, factor)
    return result


# ------------------------------------------------------------ capacities

def _raw_data_modules(ver: int) -> int:
    """Modules left for data and ECC after the function patterns."""
    result = (16 * ver + 128) * ver + 64
    if ver >= 2:
        numalign = ver // 7 + 2
        result -= (25 * numalign - 10) * numalign - 55
        if ver >= 7:
            result -= 36
    return result


def _data_codewords(ver: int, ecl: str) -> int:
    return _raw_data_modules(ver) // 8 - _ECC_PER_BLOCK[ecl][ver] * _NUM_BLOCKS[ecl][ver]


def _alignment_positions(ver: int) -> list[int]:
    if ver == 1:
        return []
    numalign = ver // 7 + 2
    step = (ver * 8 + numalign * 3 + 5) // (numalign * 4 - 4) * 2
    size = ver * 4 + 17
    return [6] + sorted(size - 7 - i * step for i in range(numalign - 1))


# ------------------------------------------------------------ the symbol

class _Symbol:
    def __init__(self, ver: int):
        self.ver = ver
        self.size = ver * 4 + 17
        self.m = [[False] * self.size for _ in range(self.size)]
        self.fn = [[False] * self.size for _ in range(self.size)]

    def set_fn(self, x: int, y: int, dark: bool) -> None:
        self.m[y][x] = dark
        self.fn[y][x] = True

    def draw_function_patterns(self) -> None:
        n = self.size
        for i in range(n):                        # timing patterns
            self.set_fn(6, i, i % 2 == 0)
            self.set_fn(i, 6, i % 2 == 0)
        for cx, cy in ((3, 3), (n - 4, 3), (3, n - 4)):   # finders with separators
            for dy in range(-4, 5):
                for dx in range(-4, 5):
                    x, y = cx + dx, cy + dy
                    if 0 <= x < n and 0 <= y < n:
                        self.set_fn(x, y, max(abs(dx), abs(dy)) not in (2, 4))
        pos = _alignment_positions(self.ver)
        last = len(pos) - 1
        for i, ax in enumerate(pos):
            for j, ay in enumerate(pos):
                if (i, j) in ((0, 0), (0, last), (last, 0)):
                    continue
                for dy in range(-2, 3):
                    for dx in range(-2, 3):
                        self.set_fn(ax + dx, ay + dy, max(abs(dx), abs(dy)) != 1)
        self.draw_format_bits("M", 0)              # reserve; redrawn with the real mask
        self.draw_version_bits()

    def draw_format_bits(self, ecl: str, mask: int) -> None:
        data = _ECL_BITS[ecl] << 3 | mask
        rem = data
        for _ in range(10):
            rem = (rem << 1) ^ ((rem >> 9) * 0x537)
        bits = (data << 10 | rem) ^ 0x5412
        bit = lambda i: (bits >> i) & 1 == 1     # noqa: E731
        n = self.size
        for i in range(6):
            self.set_fn(8, i, bit(i))
        self.set_fn(8, 7, bit(6))
        self.set_fn(8, 8, bit(7))
        self.set_fn(7, 8, bit(8))
        for i in range(9, 15):
            self.set_fn(14 - i, 8, bit(i))
        for i in range(8):
            self.set_fn(n - 1 - i, 8, bit(i))
        for i in range(8, 15):
            self.set_fn(8, n - 15 + i, bit(i))
        self.set_fn(8, n - 8, True)                # the dark module

    def draw_version_bits(self) -> None:
        if self.ver < 7:
            return
        rem = self.ver
        for _ in range(12):
            rem = (rem << 1) ^ ((rem >> 11) * 0x1F25)
        bits = self.ver << 12 | rem
        for i in range(18):
            dark = (bits >> i) & 1 == 1
            a, b = self.size - 11 + i % 3, i // 3
            self.set_fn(a, b, dark)
            self.set_fn(b, a, dark)

    def draw_codewords(self, data: list[int]) -> None:
        n = self.size
        i = 0
        right = n - 1
        while right >= 1:
            if right == 6:
                right = 5
            upward = ((right + 1) & 2) == 0
            for vert in range(n):
                y = n - 1 - vert if upward else vert
                for j in range(2):
                    x = right - j
                    if not self.fn[y][x] and i < len(data) * 8:
                        self.m[y][x] = (data[i >> 3] >> (7 - (i & 7))) & 1 == 1
                        i += 1
            right -= 2

    def apply_mask(self, mask: int) -> None:
        f = _MASKS[mask]
        for y in range(self.size):
            row, fnrow = self.m[y], self.fn[y]
            for x in range(self.size):
                if not fnrow[x] and f(x, y):
                    row[x] = not row[x]

    def penalty(self) -> int:
        """Mask penalty of ISO/IEC 18004 section 7.8.3 (N1=3, N2=3, N3=40, N4=10)."""
        n, m = self.size, self.m
        score = 0
        lines = [m[y] for y in range(n)] + [[m[y][x] for y in range(n)] for x in range(n)]
        finder = (True, False, True, True, True, False, True)
        for line in lines:
            run_color, run = None, 0
            for c in line:                                       # N1: runs of 5+
                if c == run_color:
                    run += 1
                else:
                    if run >= 5:
                        score += 3 + run - 5
                    run_color, run = c, 1
            if run >= 5:
                score += 3 + run - 5
            padded = (False,) * 4 + tuple(line) + (False,) * 4   # N3: 1:1:3:1:1
            for k in range(len(padded) - 6):
                if tuple(padded[k:k + 7]) == finder:
                    before = padded[max(0, k - 4):k]
                    after = padded[k + 7:k + 11]
                    if (len(before) == 4 and not any(before)) or \
                            (len(after) == 4 and not any(after)):
                        score += 40
        for y in range(n - 1):                                   # N2: 2x2 blocks
            for x in range(n - 1):
                c = m[y][x]
                if c == m[y][x + 1] == m[y + 1][x] == m[y + 1][x + 1]:
                    score += 3
        dark = sum(sum(row) for row in m)                        # N4: balance
        total = n * n
        k = (abs(dark * 20 - total * 10) + total - 1) // total - 1
        return score + max(0, k) * 10


def _bits_to_codewords(data: bytes, ver: int, ecl: str) -> list[int]:
    cap = _data_codewords(ver, ecl)
    bits: list[int] = []

    def put(value: int, length: int) -> None:
        bits.extend((value >> i) & 1 for i in range(length - 1, -1, -1))

    put(0b0100, 4)                                   # byte mode
    put(len(data), 8 if ver <= 9 else 16)
    for b in data:
        put(b, 8)
    put(0, min(4, cap * 8 - len(bits)))              # terminator
    put(0, (-len(bits)) % 8)
    words = [int("".join(map(str, bits[i:i + 8])), 2) for i in range(0, len(bits), 8)]
    pad = (0xEC, 0x11)
    while len(words) < cap:
        words.append(pad[(len(words) - len(bits) // 8) % 2])
    return words


def _interleave(words: list[int], ver: int, ecl: str) -> list[int]:
    numblocks = _NUM_BLOCKS[ecl][ver]
    ecclen = _ECC_PER_BLOCK[ecl][ver]
    raw = _raw_data_modules(ver) // 8
    numshort = numblocks - raw % numblocks
    shortlen = raw // numblocks
    divisor = _rs_divisor(ecclen)
    blocks, k = [], 0
    for i in range(numblocks):
        dat = words[k:k + shortlen - ecclen + (0 if i < numshort else 1)]
        k += len(dat)
        ecc = _rs_remainder(dat, divisor)
        if i < numshort:
            dat = dat + [0]
        blocks.append(dat + ecc)
    out = []
    for i in range(len(blocks[0])):
        for j, blk in enumerate(blocks):
            if i != shortlen - ecclen or j >= numshort:
                out.append(blk[i])
    return out


def _capacity(ver: int, ecl: str) -> int:
    """Bytes of byte-mode data that fit."""
    header = 4 + (8 if ver <= 9 else 16)
    return (_data_codewords(ver, ecl) * 8 - header) // 8


def encode(text: str | bytes, ecl: str = "M", min_version: int = 1,
           mask: int | None = None) -> list[list[bool]]:
    """The module matrix (True = dark), rows top to bottom, of the smallest
    symbol holding ``text`` (UTF-8) at error-correction level ``ecl``.

    ``mask`` forces one of the eight masks (tests); by default the mask with
    the lowest penalty is chosen, as the standard asks."""
    ecl = ecl.upper()
    if ecl not in _ECL_BITS:
        raise QRError("error-correction level must be L, M, Q or H")
    data = text.encode("utf-8") if isinstance(text, str) else bytes(text)
    ver = next((v for v in range(max(1, min_version), 41) if len(data) <= _capacity(v, ecl)),
               None)
    if ver is None:
        raise QRError(f"{len(data)} bytes do not fit in a QR code at level {ecl}")
    codewords = _interleave(_bits_to_codewords(data, ver, ecl), ver, ecl)
    sym = _Symbol(ver)
    sym.draw_function_patterns()
    sym.draw_codewords(codewords)
    if mask is None:
        best = None
        for candidate in range(8):
            sym.apply_mask(candidate)
            sym.draw_format_bits(ecl, candidate)
            p = sym.penalty()
            if best is None or p < best[0]:
                best = (p, candidate)
            sym.apply_mask(candidate)                # XOR again: undo
        mask = best[1]
    sym.apply_mask(mask)
    sym.draw_format_bits(ecl, mask)
    return sym.m


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
