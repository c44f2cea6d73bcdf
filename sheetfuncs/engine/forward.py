"""Forward Laplace transform of the time signals engineers build inputs from.

Linearity over the terms of the expanded signal; per term:
- ``g(t) u(t - T)`` -> ``e^{-sT} L{g(t + T)}`` (time shift), ``delta^(k)(t - T)`` -> ``s^k e^{-sT}``;
- sin, cos, sinh, cosh are rewritten as exponentials, so every remaining term is
  ``c t^n e^{a t}`` -> ``c n! / (s - a)^(n+1)`` (the table pair with the
  first-shift rule); the sum is brought back to one real rational function.
Signals are taken for t >= 0 (a constant c means c u(t)).
"""
from __future__ import annotations

from math import factorial
from typing import Mapping

import sympy as sp

from .._types import S, T
from ..errors import UnsupportedExpressionError
from .parse import parse
from .split import additive_terms, pure_delay


def to_t_expr(signal, params: Mapping | None = None) -> sp.Expr:
    if isinstance(signal, str):
        return parse(signal, params, var="t")
    if isinstance(signal, (int, float)):
        return parse(repr(signal), var="t")
    return sp.sympify(signal)


def transform(signal, params: Mapping | None = None) -> sp.Expr:
    """F(s) of a time signal (text in t, or a SymPy expression in t)."""
    f = to_t_expr(signal, params)
    f = f.xreplace({sym: T for sym in f.free_symbols if sym.name == "t"})
    parts = [_term(term) for term in sp.Add.make_args(sp.expand(f))]
    return _tidy(sp.Add(*parts))


def _tidy(F):
    groups: dict = {}
    for term in additive_terms(F):
        delay, rest = pure_delay(term)
        groups.setdefault(delay, []).append(rest)
    out = []
    for delay in sorted(groups, key=lambda d: float(d) if d.is_number else 0.0):
        r = sp.cancel(sp.together(sp.Add(*groups[delay])))
        out.append(r * sp.exp(-delay * S) if delay != 0 else r)
    return sp.Add(*out)


def _term(term):
    coeff, g = term.as_independent(T, as_Add=False)
    factors = sp.Mul.make_args(g)
    steps = [f for f in factors if isinstance(f, sp.Heaviside)]
    deltas = [f for f in factors if isinstance(f, sp.DiracDelta)]
    rest = sp.Mul(*[f for f in factors if f not in steps and f not in deltas])
    if deltas:
        if len(deltas) > 1 or rest.has(T) or steps:
            raise UnsupportedExpressionError(f"cannot transform the product '{term}'")
        d = deltas[0]
        at = _shift_of(d.args[0], "delta")
        k = int(d.args[1]) if len(d.args) > 1 else 0
        return coeff * S ** k * sp.exp(-at * S)
    delay = sp.S.Zero
    for h in steps:
        arg = sp.expand(h.args[0])
        a = arg.coeff(T)
        if a.is_negative:
            raise UnsupportedExpressionError(f"u({arg}) switches off; write it as 1 - u(...)")
        delay = sp.Max(delay, _shift_of(arg, "u"))
    if delay != 0:
        shifted = sp.expand(rest.xreplace({T: T + delay}), power_exp=True)
        return coeff * sp.exp(-delay * S) * sp.Add(*[_basic(x) for x in sp.Add.make_args(sp.expand(shifted))])
    return coeff * _basic(rest)


def _shift_of(arg, name):
    arg = sp.expand(arg)
    a = arg.coeff(T)
    b = arg - a * T
    if not a.is_positive or b.has(T):
        raise UnsupportedExpressionError(f"{name}({arg}) must have the form {name}(t - T)")
    shift = -b / a
    if shift.is_negative:
        raise UnsupportedExpressionError(f"{name}({arg}) starts before t = 0")
    return shift


def _basic(term):
    """L{c t^n e^{a t} (sin/cos/sinh/cosh ...)} for one product term."""
    g = sp.expand(term.rewrite(sp.exp), power_exp=True)
    out = []
    for x in sp.Add.make_args(g):
        c, h = x.as_independent(T, as_Add=False)
        h = sp.powsimp(h)
        n = 0
        a = sp.S.Zero
        for f in sp.Mul.make_args(h):
            if f == T:
                n += 1
            elif f.is_Pow and f.base == T and f.exp.is_Integer and f.exp > 0:
                n += int(f.exp)
            elif isinstance(f, sp.exp):
                arg = sp.expand(f.args[0])
                k = sp.diff(arg, T)
                rest = sp.expand(arg - k * T)
                if rest.has(T) or k.has(T):
                    raise UnsupportedExpressionError(f"no transform pair for exp({arg})")
                a += k
                c *= sp.exp(rest)
            elif f.has(T):
                raise UnsupportedExpressionError(
                    f"no transform pair for '{f}'",
                    "use constants, t^n, exp, sin, cos, sinh, cosh, u(t - T) and delta(t - T)")
            else:
                c *= f
        out.append(c * factorial(n) / (S - a) ** (n + 1))
    return sp.Add(*out)
