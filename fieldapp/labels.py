"""Plain words for the codes the science core and the log use.

Flag codes, ECe method keys and solute-potential route keys are stable and
public (API, CSV, tests); a scout reading a screen in the sun should never
have to decode them. Every screen, the printed report and the preview use
these functions; the CSV and the API keep the codes and carry the labels
beside them where a person reads them.

A source string written in a data file as "from memory" (recalled, not read
from its published table) is shown as "unverified" on screens and reports.
"""
from __future__ import annotations

import csv
import re
from functools import lru_cache
from importlib import resources

#: One short plain label per flag code (the flag's own message says the rest).
FLAG_LABELS: dict[str, str] = {
    "unit_shorthand": "Unit read as per cm",
    "temperature_unknown": "No sample temperature",
    "uncompensated": "Corrected for temperature here",
    "psi_route_out_of_range": "Simpler potential estimate used",
    "tds_outside_approximation": "TDS estimate outside its range",
    "leaching_not_possible": "Water too salty for this crop",
    "over_range": "Above the meter's range",
    "under_range": "Below the meter's range",
    "below_resolution": "Below the meter's resolution",
    "unit_slip": "Unit looks wrong",
    "unit_not_on_meter": "Unit not on this meter",
    "ratio_implausible": "Unusual dilution ratio",
    "ratio_below_saturation": "Less water than a saturated paste",
    "ece_implausible": "ECe out of the usual range",
    "temperature_range": "Unusual sample temperature",
    "replicate_spread": "Repeat readings disagree",
    "history_jump": "Far from this site's earlier readings",
    "calibration_drift": "Meter failed its last check",
    "calibration_stale": "Meter check is due",
}

#: Solute-potential routes, short form for a results line.
PSI_ROUTE_LABELS: dict[str, str] = {
    "handbook60": "USDA Handbook 60 (0.36 atm per dS/m)",
    "rule_004": "rule of thumb, −0.04 MPa per dS/m",
    "nacl_pitzer": "sodium chloride equivalent (Pitzer model)",
}

#: Severity in words (the page shows a word, never only a colour).
SEVERITY_LABELS = {"info": "Note", "warning": "Check", "error": "Problem"}

_CODE_RE = re.compile(r"^[a-z0-9]+(?:_[a-z0-9]+)+$")


def flag_label(code: str | None) -> str:
    """The plain label of a flag code; an unknown code is spelled out in words."""
    if not code:
        return ""
    return FLAG_LABELS.get(code) or _words(code)


def _words(key: str) -> str:
    text = re.sub(r"[_:]+", " ", str(key)).strip()
    return text[:1].upper() + text[1:]


@lru_cache(maxsize=1)
def _method_table() -> dict[str, str]:
    """Labels of method keys that the science core lists as data
    (``fieldapp/data/method_labels.csv``, columns key,label,source), if present."""
    out: dict[str, str] = {}
    try:
        path = resources.files("fieldapp").joinpath("data", "method_labels.csv")
        if path.is_file():
            with path.open(encoding="utf-8", newline="") as f:
                for row in csv.DictReader(f):
                    if row.get("key") and row.get("label"):
                        out[row["key"].strip()] = row["label"].strip()
    except OSError:   # no table: the built-in rules below still give words
        pass
    return out


def method_label(key: str | None) -> str:
    """Plain words for an ECe method key, e.g. ``sp_dilution:texture:clay loam``
    -> "dilution by saturation % (typical SP of clay loam)"."""
    if not key:
        return ""
    key = str(key)
    table = _method_table()
    if key in table:
        return table[key]
    for pattern, label in table.items():   # e.g. "sp_dilution:texture:<texture>"
        if "<" in pattern:
            prefix = pattern[:pattern.index("<")]
            if key.startswith(prefix) and len(key) > len(prefix):
                return f"{label} ({key[len(prefix):]})"
    if key == "paste":
        return "measured on a saturated paste"
    head, _, rest = key.partition(":")
    if head in table and rest:
        return f"{table[head]} ({_words(rest).lower()})"
    if head == "sp_dilution":
        if rest.startswith("texture:"):
            return f"dilution by saturation % (typical SP of {rest[8:]})"
        return "dilution by the soil's saturation %"
    if head == "regression":
        from .science import extracts
        reg = extracts.REGRESSIONS.get(rest)
        if reg is not None:
            return f"published regression: {reg.label}"
        return f"published regression {rest}"
    if head in PSI_ROUTE_LABELS:
        return PSI_ROUTE_LABELS[head]
    return _words(key).lower()


def sample_label(key: str | None) -> str:
    """A sample kind in words, short: "soil:water extract 1:N (by mass)"."""
    if not key:
        return ""
    from .science import extracts
    kind = extracts.SAMPLE_KINDS.get(str(key))
    return kind.label[:1].lower() + kind.label[1:] if kind else _words(key).lower()


def route_label(key: str | None) -> str:
    """Plain words for a solute-potential route key."""
    if not key:
        return ""
    return PSI_ROUTE_LABELS.get(str(key)) or _method_table().get(str(key)) or _words(key).lower()


def readable_source(text: str | None) -> str:
    """A source citation as a screen shows it: never "from memory" (a value
    nobody has checked against its published table is "unverified")."""
    if not text:
        return ""
    s = re.sub(r"\s*[-–—(,;]*\s*(?:attribution |citation |values? |coefficients )?"
               r"(?:recalled )?from memory\)?", " (unverified)", str(text),
               flags=re.IGNORECASE)
    s = re.sub(r"\(\s*\(unverified\)\s*\)", "(unverified)", s)
    s = re.sub(r"(?:\s*\(unverified\))+", " (unverified)", s)
    return " ".join(s.split())


def label_result(result: dict) -> dict:
    """The conversion result with plain labels beside the codes, for a page:
    each flag gains ``label`` and ``severity_label``; methods and routes gain
    ``*_label`` keys. The codes themselves are kept."""
    out = dict(result)
    out["flags"] = [{**f, "label": flag_label(f.get("code")),
                     "severity_label": SEVERITY_LABELS.get(f.get("severity"), "")}
                    for f in result.get("flags") or []]
    out["ece_method_label"] = method_label(result.get("ece_method"))
    out["psi_s_method_label"] = route_label(result.get("psi_s_method"))
    if result.get("temp_method"):
        out["temp_method_label"] = method_label(result["temp_method"])
    if isinstance(result.get("psi_s_by_method"), dict):
        out["psi_s_route_labels"] = {k: route_label(k) for k in result["psi_s_by_method"]}
    return out


def looks_like_code(text: str) -> bool:
    """True for a snake_case key such as ``calibration_stale`` (for tests and
    checks that no code reaches a screen)."""
    return bool(_CODE_RE.match(text or ""))
