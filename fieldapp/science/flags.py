"""The flag record shared by every plausibility rule.

A flag never blocks a save: it travels with the reading. Each has a stable
snake_case ``code`` (tests and other tools rely on it), a ``severity``
("info", "warning" or "error"), one plain ``message`` a scout understands in
the sun, and an ``action`` saying what to do about it.
"""
from __future__ import annotations

import math
from copy import deepcopy
from dataclasses import dataclass, field

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
        """The flag as JSON-ready dict (what ``dataclasses.asdict`` gives, its
        data copied; JSON has no NaN or infinity, so an undefined figure is
        null), written out field by field: every stored reading makes one."""
        d = {"code": self.code, "severity": self.severity, "message": self.message,
             "action": self.action}
        if self.data:
            d["data"] = {k: (None if isinstance(v, float) and not math.isfinite(v) else
                             deepcopy(v) if isinstance(v, (list, dict, tuple)) else v)
                         for k, v in self.data.items()}
        return d
