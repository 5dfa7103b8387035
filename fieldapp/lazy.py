"""Modules imported at their first use, not when the program starts.

The server's first page (the entry form) needs a few tables and no
computation, so the start should not pay for numpy or for the modules that
draw charts, convert, export or sync. Two stand-ins do that:

``Later("fieldapp.charts")``
    for fieldapp's own modules: every name read goes to the real module
    (imported at the first read), so a test that patches the module is seen.
``numpy``
    for numpy, which science/ reads in its inner loops: at the first read it
    imports numpy and takes on all its names, so every later ``np.asarray``
    is the same dictionary lookup as on numpy itself (numpy's own
    ``__getattr__``, copied with the rest, answers the names it makes on demand).

Both are safe across threads: the import system's lock makes the import
happen once, and filling the names twice fills them with the same objects.
"""
from __future__ import annotations

import importlib
import types


class Later:
    """A module imported at its first use: ``charts = Later("fieldapp.charts")``,
    then ``charts.trend_svg(...)``."""

    def __init__(self, name: str):
        self._name = name
        self._module = None

    def __getattr__(self, attr):
        module = self._module
        if module is None:
            module = self._module = importlib.import_module(self._name)
        return getattr(module, attr)

    def __repr__(self) -> str:
        return f"<Later {self._name}>"


class _LateModule(types.ModuleType):
    """A stand-in that becomes a copy of the module's names at the first read,
    and then a plain module object (no ``__getattr__`` hook left on the way)."""

    def __getattr__(self, attr):
        module = importlib.import_module(self.__name__)
        self.__dict__.update(module.__dict__)
        self.__class__ = types.ModuleType
        return getattr(module, attr)


#: ``from fieldapp.lazy import numpy as np``: numpy, imported at the first ``np.name``.
numpy = _LateModule("numpy")
