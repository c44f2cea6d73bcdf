"""Exact polynomials over the rationals: the bottom layer of the fast core.

Two interchangeable backends behind one set of functions:

* python-flint (``fmpq_poly`` and ``fmpq``, C code) when it is installed;
* plain tuples of ``fractions.Fraction`` in ascending powers otherwise, so the
  layer also works in a Python without flint, such as the WebAssembly one
  (factoring then uses SymPy's ``factor_list``, imported only then).

Callers treat polynomials as opaque values and scalars as exact rationals
made by :func:`Q`; they read coefficients with :func:`coeffs` (ascending).
``SHEETFUNCS_NO_FLINT=1`` forces the fallback (the tests use it).
"""
from __future__ import annotations

import os
from fractions import Fraction

from . import limits

try:
    if os.environ.get("SHEETFUNCS_NO_FLINT", "").strip() in ("1", "true", "yes"):
        raise ImportError("flint switched off")
    import flint as _flint
except ImportError:              # pragma: no cover - exercised in a subprocess test
    _flint = None

BACKEND = "flint" if _flint is not None else "python"

if _flint is not None:
    _fmpq = _flint.fmpq
    _P = _flint.fmpq_poly
    RATIONAL = (_fmpq,)

    def Q(n, d=1):
        """An exact rational scalar of the active backend."""
        t = type(n)
        if t is _fmpq:
            return n if d == 1 else n / d
        if t is int:
            return _fmpq(n, d)
        if isinstance(n, Fraction):
            return _fmpq(n.numerator, n.denominator * int(d))
        return _fmpq(int(n), int(d))
else:
    RATIONAL = (Fraction,)

    def Q(n, d=1):
        """An exact rational scalar of the active backend."""
        return Fraction(n, d) if d != 1 else (n if isinstance(n, Fraction) else Fraction(n))


def to_fraction(x) -> Fraction:
    return Fraction(int(x.numerator), int(x.denominator))


# ---------------------------------------------------------------------- construction
if _flint is not None:
    def poly(cs) -> object:
        """Polynomial from ascending coefficients."""
        return _P([Q(c) for c in cs])

    ZERO = _P([])
    ONE = _P([1])
    X = _P([0, 1])

    def coeffs(p) -> list:
        return p.coeffs()

    def degree(p) -> int:
        return p.degree()

    def is_zero(p) -> bool:
        return p.degree() < 0

    def lc(p):
        return p.leading_coefficient() if p.degree() >= 0 else Q(0)

    def coeff(p, i):
        return p[i]

    def add(p, q):
        return p + q

    def sub(p, q):
        return p - q

    def neg(p):
        return -p

    def scale(p, c):
        return p * c

    def mul(p, q):
        return p * q

    def power(p, n: int):
        return p ** n

    def divmod_(p, q):
        if q.degree() < 0:
            raise ZeroDivisionError("polynomial division by zero")
        return divmod(p, q)

    def rem(p, q):
        return p % q

    def gcd(p, q):
        if p.degree() < 0:
            return monic(q)
        if q.degree() < 0:
            return monic(p)
        return p.gcd(q)

    def gcdex(p, q):
        """(u, v, g) with u p + v q = g = gcd(p, q) monic."""
        g, u, v = p.xgcd(q)
        c = 1 / g.leading_coefficient()
        return u * c, v * c, g * c

    def derivative(p):
        return p.derivative()

    def value(p, x):
        if isinstance(x, (int,) + RATIONAL):
            return p(Q(x))
        acc = 0
        for c in reversed(p.coeffs()):
            acc = acc * x + c
        return acc

    def factor(p) -> list:
        """Irreducible monic factors over the rationals with multiplicities."""
        if p.degree() <= 0:
            return []
        if p.degree() == 1:
            return [(monic(p), 1)]
        _, fs = p.factor()
        return [(monic(_P(f)), int(m)) for f, m in fs]
