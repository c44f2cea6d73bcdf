"""Public entry points: the engine's functions with the in-process cache and
the output forms (text, spreadsheet formula, LaTeX) attached.

Imports are lazy: answering a rational case touches neither SymPy nor SciPy;
the general (SymPy) route is imported only when an input needs it.
"""
from __future__ import annotations

from typing import Mapping

from .engine import cache


def _invert(expr, params):
    from .engine import limits
    from .engine.fast import fast_invert
    with limits.deadline(None):
        res = fast_invert(expr, params)
        if res is not None:
            return res
        from .engine.invert import invert as general
        return general(expr, params)


@cache.memo
def _invert_cached(expr: str, params):
    return _invert(expr, params)


def invert(expr, params: Mapping | None = None):
    """Inverse Laplace transform of ``expr`` (text or SymPy) for t >= 0."""
    if isinstance(expr, str):
        return _invert_cached(expr, None if params is None else dict(params))
    return _invert(expr, params)


@cache.memo
def _figures_cached(expr, params, input, settle, rise):
    from .engine.figures_fast import figures as _figures
    return _figures(expr, params, input=input, settle=settle, rise=rise)


def figures(expr, params: Mapping | None = None, *, input="step", band: float = 0.02,
            rise: tuple = (0.1, 0.9), settle: float | None = None):
    """Response figures for ``input`` (impulse, step, ramp or U(s)); ``band`` is the settling
    band (a fraction, as ``--band`` and the cells' ``band``; ``settle`` is its former name)."""
    settle = band if settle is None else settle
    if isinstance(expr, str) and isinstance(input, str):
        return _figures_cached(expr, None if params is None else dict(params), input, float(settle),
                               tuple(rise))
    from .engine.figures_fast import figures as _figures
    return _figures(expr, params, input=input, settle=settle, rise=rise)


def sample(expr, times=None, *, start=None, stop=None, n=None, input="impulse",
           params: Mapping | None = None):
    """Sampled response to ``input`` at ``times`` or on ``n`` points from start to stop."""
    from .engine.sample import sample as _sample
    return _sample(expr, times, start=start, stop=stop, n=n, input=input, params=params)


def solve_ode(coeffs, initial=(), input=None, params=None, *, input_t=None):
    """a_n y^(n) + ... + a_0 y = u(t) with initial values -> Y(s), y(t)."""
    from .engine.ode import solve_ode as _solve_ode
    return _solve_ode(coeffs, initial, input, params, input_t=input_t)


def transform(signal, params: Mapping | None = None):
    """Forward Laplace transform of a time signal."""
    from .engine.forward import transform as _transform
    return _transform(signal, params)


def self_check(result, times=None):
    """Deviation of a closed form from an independent numerical inversion."""
    from .engine.check import self_check as _self_check
    return _self_check(result, times)


def s_text(F) -> str:
    import sympy as sp
    return sp.sstr(F)


def excel_formula(result, cell: str = "A1", *, digits: int | None = None, names=None) -> str:
    """A native spreadsheet formula of f(t) with t in ``cell``, always at full double
    precision (``digits`` is accepted for compatibility and no longer lowers it)."""
    from .printing import excel_result
    from .errors import UnsupportedExpressionError
    if result.f_t is None:
        raise UnsupportedExpressionError("no closed form: the result is numerical or a dead-time series, "
                                         "so there is no spreadsheet formula", "sample it instead")
    return excel_result(result, cell, names=names)


def latex(result, *, digits=None) -> str:
    from .printing import to_latex
    return to_latex(result.f_t, digits=digits) if result.f_t is not None else ""


def __getattr__(name):
    # record types, imported on first use
    if name == "SelfCheck":
        from .engine.check import SelfCheck
        return SelfCheck
    if name in ("Figures",):
        from .engine.figcore import Figures
        return Figures
    if name in ("Samples",):
        from .engine.sample import Samples
        return Samples
    if name == "InversionResult":
        from .engine.results import InversionResult
        return InversionResult
    if name == "OdeSolution":
        from .engine.ode import OdeSolution
        return OdeSolution
    raise AttributeError(name)


__all__ = ["invert", "figures", "sample", "solve_ode", "transform", "self_check", "excel_formula",
           "latex", "SelfCheck"]
