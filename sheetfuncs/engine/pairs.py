"""Closed forms for non-rational F(s) from a table of transform pairs.

Each additive term ``c * exp(-T s) * g(s)`` is matched against the pairs
below (after the first-shift rule ``g(s + a)`` <-> ``e^{-at} f(t)`` where
noted) and delayed by ``T``.  Sources: Abramowitz & Stegun, Handbook of
Mathematical Functions, ch. 29 (table 29.3); the pair numbers are given as
recalled and checked numerically in the tests against mpmath.invertlaplace.
If any term fails to match, the whole expression has no closed form here.
"""
from __future__ import annotations

import sympy as sp

from .._types import S, T
from .split import additive_terms, pure_delay

_k = sp.Wild("k", exclude=[S], properties=[lambda x: x.is_positive])
_a = sp.Wild("a", exclude=[S], properties=[lambda x: x.is_real])
_nu = sp.Wild("nu", exclude=[S], properties=[lambda x: x.is_positive and not x.is_integer])


def _pairs():
    k, a, nu = _k, _a, _nu
    t = T
    return [
        # 29.3.? power: (s + a)^-nu <-> t^(nu-1) e^(-a t) / Gamma(nu)
        ((S + a) ** (-nu), lambda m: t ** (m[nu] - 1) * sp.exp(-m[a] * t) / sp.gamma(m[nu])),
        (S ** (-nu), lambda m: t ** (m[nu] - 1) / sp.gamma(m[nu])),
        # 29.3.82-84: diffusion kernels
        (sp.exp(-k * sp.sqrt(S)), lambda m: m[k] / (2 * sp.sqrt(sp.pi) * t ** sp.Rational(3, 2))
         * sp.exp(-m[k] ** 2 / (4 * t))),
        (sp.exp(-k * sp.sqrt(S)) / S, lambda m: sp.erfc(m[k] / (2 * sp.sqrt(t)))),
        (sp.exp(-k * sp.sqrt(S)) / sp.sqrt(S), lambda m: sp.exp(-m[k] ** 2 / (4 * t)) / sp.sqrt(sp.pi * t)),
        # 1/(s sqrt(s + a)) <-> erf(sqrt(a t))/sqrt(a)
        (1 / (S * sp.sqrt(S + k)), lambda m: sp.erf(sp.sqrt(m[k] * t)) / sp.sqrt(m[k])),
        # 1/(sqrt(s) (s - a)) <-> e^(a t) erf(sqrt(a t)) / sqrt(a)
        (1 / (sp.sqrt(S) * (S - k)), lambda m: sp.exp(m[k] * t) * sp.erf(sp.sqrt(m[k] * t)) / sp.sqrt(m[k])),
        # arctan(k/s) <-> sin(k t)/t
        (sp.atan(k / S), lambda m: sp.sin(m[k] * t) / t),
        # log((s + a)/(s + b)) handled in _log_pair
    ]


def invert_by_pairs(F: sp.Expr):
    """f(t) from the pair table, or None."""
    for terms in (sp.Add.make_args(F), additive_terms(F), sp.Add.make_args(sp.expand(F, deep=False))):
        parts = []
        for term in terms:
            f = _invert_term(term)
            if f is None:
                break
            parts.append(f)
        else:
            return sp.Add(*parts)
    return None


def _invert_term(term):
    coeff, g = term.as_independent(S, as_Add=False)
    delay, rest = pure_delay(g)
    c2, rest = rest.as_independent(S, as_Add=False)
    coeff *= c2
    f = _match(sp.powsimp(rest))
    if f is None:
        return None
    f = coeff * f
    if delay != 0:
        f = f.xreplace({T: T - delay}) * sp.Heaviside(T - delay)
    return f


def _match(g):
    for pattern, build in _pairs():
        m = g.match(pattern)
        if m is not None and all(w in m for w in pattern.atoms(sp.Wild)):
            return build(m)
    return _log_pair(g)


def _log_pair(g):
    # log((s + a)/(s + b)) <-> (e^(-b t) - e^(-a t)) / t
    if isinstance(g, sp.log):
        num, den = sp.fraction(sp.together(g.args[0]))
        try:
            pn, pd = sp.Poly(num, S), sp.Poly(den, S)
        except sp.PolynomialError:
            return None
        if pn.degree() == 1 and pd.degree() == 1 and pn.LC() == pd.LC():
            a = pn.TC() / pn.LC()
            b = pd.TC() / pd.LC()
            return (sp.exp(-b * T) - sp.exp(-a * T)) / T
    return None
