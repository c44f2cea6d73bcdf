"""A module imported on first attribute access (keeps SymPy out of start-up)."""
from __future__ import annotations

import importlib


class LazyModule:
    def __init__(self, name: str):
        self._name = name
        self._module = None

    def __getattr__(self, attr):
        if self._module is None:
            self._module = importlib.import_module(self._name)
        return getattr(self._module, attr)


sympy = LazyModule("sympy")
