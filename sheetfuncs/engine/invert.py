"""Inverse Laplace transform: F(s) -> f(t) for t >= 0.

Route, in order:
1. delayed rational pieces (``split.split_delays``) -> partial fractions ->
   table pairs, then the time-shift rule f(t-T)u(t-T);
2. non-rational pairs from the table in ``pairs.py`` (closed forms);
3. numerical inversion (``numeric.py``), flagged as numerical.
"""
from __future__ import annotations

from math import factorial
from typing import Mapping

import sympy as sp

from .._types import S, T
from ..errors import SheetfuncsError, UnsupportedExpressionError
from . import limits
from .numeric import NumericInverse
from .pairs import invert_by_pairs
from .parse import parse
from .partfrac import Decomposition, PairTerm, decompose
from .results import DelayedPiece, InversionResult
from .split import split_delays


def to_s_expr(expr, params: Mapping | None = None) -> sp.Expr:
    """Text or SymPy expression -> SymPy expression in s with values substituted."""
    if isinstance(expr, str):
        return parse(expr, params)
    if isinstance(expr, sp.Basic):
        if params:
            from .parse import parse_params
            vals = parse_params(params)
            expr = expr.xreplace({sym: vals[sym.name] for sym in expr.free_symbols if sym.name in vals})
        return expr
    if isinstance(expr, (int, float)):
        return parse(repr(expr))
    raise UnsupportedExpressionError(f"cannot read an expression from {type(expr).__name__}")


def invert(expr, params: Mapping | None = None, *, numeric: bool = True,
           timeout: float | None = None):
    """Inverse Laplace transform of ``expr`` (text or SymPy) for t >= 0.

    The fast exact core (``fast.py``) answers whatever is rational in s and
    e^{-sT} with rational coefficients; the general SymPy route below the rest."""
    from .fast import fast_invert
    with limits.deadline(timeout):
        res = fast_invert(expr, params)
        if res is not None:
            return res
        F = to_s_expr(expr, params)
        return invert_expr(F, numeric=numeric)


def check_expr(F: sp.Expr) -> None:
    """Refuse what no real system can be: complex coefficients, infinities."""
    if F.has(sp.zoo, sp.oo, -sp.oo, sp.nan):
        raise UnsupportedExpressionError("the expression is infinite or undefined (e.g. log(0), 1/0)")
    if F.has(sp.I) and sp.cancel(sp.expand(F)).has(sp.I):
        raise UnsupportedExpressionError("F(s) has a complex coefficient (e.g. sqrt(-1))",
                                         "a real system has real coefficients")
    if not isinstance(F, sp.Expr):
        raise UnsupportedExpressionError("not an expression in s")


def invert_expr(F: sp.Expr, *, numeric: bool = True, fast: bool = True):
    check_expr(F)
    if fast:
        from .fast import fast_invert
        res = fast_invert(F)
        if res is not None:
            return res
    if not F.has(S):
        return InversionResult(F, F * sp.DiracDelta(T), "table", (), (F,) if F != 0 else (), ())
    pieces = split_delays(F)
    if pieces is not None:
        return _invert_pieces(F, pieces)
    closed = invert_by_pairs(F)
    if closed is not None:
        return InversionResult(F, closed, "table (non-rational pair)", (), (), ())
    if not numeric:
        raise UnsupportedExpressionError("no closed form is known for this expression",
                                         "numerical inversion is available")
    inverse = NumericInverse.build(F)
    return InversionResult(F, None, f"numerical ({inverse.method})", (), (), (), numerical=inverse)


def _invert_pieces(F, pieces) -> InversionResult:
    delayed = []
    parts = []
    cache: dict = {}
    for piece in pieces:
        key = (piece.num, piece.den)
        if key not in cache:
            cache[key] = decompose(piece.num, piece.den)
        dec = cache[key]
        f = piece.gain * time_function(dec)
        if piece.delay != 0:
            f = f.xreplace({T: T - piece.delay}) * sp.Heaviside(T - piece.delay)
            f = _fix_delta_heaviside(f)
        parts.append(f)
        delayed.append(DelayedPiece(piece.delay, piece.gain, dec))
    f_t = sp.Add(*parts)
    if len(pieces) == 1 and pieces[0].delay == 0:
        dec = delayed[0].decomposition
        method = "partial fractions" + ("" if dec.exact else " (numeric roots)")
        return InversionResult(F, f_t, method, dec.terms, dec.direct, dec.real_terms,
                               pieces=tuple(delayed))
    exact = all(p.decomposition.exact for p in delayed)
    method = "partial fractions + time shift" + ("" if exact else " (numeric roots)")
    return InversionResult(F, f_t, method, (), (), (), pieces=tuple(delayed))


def _fix_delta_heaviside(f):
    """DiracDelta(t-T)*Heaviside(t-T) -> DiracDelta(t-T) (impulses sit at T)."""
    def fix(term):
        if term.has(sp.DiracDelta) and term.has(sp.Heaviside):
            return term.replace(lambda e: isinstance(e, sp.Heaviside), lambda e: sp.S.One)
        return term
    f = sp.expand(f, deep=False, mul=True, multinomial=False, power_exp=False, power_base=False,
                  log=False) if f.has(sp.DiracDelta) else f
    return sp.Add(*[fix(a) for a in sp.Add.make_args(f)])


def time_function(dec: Decomposition) -> sp.Expr:
    """Assemble f(t) from a decomposition (table pairs)."""
    parts = []
    for i, c in enumerate(dec.direct):
        if c != 0:
            parts.append(c * (sp.DiracDelta(T) if i == 0 else sp.DiracDelta(T, i)))
    for pt in dec.pair_terms:
        parts.append(pair_time_term(pt))
    return sp.Add(*parts)


def pair_time_term(pt: PairTerm) -> sp.Expr:
    p = pt.pair
    k = pt.order
    fac = T ** (k - 1) / factorial(k - 1) if k > 1 else sp.S.One
    env = sp.exp(p.alpha * T) if p.alpha != 0 else sp.S.One
    if p.sigma == 0:
        return pt.x * fac * env
    wt = p.omega * T
    if p.sigma == -1:
        return fac * env * (2 * pt.x * sp.cos(wt) - 2 * pt.y * sp.sin(wt))
    # an irrational real pair: two exponentials (cosh/sinh overflow where their difference does not)
    return fac * ((pt.x + pt.y) * sp.exp((p.alpha + p.omega) * T) +
                  (pt.x - pt.y) * sp.exp((p.alpha - p.omega) * T))


__all__ = ["invert", "invert_expr", "time_function", "to_s_expr", "SheetfuncsError"]
