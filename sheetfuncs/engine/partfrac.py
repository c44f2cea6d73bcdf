"""Partial fractions of a rational function of s.

Exact route (rational or symbolic coefficients): polynomial division gives
the direct part; the denominator is factored over the coefficient field; for
each irreducible factor f of multiplicity m the numerator of that factor is
``A = P * (Q / f^m)^-1 mod f^m`` and its f-adic expansion gives the
real-form groups ``a_k(s) / f^k``.  Linear and quadratic factors then give
exact complex terms ``c / (s - p)^k``; factors of degree three and more (no
clean radicals) get polished numeric roots and numeric residues.

No clustering of near-equal numeric roots is needed: decimals are read as
exact rationals, so a repeated pole is an exact repeated factor, and the
roots of one irreducible factor are distinct (residues are computed at 40
digits, so even close roots keep their accuracy).

Complex-conjugate (or irrational real) pole pairs ``alpha +- j*omega`` are
handled with a small pair arithmetic over ``x + j*y`` where ``j^2 = sigma``
(-1 for complex pairs, +1 for irrational real pairs), so no imaginary unit
reaches the time function.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

from math import comb

import mpmath
import sympy as sp

from .._types import S
from ..errors import ParameterError, UnsupportedExpressionError
from .modal import _deflate, polish_roots  # noqa: F401 - one place for the numeric helpers
from .modal import laurent as _laurent

#: working precision (decimal digits) for numeric roots and residues
NUMERIC_DPS = 40


@dataclass(frozen=True)
class Term:
    """``coefficient / (s - pole)^order`` (complex form)."""
    pole: sp.Expr
    order: int
    coefficient: sp.Expr


@dataclass(frozen=True)
class RealTerm:
    """``numerator / base^power`` with ``base`` monic and irreducible over the
    reals (``s + a`` or ``s^2 + b s + c``) or, for numeric factors, over the
    rationals."""
    numerator: sp.Expr
    base: sp.Expr
    power: int


@dataclass(frozen=True)
class PolePair:
    """Poles ``alpha +- j*omega`` with ``j^2 = sigma``; sigma 0 means one real pole."""
    alpha: sp.Expr
    omega: sp.Expr
    sigma: int


@dataclass(frozen=True)
class PairTerm:
    """Laurent coefficient ``x + j*y`` of order ``order`` at the pole pair."""
    pair: PolePair
    order: int
    x: sp.Expr
    y: sp.Expr


@dataclass(frozen=True)
class Decomposition:
    """F(s) = sum direct[i] s^i + sum of terms (each complex term once)."""
    direct: tuple
    pair_terms: tuple
    real_terms: tuple
    exact: bool

    @property
    def terms(self) -> tuple:
        out = []
        for pt in self.pair_terms:
            out.extend(pair_to_terms(pt))
        return tuple(out)

    @property
    def poles(self) -> tuple:
        """(pole, multiplicity) with each pole once."""
        seen: dict = {}
        for term in self.terms:
            seen[term.pole] = max(seen.get(term.pole, 0), term.order)
        return tuple(seen.items())


def pair_to_terms(pt: PairTerm) -> list[Term]:
    p = pt.pair
    if p.sigma == 0:
        return [Term(p.alpha, pt.order, pt.x)]
    if p.sigma == -1:
        return [Term(p.alpha + sp.I * p.omega, pt.order, pt.x + sp.I * pt.y),
                Term(p.alpha - sp.I * p.omega, pt.order, pt.x - sp.I * pt.y)]
    return [Term(p.alpha + p.omega, pt.order, pt.x + pt.y),
            Term(p.alpha - p.omega, pt.order, pt.x - pt.y)]


# --------------------------------------------------------------------------
def decompose(num: sp.Expr, den: sp.Expr) -> Decomposition:
    """Partial fractions of ``num/den`` (polynomials in s)."""
    try:
        P = sp.Poly(num, S, field=True)
        Q = sp.Poly(den, S, field=True)
        P, Q = _unify(P, Q)
    except sp.PolynomialError as exc:
        raise UnsupportedExpressionError(f"not a rational function of s: {exc}") from exc
    if Q.is_zero:
        raise UnsupportedExpressionError("the denominator is zero")
    g = P.gcd(Q)
    if g.degree() > 0:
        P, Q = P.quo(g), Q.quo(g)
    direct_poly, P1 = P.div(Q)
    direct = tuple(reversed(direct_poly.all_coeffs())) if not direct_poly.is_zero else ()
    direct = tuple(_dom_expr(c, P1) for c in direct)
    exact = True
    pair_terms: list[PairTerm] = []
    real_terms: list[RealTerm] = []
    if not P1.is_zero:
        lc, factors = Q.factor_list()
        Q_monic = Q.monic()
        P1 = P1.quo_ground(Q.LC())
        for f, m in factors:
            f = f.monic()
            groups = _factor_groups(P1, Q_monic, f, m)
            for k, r in groups:
                if not r.is_zero:
                    real_terms.append(RealTerm(r.as_expr(), f.as_expr(), k))
            if f.degree() == 1:
                pole = -_dom_expr(f.TC(), f)
                pair = PolePair(pole, sp.S.Zero, 0)
                for k, r in groups:
                    if not r.is_zero:
                        pair_terms.append(PairTerm(pair, k, _dom_expr(r.TC(), r), sp.S.Zero))
            elif f.degree() == 2 and _quadratic_sign(f) is not None:
                pair_terms.extend(_quadratic_terms(f, groups))
            else:
                _require_numeric(f)
                exact = False
                pair_terms.extend(_numeric_terms(f, groups))
    pair_terms = _merge(pair_terms)
    if not exact:
        real_terms = _numeric_real_terms(real_terms, pair_terms)
    return Decomposition(direct, tuple(pair_terms), tuple(real_terms), exact)


def _unify(P, Q):
    dom = P.domain.unify(Q.domain)
    if not dom.is_Field:
        dom = dom.get_field()
    return P.set_domain(dom), Q.set_domain(dom)


def _dom_expr(c, poly):
    return poly.domain.to_sympy(c)


def _factor_groups(P1, Qm, f, m):
    """[(k, a_k)] with a_k / f^k the groups of the factor f^m."""
    fm = f ** m
    rest = Qm.quo(fm)
    if rest.degree() == 0:
        A = P1.rem(fm)
    else:
        u, _v, h = rest.gcdex(fm)    # u*rest + v*fm = h (a constant)
        A = (P1 * u).rem(fm).quo_ground(h.LC())
    groups = []
    for k in range(m, 0, -1):
        q, r = A.div(f)
        groups.append((k, r))
        A = q
    return groups


def _quadratic_sign(f):
    """sigma for a monic quadratic: -1 complex pair, +1 real irrational pair,
    None when the sign of the discriminant is unknown (symbolic)."""
    _, b, c = [f.domain.to_sympy(x) for x in f.all_coeffs()]
    disc = sp.cancel(b * b / 4 - c)
    if disc.is_negative:
        return -1
    if disc.is_positive:
        return 1
    return None


class _Surd:
    """``p + q*w`` with ``w = sqrt(W)``; p, q, W exact fractions (fast exact arithmetic
    for quadratic factors with rational coefficients)."""
    __slots__ = ("p", "q", "W")

    def __init__(self, p, q, W):
        self.p, self.q, self.W = p, q, W

    def _c(self, o):
        return o if isinstance(o, _Surd) else _Surd(Fraction(o), Fraction(0), self.W)

    def __add__(self, o):
        o = self._c(o)
        return _Surd(self.p + o.p, self.q + o.q, self.W)

    __radd__ = __add__

    def __mul__(self, o):
        o = self._c(o)
        return _Surd(self.p * o.p + self.q * o.q * self.W, self.p * o.q + self.q * o.p, self.W)

    __rmul__ = __mul__

    def __neg__(self):
        return _Surd(-self.p, -self.q, self.W)

    def expr(self, omega):
        return sp.Rational(self.p.numerator, self.p.denominator) + \
            sp.Rational(self.q.numerator, self.q.denominator) * omega


def _fraction(x) -> Fraction:
    r = sp.Rational(x)
    return Fraction(int(r.p), int(r.q))


def _quadratic_terms_rational(f, groups):
    """_quadratic_terms for rational coefficients, in exact surd arithmetic."""
    _, b, c = [_fraction(f.domain.to_sympy(x)) for x in f.all_coeffs()]
    alpha = -b / 2
    disc = b * b / 4 - c
    sigma = -1 if disc < 0 else 1
    W = -disc if sigma == -1 else disc
    omega = sp.sqrt(sp.Rational(W.numerator, W.denominator))
    one = _Surd(Fraction(0), Fraction(1), W)                # omega itself
    pair = PolePair(sp.Rational(alpha.numerator, alpha.denominator), omega, sigma)
    out = []
    for k, r in groups:
        if r.is_zero:
            continue
        coeffs = r.all_coeffs()
        A = _fraction(r.domain.to_sympy(coeffs[-2])) if len(coeffs) == 2 else Fraction(0)
        B = _fraction(r.domain.to_sympy(coeffs[-1]))
        apb = (_Surd(A * alpha + B, Fraction(0), W), A * one)
        b_prev = None
        for n in range(k):
            m = k + n
            scale = Fraction(_binom_neg(k, n), 2 ** m)
            mag = _Surd(scale / W ** (m // 2), Fraction(0), W) if m % 2 == 0 else \
                _Surd(Fraction(0), scale / W ** ((m + 1) // 2), W)      # (2 omega)^-m * binom
            jr = m % 4 if sigma == -1 else m % 2
            zero = _Surd(Fraction(0), Fraction(0), W)
            bn = [(mag, zero), (zero, -mag), (-mag, zero), (zero, mag)][jr] if sigma == -1 \
                else [(mag, zero), (zero, mag)][jr]
            x, y = _pair_mul(apb, bn, sigma)
            if b_prev is not None:
                x, y = x + A * b_prev[0], y + A * b_prev[1]
            out.append(PairTerm(pair, k - n, x.expr(omega), y.expr(omega)))
            b_prev = bn
    return out


def _quadratic_terms(f, groups):
    if f.domain.is_QQ or f.domain.is_ZZ:
        return _quadratic_terms_rational(f, groups)
    _, b, c = [f.domain.to_sympy(x) for x in f.all_coeffs()]
    alpha = -b / 2
    disc = sp.cancel(b * b / 4 - c)
    sigma = -1 if disc.is_negative else 1
    omega = sp.sqrt(-disc if sigma == -1 else disc)
    omega = sp.radsimp(omega) if omega.free_symbols else omega
    pair = PolePair(sp.cancel(alpha), omega, sigma)
    out = []
    for k, r in groups:
        if r.is_zero:
            continue
        coeffs = r.all_coeffs()
        A = r.domain.to_sympy(coeffs[-2]) if len(coeffs) == 2 else sp.S.Zero
        B = r.domain.to_sympy(coeffs[-1])
        # (A s + B)/f^k at p = alpha + j omega:  (A p + B + A h) * (2 j omega + h)^-k
        apb = (A * alpha + B, A * omega)               # A p + B as x + j y
        b_prev = None
        for n in range(k):
            bn = _pair_scale(_pair_jpow_inv(2 * omega, k + n, sigma), _binom_neg(k, n))
            x, y = _pair_mul(apb, bn, sigma)
            if b_prev is not None:
                x2, y2 = b_prev
                x, y = x + A * x2, y + A * y2
            out.append(PairTerm(pair, k - n, _tidy(x), _tidy(y)))
            b_prev = bn
    return out


def _binom_neg(k, n):
    """binomial(-k, n)."""
    return (-1) ** n * comb(k + n - 1, n)


def _pair_mul(a, b, sigma):
    return (a[0] * b[0] + sigma * a[1] * b[1], a[0] * b[1] + a[1] * b[0])


def _pair_scale(a, c):
    return (a[0] * c, a[1] * c)


def _pair_jpow_inv(w2, m, sigma):
    """(j * w2)^(-m) as a pair."""
    mag = w2 ** (-m)
    # j^-1 = j / sigma, so j^-m = (j/sigma)^m
    r = m % 4 if sigma == -1 else m % 2
    if sigma == -1:
        return [(mag, 0), (0, -mag), (-mag, 0), (0, mag)][r]
    return [(mag, 0), (0, mag)][r]


def _tidy(x):
    return sp.radsimp(sp.cancel(x)) if x.free_symbols else sp.radsimp(x)


def _merge(pair_terms):
    acc: dict = {}
    order = []
    for pt in pair_terms:
        key = (pt.pair, pt.order)
        if key in acc:
            x, y = acc[key]
            acc[key] = (x + pt.x, y + pt.y)
        else:
            acc[key] = (pt.x, pt.y)
            order.append(key)
    out = []
    for pair, k in order:
        x, y = acc[(pair, k)]
        if x != 0 or y != 0:
            out.append(PairTerm(pair, k, x, y))
    out.sort(key=lambda pt: (_sort_key(pt.pair), pt.order))
    return out


def _sort_key(pair):
    try:
        return (float(sp.re(pair.alpha)), float(pair.omega) if pair.omega.is_number else 0.0)
    except TypeError:
        return (0.0, 0.0)


# numeric factors ------------------------------------------------------------
def _require_numeric(f):
    syms = sorted(str(x) for x in f.as_expr().free_symbols if x != S)
    if syms and f.degree() == 2:
        raise ParameterError(
            f"whether the poles of {f.as_expr()} are real, repeated or complex depends on the "
            f"parameters; give values for {', '.join(syms)}", syms[0])
    if syms:
        raise ParameterError(
            f"the poles of {f.as_expr()} have no closed form in the parameters; "
            f"give values for {', '.join(syms)}", syms[0])


def _numeric_terms(f, groups):
    coeffs = [mpmath.mpf(sp.Rational(f.domain.to_sympy(c)).p) / sp.Rational(f.domain.to_sympy(c)).q
              for c in f.all_coeffs()]
    out = []
    with mpmath.workdps(NUMERIC_DPS):
        roots = polish_roots(coeffs)
        for z in roots:
            if z.imag < 0 and abs(z.imag) > abs(z) * mpmath.mpf(10) ** (-30):
                continue                      # the conjugate represents the pair
            real = abs(z.imag) <= abs(z) * mpmath.mpf(10) ** (-30)
            if real:
                z = mpmath.mpc(z.real, 0)
            g = _deflate(coeffs, z)           # f / (s - z)
            for k, r in groups:
                if r.is_zero:
                    continue
                rc = [mpmath.mpf(sp.Rational(r.domain.to_sympy(c)).p) / sp.Rational(r.domain.to_sympy(c)).q
                      for c in r.all_coeffs()]
                laurent = _laurent(rc, g, z, k)
                for j, c in enumerate(laurent):   # c multiplies 1/(s-z)^(k-j)
                    if real:
                        pair = PolePair(sp.Float(z.real, 17), sp.S.Zero, 0)
                        out.append(PairTerm(pair, k - j, sp.Float(c.real, 17), sp.S.Zero))
                    else:
                        pair = PolePair(sp.Float(z.real, 17), sp.Float(z.imag, 17), -1)
                        out.append(PairTerm(pair, k - j, sp.Float(c.real, 17), sp.Float(c.imag, 17)))
    return out


def _numeric_real_terms(exact_groups, pair_terms):
    """Real-form groups rebuilt from numeric pair terms (simple poles), keeping
    exact groups of linear and quadratic factors."""
    out = [g for g in exact_groups if sp.Poly(g.base, S).degree() <= 2]
    for pt in pair_terms:
        p = pt.pair
        if not isinstance(p.alpha, sp.Float) and not isinstance(p.omega, sp.Float):
            continue
        if p.sigma == 0:
            out.append(RealTerm(pt.x, S - p.alpha, pt.order))
        elif pt.order == 1:
            # 2 Re[c/(s-p)] = (2x s - 2(x alpha + y omega)) / ((s-alpha)^2 + omega^2)
            base = S ** 2 - 2 * p.alpha * S + (p.alpha ** 2 + p.omega ** 2)
            out.append(RealTerm(2 * pt.x * S - 2 * (pt.x * p.alpha + pt.y * p.omega), base, 1))
    return out
