"""Helpers shared by the reference tests (no expected values live here)."""
from __future__ import annotations

import numpy as np
import sympy as sp

#: time and Laplace variable of the reference side (independent of the engine's)
t = sp.Symbol("t", positive=True)
s = sp.Symbol("s")


def scaled_error(got, ref) -> float:
    """max |got - ref| divided by max |ref| (the function's scale on these points)."""
    got = np.asarray(got, dtype=float)
    ref = np.asarray(ref, dtype=float)
    scale = max(float(np.max(np.abs(ref))), 1e-300)
    return float(np.max(np.abs(got - ref))) / scale


def values_at(f: sp.Expr, times, var=t, dps: int = 30) -> np.ndarray:
    """f at each time, evaluated by SymPy/mpmath at ``dps`` digits."""
    return np.array([float(sp.N(f.xreplace({var: sp.Float(x, dps)}), dps)) for x in times])


def engine_f(f_t: sp.Expr) -> sp.Expr:
    """The engine's f(t) written in the reference-side time symbol."""
    from sheetfuncs._types import T
    return f_t.xreplace({T: t})
