"""Published EC(1:N) -> ECe lines (``ece_regressions.csv``): lookup and use."""
from __future__ import annotations

import math
from dataclasses import dataclass

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from .. import InputError
from ...data import load_table
from .dilution import _as_ec, _check_sp
from .kinds import check_ratio_n


@dataclass(frozen=True)
class Regression:
    """A published empirical relation between EC(1:N) and ECe.

    ``form`` is "linear" (ECe = a·EC + b) or "sp_factor"
    (ECe = (a + b/θSP)·EC with θSP = SP/100, Slavich and Petterson 1993).
    ``uncertainty_pct`` is the paper's reported error when stated; otherwise
    see :meth:`expected_uncertainty`.
    """
    name: str
    ratio_n: float
    form: str
    a: float
    b: float
    authors: str
    year: int | None
    soils: str
    n_samples: int | None
    r2: float | None
    uncertainty_pct: float | None
    default_for_ratio: bool
    source: str
    #: Lowest EC(1:N), dS/m, where the line is used; below it the estimate
    #: falls back to a method that holds there (see :func:`estimate_ece`).
    min_ec_dS_m: float = 0.0
    range_basis: str = ""

    @property
    def label(self) -> str:
        yr = f" {self.year}" if self.year else ""
        return f"{self.authors}{yr}, 1:{self.ratio_n:g} ({self.soils})"

    def expected_uncertainty(self) -> tuple[float | None, str]:
        """(± %, basis). Reported error when the source states one; else a rough
        proxy 100·sqrt(1 − r²) labelled as such; else (None, "not reported")."""
        if self.uncertainty_pct is not None:
            return self.uncertainty_pct, "reported by the source"
        if self.r2 is not None:
            return (round(100.0 * math.sqrt(max(0.0, 1.0 - self.r2)), 1),
                    "rough proxy derived from r² as 100·sqrt(1 − r²); not a prediction interval")
        return None, "not reported by the source"


def _opt_float(s: str) -> float | None:
    return float(s) if s not in ("", None) else None


def _opt_int(s: str) -> int | None:
    return int(float(s)) if s not in ("", None) else None


REGRESSIONS: dict[str, Regression] = {
    r["name"]: Regression(
        name=r["name"], ratio_n=float(r["ratio_n"]), form=r["form"],
        a=float(r["a"]), b=float(r["b"]), authors=r["authors"], year=_opt_int(r["year"]),
        soils=r["soils"], n_samples=_opt_int(r["n_samples"]), r2=_opt_float(r["r2"]),
        uncertainty_pct=_opt_float(r["uncertainty_pct"]),
        default_for_ratio=r["default_for_ratio"].lower() in ("yes", "true", "1"),
        source=r["source"], min_ec_dS_m=_opt_float(r.get("min_ec_dS_m")) or 0.0,
        range_basis=r.get("range_basis", ""))
    for r in load_table("ece_regressions")
}
for _r in REGRESSIONS.values():
    if _r.form not in ("linear", "sp_factor"):
        raise RuntimeError(f"ece_regressions.csv: unknown form {_r.form!r} for {_r.name}")


def _same_ratio(a: float, b: float, tol: float = 0.01) -> bool:
    return abs(a - b) <= tol * max(a, b)


def regressions_for_ratio(n) -> list[Regression]:
    """Published regressions whose ratio is within 1 % of 1:N (default first).

    Parameters
    ----------
    n : float or str
        N of the 1:N extract.

    Returns
    -------
    list of Regression
        The lines for that ratio from ``ece_regressions.csv``, the default for
        the ratio first, then by name.

    References
    ----------
    Each row's ``source`` column (PLoS ONE 13(6):e0198290 Table 2; Rayment and
    Lyons 2011 method 14B1 Table 14.2; Slavich and Petterson 1993).

    Examples
    --------
    >>> [r.name for r in regressions_for_ratio(5)][:2]
    ['lyons_2003_1to5', 'loveday_1972_1to5']
    """
    n = check_ratio_n(n)
    found = [r for r in REGRESSIONS.values() if _same_ratio(r.ratio_n, n)]
    return sorted(found, key=lambda r: (not r.default_for_ratio, r.name))


