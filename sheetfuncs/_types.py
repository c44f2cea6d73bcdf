"""Shared symbols and small types used across the engine."""
from __future__ import annotations

import sympy as sp

#: the Laplace variable (complex)
S = sp.Symbol("s")
#: time (real; results are valid for t >= 0)
T = sp.Symbol("t", real=True)


def param_symbol(name: str) -> sp.Symbol:
    """Symbol for a parameter left without a value.  Parameters are assumed
    positive (resistances, time constants, gains, frequencies ...)."""
    return sp.Symbol(name, positive=True)
