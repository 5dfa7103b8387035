"""The flag record shared by every plausibility rule.

A flag never blocks a save: it travels with the reading. Each has a stable
snake_case ``code`` (tests and other tools rely on it), a ``severity``
("info", "warning" or "error"), one plain ``message`` a scout understands in
the sun, and an ``action`` saying what to do about it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, asdict, field

SEVERITIES = ("info", "warning", "error")


@dataclass(frozen=True)
class Flag:
    code: str
    severity: str
    message: str
    action: str = ""
    data: dict = field(default_factory=dict)

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"unknown severity {self.severity!r}")

    def as_dict(self) -> dict:
        d = asdict(self)
        if not d["data"]:
            d.pop("data")
        else:   # JSON has no NaN or infinity: an undefined figure is null
            d["data"] = {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                         for k, v in d["data"].items()}
        return d
