"""The ODE route: a_n y^(n) + ... + a_0 y = u(t) with initial conditions.

By the derivative rule L{y^(i)} = s^i Y - sum_{k<i} s^(i-1-k) y^(k)(0), the
transformed equation is A(s) Y(s) = U(s) + I(s) with
A(s) = sum a_i s^i and I(s) = sum_i a_i sum_{k<i} s^(i-1-k) y^(k)(0), so
Y = I/A (free, initial-condition response) + U/A (forced response).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import sympy as sp

from .._types import S
from ..errors import ParameterError, UnsupportedExpressionError
from . import limits
from .forward import transform
from .invert import invert_expr
from .parse import param_value, parse
from .results import InversionResult

MAX_ORDER = 20


@dataclass(frozen=True)
class OdeSolution:
    Y_s: sp.Expr
    free_s: sp.Expr
    forced_s: sp.Expr
    y: InversionResult
    free: InversionResult
    forced: InversionResult

    def to_dict(self, digits=None) -> dict:
        return {"Y_s": sp.sstr(self.Y_s), "f_t": _text(self.y, digits),
                "free_s": sp.sstr(self.free_s), "forced_s": sp.sstr(self.forced_s),
                "free_t": _text(self.free, digits), "forced_t": _text(self.forced, digits),
                "method": self.y.method}


def _text(res, digits):
    from ..printing import to_sympy_text
    return None if res.f_t is None else to_sympy_text(res.f_t, digits=digits)


def _numbers(values, what, params):
    out = []
    for i, v in enumerate(values):
        if isinstance(v, str):
            v = v.strip()
            if v == "":
                raise ParameterError(f"{what} number {i + 1} is empty")
            expr = parse(v, params)
            if expr.has(S):
                raise ParameterError(f"{what} number {i + 1} ('{v}') must not contain s")
            out.append(expr)
        else:
            out.append(param_value(f"{what} {i + 1}", v))
    return out


def ode_transform(coeffs: Sequence, initial: Sequence = (), input=None,
                  params: Mapping | None = None, *, input_t=None):
    """(Y, free, forced) in s.  ``coeffs`` highest derivative first."""
    a = _numbers(list(coeffs), "coefficient", params)
    if not a:
        raise ParameterError("give at least one coefficient (highest derivative first)")
    while len(a) > 1 and a[0] == 0:
        a = a[1:]
    n = len(a) - 1
    if n == 0:
        raise ParameterError("give at least two coefficients (a_1, a_0): an equation of order "
                             "zero has no derivatives")
    if n > MAX_ORDER:
        raise ParameterError(f"order {n} is above the limit of {MAX_ORDER}")
    if a[0] == 0:
        raise ParameterError("all coefficients are zero")
    y0 = _numbers(list(initial), "initial value", params)
    if len(y0) > n:
        raise ParameterError(f"an order-{n} equation takes at most {n} initial values "
                             f"(y(0) ... y^({n - 1})(0)), got {len(y0)}")
    y0 = y0 + [sp.S.Zero] * (n - len(y0))
    asc = list(reversed(a))                       # a_0 ... a_n
    A = sum((asc[i] * S ** i for i in range(n + 1)), sp.S.Zero)
    I = sp.S.Zero
    for i in range(1, n + 1):
        for k in range(i):
            I += asc[i] * S ** (i - 1 - k) * y0[k]
    if input is not None and input_t is not None:
        raise ParameterError("give the input either in s or in t, not both")
    if input_t is not None:
        U = transform(input_t, params)
    elif input is None or (isinstance(input, str) and not input.strip()):
        U = sp.S.Zero
    else:
        U = parse(input, params) if isinstance(input, str) else sp.sympify(input)
    free = sp.cancel(I / A)
    forced = U / A
    Y = free + forced
    if not Y.has(sp.exp):
        Y = _monic(Y)
    return Y, _monic(free), forced


def _monic(R: sp.Expr) -> sp.Expr:
    """A rational function with a monic denominator (1/(s^2 + 0.4s + 25), not 2/(2s^2 + ...))."""
    n, d = sp.fraction(sp.cancel(sp.together(R)))
    try:
        lc = sp.Poly(d, S).LC()
    except sp.PolynomialError:
        return R
    if lc == 0:
        return R
    return sp.expand(n / lc) / sp.expand(d / lc)


def solve_ode(coeffs, initial=(), input=None, params=None, *, input_t=None,
              timeout=None) -> OdeSolution:
    """Y(s) and y(t), split into free and forced responses."""
    Y, free, forced = ode_transform(coeffs, initial, input, params, input_t=input_t)
    with limits.deadline(timeout):
        y = invert_expr(Y)
        fr = invert_expr(free)
        fo = invert_expr(forced)
    return OdeSolution(Y, free, forced, y, fr, fo)