else:
    def poly(cs) -> tuple:
        """Polynomial from ascending coefficients."""
        out = [c if isinstance(c, Fraction) else Fraction(c) for c in cs]
        while out and out[-1] == 0:
            out.pop()
        return tuple(out)

    ZERO: tuple = ()
    ONE: tuple = (Fraction(1),)
    X: tuple = (Fraction(0), Fraction(1))

    def coeffs(p) -> list:
        return list(p)

    def degree(p) -> int:
        return len(p) - 1

    def is_zero(p) -> bool:
        return not p

    def lc(p):
        return p[-1] if p else Fraction(0)

    def coeff(p, i):
        return p[i] if i < len(p) else Fraction(0)

    def add(p, q):
        if len(p) < len(q):
            p, q = q, p
        out = list(p)
        for i, c in enumerate(q):
            out[i] += c
        return poly(out)

    def neg(p):
        return tuple(-c for c in p)

    def sub(p, q):
        return add(p, neg(q))

    def scale(p, c):
        if c == 0:
            return ZERO
        return tuple(x * c for x in p)

    def mul(p, q):
        if not p or not q:
            return ZERO
        if len(p) == 1:
            return scale(q, p[0])
        if len(q) == 1:
            return scale(p, q[0])
        out = [Fraction(0)] * (len(p) + len(q) - 1)
        for i, a in enumerate(p):
            if a:
                for j, b in enumerate(q):
                    out[i + j] += a * b
        return poly(out)

    def power(p, n: int):
        out, base = ONE, p
        while n:
            if n & 1:
                out = mul(out, base)
            n >>= 1
            if n:
                base = mul(base, base)
        return out

    def divmod_(p, q):
        if not q:
            raise ZeroDivisionError("polynomial division by zero")
        if len(p) < len(q):
            return ZERO, p
        r = list(p)
        inv = 1 / q[-1]
        dq = len(q) - 1
        quo = [Fraction(0)] * (len(p) - dq)
        for i in range(len(p) - 1, dq - 1, -1):
            c = r[i] * inv
            quo[i - dq] = c
            if c:
                for j in range(dq + 1):
                    r[i - dq + j] -= c * q[j]
        return poly(quo), poly(r[:dq])

    def rem(p, q):
        return divmod_(p, q)[1]

    def gcd(p, q):
        while q:
            limits.check()
            p, q = q, rem(p, q)
        return monic(p)

    def gcdex(p, q):
        """(u, v, g) with u p + v q = g = gcd(p, q) monic."""
        r0, r1 = p, q
        u0, u1 = ONE, ZERO
        v0, v1 = ZERO, ONE
        while r1:
            limits.check()
            quo, r2 = divmod_(r0, r1)
            r0, r1 = r1, r2
            u0, u1 = u1, sub(u0, mul(quo, u1))
            v0, v1 = v1, sub(v0, mul(quo, v1))
        c = 1 / r0[-1]
        return scale(u0, c), scale(v0, c), scale(r0, c)

    def derivative(p):
        return poly(i * c for i, c in enumerate(p) if i)

    def value(p, x):
        acc = 0
        for c in reversed(p):
            acc = acc * x + c
        return acc

    def factor(p) -> list:
        """Irreducible monic factors over the rationals with multiplicities."""
        if degree(p) <= 0:
            return []
        if degree(p) == 1:
            return [(monic(p), 1)]
        import sympy as sp
        x = sp.Symbol("x")
        P = sp.Poly([sp.Rational(c.numerator, c.denominator) for c in reversed(p)], x, domain="QQ")
        _, factors = P.factor_list()
        out = []
        for f, m in factors:
            cs = [Fraction(int(sp.Rational(c).p), int(sp.Rational(c).q)) for c in reversed(f.all_coeffs())]
            out.append((monic(poly(cs)), int(m)))
        return out


def const(c):
    return poly((c,))


def monic(p):
    return scale(p, 1 / lc(p)) if not is_zero(p) else p