def default_regression(n) -> Regression | None:
    """The regression used for 1:N when neither SP nor texture is known.

    Parameters
    ----------
    n : float or str
        N of the 1:N extract.

    Returns
    -------
    Regression or None
        The row marked ``default_for_ratio``, or None where no line is stored.

    References
    ----------
    ``ece_regressions.csv`` (the ``default_for_ratio`` column is this
    project's choice; the coefficients are the sources').

    Examples
    --------
    For 1:1, the combined sandy and loamy line of PLoS ONE 2018 Table 2
    (ref [63]), ECe = 2.23 EC1:1 - 0.58:

    >>> r = default_regression(1)
    >>> r.name, r.a, r.b
    ('plos2018_ref63_1to1_combined', 2.23, -0.58)
    """
    for r in regressions_for_ratio(n):
        if r.default_for_ratio:
            return r
    return None


def find_regression(name) -> Regression:
    """A regression by name; a leading ``regression:`` is accepted.

    Parameters
    ----------
    name : str
        Key of :data:`REGRESSIONS`, any case, optionally ``regression:<name>``.

    Returns
    -------
    Regression
        The line; an unknown name raises :class:`InputError` (field
        ``"method"``) listing the known ones.

    References
    ----------
    ``ece_regressions.csv``, a source per row.

    Examples
    --------
    Talsma (1968), ECe = 6.4 × EC1:5 (Rayment and Lyons 2011, Table 14.2):

    >>> find_regression("regression:talsma_1968_1to5").a
    6.4
    """
    key = str(name or "").strip()
    if key.lower().startswith("regression:"):
        key = key.split(":", 1)[1].strip()
    if key in REGRESSIONS:
        return REGRESSIONS[key]
    low = {k.lower(): k for k in REGRESSIONS}
    if key.lower() in low:
        return REGRESSIONS[low[key.lower()]]
    raise InputError(f"Unknown ECe method {str(name)!r}; use one of: "
                     + ", ".join(ECE_METHODS) + ".", "method")


def ece_regression(ec_dS_m, name, sp_pct=None) -> np.ndarray:
    r"""ECe from EC(1:N) by a published regression.

    .. math:: EC_e = a\,EC_{1:N} + b \qquad\text{(linear)}

    .. math:: EC_e = (a + b/\theta_{SP})\,EC_{1:5} \qquad\text{(sp\_factor,
              Slavich and Petterson 1993; } \theta_{SP} = SP/100\text{ kg/kg)}

    Parameters
    ----------
    ec_dS_m : array_like
        EC of the extract at 25 °C, dS/m, at the regression's own ratio.
    name : str
        Key of :data:`REGRESSIONS` (``regression:`` prefix allowed).
    sp_pct : float, optional
        Saturation percentage, needed by the ``sp_factor`` form only.

    Returns
    -------
    numpy.ndarray
        ECe, dS/m. A negative intercept can give values below zero for very
        dilute extracts; those are returned as 0 (below the fitted range).

    Notes
    -----
    Each line was fitted on a regional set of soils (see ``soils`` and
    ``source``); outside that population the error can be far larger than
    the fit statistics suggest.

    References
    ----------
    Each row's ``source`` in ``ece_regressions.csv``.

    Examples
    --------
    Hogg and Henry (1984), coarse soils, 1:1: ECe = 3.01 EC1:1 - 0.06
    (coefficients as printed in PLoS ONE 13(6):e0198290 Table 2), so 2 dS/m
    gives 3.01 × 2 - 0.06 = 5.96 dS/m:

    >>> round(float(ece_regression(2.0, "hogg_henry_1to1_coarse")), 2)
    5.96
    """
    reg = find_regression(name)
    ec = _as_ec(ec_dS_m)
    if reg.form == "linear":
        out = reg.a * ec + reg.b
    else:
        if sp_pct is None:
            raise InputError(f"{reg.name} needs the saturation percentage (or a texture) "
                             "of the soil; type SP in %, e.g. 40.", "sp")
        theta = _check_sp(sp_pct) / 100.0
        out = (reg.a + reg.b / theta) * ec
    return np.where(np.isnan(out), np.nan, np.maximum(out, 0.0))


#: Names offered by a method picker, with a short label.
ECE_METHODS: dict[str, str] = {
    "paste": "Saturated paste: the reading is ECe",
    "sp_dilution": "Dilution by saturation percentage (SP or texture)",
    **{f"regression:{k}": r.label for k, r in REGRESSIONS.items()},
}
