"""The ECe routes for a 1:N extract and how their rows are combined into one
:class:`EceEstimate` (the fallback below a line's range of use, the floor at the
extract's own EC)."""
from __future__ import annotations

from dataclasses import dataclass

from fieldapp.lazy import numpy as np  # imported at the first np.name: a faster start

from .dilution import (ESTIMATE_CAUTION, SP_DILUTION_UNCERTAINTY_PCT,
                       SP_DILUTION_UNCERTAINTY_SOURCE, ece_sp_dilution)
from .regressions import REGRESSIONS, Regression, _same_ratio, ece_regression
from .texture_lines import (HOGG_HENRY_GROUP, ORIGIN_FALLBACK, SLAVICH_PETTERSON,
                            _texture_spread_pct, hogg_henry_for_texture,
                            slavich_petterson_factor)
from .textures import Texture


@dataclass(frozen=True)
class EceEstimate:
    """Result of :func:`estimate_ece`.

    ``ece_dS_m`` is NaN where ECe is not meaningful (waters, feeds, substrates).
    ``method`` names the route of most rows ("paste", "sp_dilution",
    "sp_dilution:texture:<name>", "regression:<name>",
    "proportional_below_range:<name>") or None; ``methods`` gives it per row,
    because rows below a regression's range of use fall back to another
    route. ``uncertainty_pct`` is the expected ± relative uncertainty of the
    route (None when unknown or not applicable), per row in
    ``uncertainties`` (NaN unknown); ``uncertainty_basis`` says where it
    comes from. ``note`` is one or two plain sentences for the screen, per
    row in ``notes``; ``out_of_range`` marks rows whose first-choice
    regression was outside its range of use.
    """
    ece_dS_m: np.ndarray
    method: str | None
    uncertainty_pct: float | None
    note: str
    uncertainty_basis: str | None = None
    sp_pct: float | None = None
    methods: np.ndarray | None = None
    uncertainties: np.ndarray | None = None
    notes: np.ndarray | None = None
    bases: np.ndarray | None = None
    out_of_range: np.ndarray | None = None

    def per_row(self) -> dict[str, np.ndarray]:
        """Per-row method, uncertainty (NaN unknown), note, basis and range mark."""
        shape = np.shape(self.ece_dS_m)

        def full(v, dtype=object):
            a = np.empty(shape, dtype=dtype)
            a[...] = v
            return a
        unc = np.nan if self.uncertainty_pct is None else self.uncertainty_pct
        return {
            "method": self.methods if self.methods is not None else full(self.method),
            "uncertainty_pct": (self.uncertainties if self.uncertainties is not None
                                else full(unc, float)),
            "note": self.notes if self.notes is not None else full(self.note),
            "basis": self.bases if self.bases is not None else full(self.uncertainty_basis),
            "out_of_range": (self.out_of_range if self.out_of_range is not None
                             else full(False, bool)),
        }


@dataclass
class _Route:
    """One route's answer for some rows (internal)."""
    ece: np.ndarray
    method: str
    unc: float | None
    note: str
    basis: str | None
    sp: float | None = None


def _sp_route(ec, n, sp) -> _Route:
    return _Route(ece_sp_dilution(ec, n, sp), "sp_dilution", SP_DILUTION_UNCERTAINTY_PCT,
                  f"Dilution estimate from 1:{n:g} with SP {sp:g} %.",
                  SP_DILUTION_UNCERTAINTY_SOURCE, sp)


def _texture_route(ec, n, tex: Texture) -> tuple[_Route, Regression | None]:
    """The published texture-dependent relation for 1:N, or dilution with the
    class SP where none is stored. Returns the route and the line used (for
    its range of use) or None."""
    if _same_ratio(n, 5.0):
        reg = REGRESSIONS[SLAVICH_PETTERSON]
        f = float(slavich_petterson_factor(tex.sp_pct))
        return _Route(
            ec * f, f"regression:{reg.name}", _texture_spread_pct(tex),
            f"Estimated with Slavich and Petterson 1993 (Australian soils), "
            f"ECe = (2.46 + 3.03/θSP) × EC1:5, with the typical SP of {tex.name} "
            f"({tex.sp_text}): factor {f:.3g}; a measured SP is better.",
            "spread of the Slavich and Petterson factor over the texture's SP range "
            f"({tex.sp_low_pct:g}-{tex.sp_high_pct:g} %); the paper states no error and "
            "warns it can be significant in sandy soils", tex.sp_pct), reg
    hh = hogg_henry_for_texture(n, tex.name)
    if hh is not None:
        unc, basis = hh.expected_uncertainty()
        return _Route(ece_regression(ec, hh.name), f"regression:{hh.name}", unc,
                      f"Estimated with {hh.label}, chosen for {tex.name} "
                      f"({HOGG_HENRY_GROUP[tex.name]} texture).", basis, tex.sp_pct), hh
    return class_sp_dilution(ec, n, tex,
                             f"; no published texture relation is stored for 1:{n:g}"), None


