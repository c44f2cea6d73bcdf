"""Property tests (hypothesis): random stable rational F(s) built from their
poles, checked against mpmath alone.

* f(t) from sheetfuncs vs ``mpmath.invertlaplace`` (Talbot) at a few t,
  relative to the function's scale on those points, tolerance 1e-8;
* the partial fractions reassembled, sum(direct[i] s^i) + sum c/(s-p)^k,
  equal F(s) at random complex s (right half-plane, away from the poles).

F(s) is built by the test from poles with one decimal (real poles and complex
pairs with negative real parts, multiplicities 1-2, degree <= 6) and a
numerator of lower degree with small integer or one-decimal coefficients; the
reference side evaluates it from those numbers, never from the engine.
Examples are derandomised so the suite is repeatable.
"""
from __future__ import annotations

from fractions import Fraction

import mpmath
import numpy as np
import sympy as sp
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

import sheetfuncs

TIMES = [0.05, 0.3, 1.0, 2.5, 5.0]
SETTINGS = settings(max_examples=30, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])

tenths = st.integers(1, 40).map(lambda k: Fraction(k, 10))          # 0.1 ... 4.0


@st.composite
def stable_rational(draw):
    """(text, numerator coefficients ascending, factors) with factors
    ('real', p, m) for (s + p)^m or ('pair', a, w, m) for ((s + a)^2 + w^2)^m."""
    factors, degree, used = [], 0, set()
    for _ in range(draw(st.integers(1, 4))):
        m = draw(st.integers(1, 2))
        if draw(st.booleans()):
            p = draw(tenths)
            if degree + m > 6 or ("r", p) in used:
                continue
            used.add(("r", p))
            factors.append(("real", p, m))
            degree += m
        else:
            a, w = draw(tenths), draw(tenths)
            if degree + 2 * m > 6 or ("c", a, w) in used:
                continue
            used.add(("c", a, w))
            factors.append(("pair", a, w, m))
            degree += 2 * m
    if not factors:
        factors, degree = [("real", Fraction(1), 1)], 1
    coeff = st.one_of(st.integers(-5, 5).map(Fraction), st.integers(-50, 50).map(lambda k: Fraction(k, 10)))
    num = draw(st.lists(coeff, min_size=1, max_size=degree))
    if all(c == 0 for c in num):
        num[0] = Fraction(1)
    return _text(num, factors), num, factors


def _dec(x: Fraction) -> str:
    return str(float(x)) if x.denominator != 1 else str(x.numerator)


def _text(num, factors) -> str:
    top = " + ".join(f"({_dec(c)})" + (f" s^{i}" if i else "") for i, c in enumerate(num) if c != 0)
    parts = []
    for f in factors:
        if f[0] == "real":
            _, p, m = f
            parts.append(f"(s + {_dec(p)})^{m}")
        else:
            _, a, w, m = f
            parts.append(f"(s^2 + {_dec(2 * a)}s + {_dec(a * a + w * w)})^{m}")
    return f"({top})/({' '.join(parts)})"


def _F(num, factors):
    """F(s) for mpmath, from the drawn numbers."""
    def F(s):
        top = sum(mpmath.mpf(c.numerator) / c.denominator * s ** i for i, c in enumerate(num))
        bottom = mpmath.mpf(1)
        for f in factors:
            if f[0] == "real":
                _, p, m = f
                bottom *= (s + mpmath.mpf(p.numerator) / p.denominator) ** m
            else:
                _, a, w, m = f
                a = mpmath.mpf(a.numerator) / a.denominator
                w = mpmath.mpf(w.numerator) / w.denominator
                bottom *= ((s + a) ** 2 + w ** 2) ** m
        return top / bottom
    return F


@SETTINGS
@given(stable_rational())
def test_time_function_matches_talbot(case):
    text, num, factors = case
    F = _F(num, factors)
    with mpmath.workdps(25):
        ref = np.array([float(mpmath.invertlaplace(F, x, method="talbot")) for x in TIMES])
    got = sheetfuncs.sample(text, TIMES).y
    scale = max(float(np.max(np.abs(ref))), 1e-300)
    assert float(np.max(np.abs(got - ref))) / scale < 1e-8, text


def _mp(x):
    """An engine number (SymPy) as an mpmath complex at 30 digits."""
    v = sp.N(x, 30)
    return mpmath.mpc(str(sp.re(v)), str(sp.im(v)))


@SETTINGS
@given(stable_rational(), st.lists(st.tuples(st.floats(0.2, 4.0), st.floats(-6.0, 6.0)),
                                   min_size=3, max_size=3))
def test_partial_fractions_reassemble(case, points):
    """Summed at 30 digits: close poles give large coefficients that cancel
    (1/((s+0.1)^2 (s+0.2)^2 (s+0.3)^2) has +-75000), too much for doubles."""
    text, num, factors = case
    F = _F(num, factors)
    res = sheetfuncs.invert(text)
    with mpmath.workdps(30):
        terms = [(_mp(t.pole), t.order, _mp(t.coefficient)) for t in res.terms]
        direct = [_mp(c) for c in res.direct]
        for re, im in points:
            s = mpmath.mpc(re, im)
            total = sum((c * s ** i for i, c in enumerate(direct)), mpmath.mpc(0))
            total += sum((c / (s - p) ** k for p, k, c in terms), mpmath.mpc(0))
            ref = F(s)
            assert abs(total - ref) <= 1e-20 * abs(ref), text


@st.composite
def stable_polynomial_ratio(draw):
    """Monic denominators of degree 3-5 with small integer coefficients, kept
    when numpy finds all roots at Re < -0.05 and apart from each other (these
    are mostly irreducible, so the engine takes its numeric-roots route)."""
    n = draw(st.integers(3, 5))
    den = [1] + draw(st.lists(st.integers(1, 12), min_size=n, max_size=n))  # highest first
    roots = np.roots(den)
    sep = min(abs(a - b) for i, a in enumerate(roots) for b in roots[i + 1:])
    assume(np.all(roots.real < -0.05) and sep > 0.05)
    num = draw(st.lists(st.integers(-5, 5), min_size=1, max_size=n))       # ascending
    assume(any(num))
    top = " + ".join(f"({c}) s^{i}" for i, c in enumerate(num) if c)
    bottom = " + ".join(f"{c} s^{n - i}" for i, c in enumerate(den))
    return f"({top})/({bottom})", num, den


@settings(max_examples=20, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(stable_polynomial_ratio())
def test_integer_coefficient_denominators_match_talbot(case):
    text, num, den = case

    def F(s):
        return (sum(c * s ** i for i, c in enumerate(num))
                / sum(c * s ** (len(den) - 1 - i) for i, c in enumerate(den)))
    with mpmath.workdps(25):
        ref = np.array([float(mpmath.invertlaplace(F, x, method="talbot")) for x in TIMES])
    got = sheetfuncs.sample(text, TIMES).y
    scale = max(float(np.max(np.abs(ref))), 1e-300)
    assert float(np.max(np.abs(got - ref))) / scale < 1e-8, text
    res = sheetfuncs.invert(text)          # numeric roots: reassemble at 30 digits too
    with mpmath.workdps(30):
        for s in (mpmath.mpc(0.5, 2.0), mpmath.mpc(3.0, -1.0)):
            total = sum((_mp(t.coefficient) / (s - _mp(t.pole)) ** t.order for t in res.terms),
                        mpmath.mpc(0))
            assert abs(total - F(s)) <= 1e-15 * abs(F(s)), text
