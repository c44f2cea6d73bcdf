"""Public entry points: the engine's functions with the in-process cache and
the output forms (text, spreadsheet formula, LaTeX) attached."""
from __future__ import annotations

from typing import Mapping

import sympy as sp

from .engine import cache
from .engine.check import SelfCheck, self_check
from .engine.figures import Figures, figures as _figures
from .engine.forward import transform as _transform
from .engine.invert import invert as _invert
from .engine.ode import OdeSolution, solve_ode as _solve_ode
from .engine.results import InversionResult
from .engine.sample import Samples, sample as _sample


@cache.memo
def _invert_cached(expr: str, params):
    return _invert(expr, params)


def invert(expr, params: Mapping | None = None) -> InversionResult:
    """Inverse Laplace transform of ``expr`` (text or SymPy) for t >= 0."""
    if isinstance(expr, str):
        return _invert_cached(expr, None if params is None else dict(params))
    return _invert(expr, params)


@cache.memo
def _figures_cached(expr, params, input, settle, rise):
    return _figures(expr, params, input=input, settle=settle, rise=rise)


def figures(expr, params: Mapping | None = None, *, input="step", settle: float = 0.02,
            rise: tuple = (0.1, 0.9)) -> Figures:
    """Response figures for ``input`` (impulse, step, ramp or U(s))."""
    if isinstance(expr, str) and isinstance(input, str):
        return _figures_cached(expr, None if params is None else dict(params), input, float(settle),
                               tuple(rise))
    return _figures(expr, params, input=input, settle=settle, rise=rise)


def sample(expr, times=None, *, start=None, stop=None, n=None, input="impulse",
           params: Mapping | None = None) -> Samples:
    """Sampled response to ``input`` at ``times`` or on ``n`` points from start to stop."""
    return _sample(expr, times, start=start, stop=stop, n=n, input=input, params=params)


def solve_ode(coeffs, initial=(), input=None, params=None, *, input_t=None) -> OdeSolution:
    """a_n y^(n) + ... + a_0 y = u(t) with initial values -> Y(s), y(t)."""
    return _solve_ode(coeffs, initial, input, params, input_t=input_t)


def transform(signal, params: Mapping | None = None) -> sp.Expr:
    """Forward Laplace transform of a time signal."""
    return _transform(signal, params)


def s_text(F: sp.Expr) -> str:
    return sp.sstr(F)


def excel_formula(result: InversionResult, cell: str = "A1", *, digits: int = 15, names=None) -> str:
    from .printing import to_excel
    from .errors import UnsupportedExpressionError
    if result.f_t is None:
        raise UnsupportedExpressionError("no closed form: the result is numerical, so there is no "
                                         "spreadsheet formula", "sample it instead")
    kw = {"names": names} if names else {}
    return to_excel(result.f_t, cell=cell, digits=digits, **kw)


def latex(result: InversionResult, *, digits=None) -> str:
    from .printing import to_latex
    return to_latex(result.f_t, digits=digits) if result.f_t is not None else ""


__all__ = ["invert", "figures", "sample", "solve_ode", "transform", "self_check", "excel_formula",
           "latex", "SelfCheck"]