def class_sp_dilution(ec, n, tex: Texture, why: str = "") -> _Route:
    """Ideal dilution with the texture's typical SP: asked for by name, or
    where no published texture relation is stored for the ratio (``why``)."""
    return _Route(ece_sp_dilution(ec, n, tex.sp_pct), f"sp_dilution:texture:{tex.name}",
                  SP_DILUTION_UNCERTAINTY_PCT,
                  f"Dilution estimate from 1:{n:g} with the typical SP of {tex.name} "
                  f"({tex.sp_text}){why}; a measured SP is better.",
                  SP_DILUTION_UNCERTAINTY_SOURCE + "; SP from texture adds more",
                  tex.sp_pct)


def _below_range_route(ec, n, reg: Regression, sp, tex) -> _Route:
    """What replaces a line below its range of use: the measured SP, else the
    texture's relation, else the same source's line through the origin, else
    the line's own ECe/EC ratio at its lower limit held constant below it."""
    lim = reg.min_ec_dS_m
    why = (f"EC1:{n:g} is below {lim:.3g} dS/m, the lowest value where {reg.label} is "
           f"used ({reg.range_basis}); ")
    if sp is not None:
        r = _sp_route(ec, n, sp)
        r.note = why + "estimated by dilution with the SP instead. " + r.note
        return r
    if tex is not None:
        r, treg = _texture_route(ec, n, tex)
        if treg is None or treg.min_ec_dS_m == 0.0 or treg.name == reg.name:
            if treg is not None and treg.name == reg.name:
                r = _Route(ece_sp_dilution(ec, n, tex.sp_pct),
                           f"sp_dilution:texture:{tex.name}", SP_DILUTION_UNCERTAINTY_PCT,
                           f"Dilution estimate with the typical SP of {tex.name} "
                           f"({tex.sp_pct:g} %; {tex.sp_status}).",
                           SP_DILUTION_UNCERTAINTY_SOURCE + "; SP from texture adds more",
                           tex.sp_pct)
            r.note = why + "estimated instead as follows. " + r.note
            return r
    origin = ORIGIN_FALLBACK.get(float(n)) if _same_ratio(n, round(n)) else None
    if origin and origin != reg.name:
        o = REGRESSIONS[origin]
        unc, basis = o.expected_uncertainty()
        return _Route(ece_regression(ec, o.name), f"regression:{o.name}", unc,
                      why + f"estimated with the same source's line through the origin, "
                      f"{o.label}.", basis)
    ratio = reg.a + reg.b / lim
    return _Route(ec * ratio, f"proportional_below_range:{reg.name}", None,
                  why + f"estimated as {ratio:.3g} × EC1:{n:g}, the line's own ECe/EC ratio "
                  f"at that limit, held constant below it; adding SP or texture gives a "
                  f"better estimate.",
                  "not known below the line's range of use")


def _line_route(ec, n, reg: Regression, sp_for_reg, note: str) -> _Route:
    unc, basis = reg.expected_uncertainty()
    return _Route(ece_regression(ec, reg.name, sp_pct=sp_for_reg), f"regression:{reg.name}",
                  unc, note, basis, sp_for_reg)


def _combine(ec, first: _Route, below: np.ndarray, fallback: _Route | None,
             n: float) -> EceEstimate:
    """Rows below the range take the fallback; every row is held at or above
    the extract's own EC (a paste is never more dilute than a 1:N extract of
    the same mineral soil, N >= 1)."""
    shape = ec.shape
    ece = np.array(first.ece, dtype=float, copy=True)
    methods = np.empty(shape, dtype=object)
    methods[...] = first.method
    unc = np.full(shape, np.nan if first.unc is None else first.unc)
    bases = np.empty(shape, dtype=object)
    bases[...] = first.basis
    took = np.zeros(shape, dtype=bool)  # rows that took the fallback
    if fallback is not None and below.any():
        took = np.asarray(below, dtype=bool)
        ece[took] = np.asarray(fallback.ece)[took]
        methods[took] = fallback.method
        unc[took] = np.nan if fallback.unc is None else fallback.unc
        bases[took] = fallback.basis
    floor = ~np.isnan(ece) & (ece < ec)
    if floor.any():
        ece[floor] = ec[floor]
    held = (f" Held at the EC of the 1:{n:g} extract itself: a saturated paste of a "
            "mineral soil is never more dilute than the extract.")
    other = fallback.note if fallback is not None else first.note
    notes = np.array([f"{t} {ESTIMATE_CAUTION}" for t in            # each row's of the four
                      (first.note, other, first.note + held, other + held)],
                     dtype=object)[took.astype(np.intp) + 2 * floor]
    main = 0
    if below.any() and below.mean() > 0.5 and fallback is not None:
        main = 1
    r = (first, fallback)[main]
    return EceEstimate(ece, r.method, r.unc, f"{r.note} {ESTIMATE_CAUTION}", r.basis, r.sp,
                       methods, unc, notes, bases, below.copy())
