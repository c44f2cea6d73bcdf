"""Exact polynomials over the rationals: the bottom layer of the fast core.

A polynomial is a tuple of ``fractions.Fraction`` coefficients in ascending
powers with no trailing zeros (the zero polynomial is ``()``).  Plain tuples
keep the layer small, hashable and free of SymPy.  Factoring over the
rationals uses python-flint when it is installed (microseconds) and SymPy's
``factor_list`` otherwise (imported only then), so the layer also works in a
Python without flint, such as the WebAssembly one.
"""
from __future__ import annotations

from fractions import Fraction

from . import limits

ZERO: tuple = ()
ONE: tuple = (Fraction(1),)
X: tuple = (Fraction(0), Fraction(1))


def poly(coeffs) -> tuple:
    """Normalised polynomial from ascending coefficients (ints or Fractions)."""
    out = [c if isinstance(c, Fraction) else Fraction(c) for c in coeffs]
    while out and out[-1] == 0:
        out.pop()
    return tuple(out)


def const(c) -> tuple:
    return poly((c,))


def degree(p: tuple) -> int:
    """Degree; -1 for the zero polynomial."""
    return len(p) - 1


def lc(p: tuple) -> Fraction:
    return p[-1] if p else Fraction(0)


def add(p: tuple, q: tuple) -> tuple:
    if len(p) < len(q):
        p, q = q, p
    out = list(p)
    for i, c in enumerate(q):
        out[i] += c
    return poly(out)


def neg(p: tuple) -> tuple:
    return tuple(-c for c in p)


def sub(p: tuple, q: tuple) -> tuple:
    return add(p, neg(q))


def scale(p: tuple, c) -> tuple:
    if c == 0:
        return ZERO
    return tuple(x * c for x in p)


def mul(p: tuple, q: tuple) -> tuple:
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


def power(p: tuple, n: int) -> tuple:
    out, base = ONE, p
    while n:
        if n & 1:
            out = mul(out, base)
        n >>= 1
        if n:
            base = mul(base, base)
    return out


def divmod_(p: tuple, q: tuple) -> tuple[tuple, tuple]:
    """Quotient and remainder of p by q (q not zero)."""
    if not q:
        raise ZeroDivisionError("polynomial division by zero")
    if len(p) < len(q):
        return ZERO, p
    rem = list(p)
    inv = 1 / q[-1]
    dq = len(q) - 1
    quo = [Fraction(0)] * (len(p) - dq)
    for i in range(len(p) - 1, dq - 1, -1):
        c = rem[i] * inv
        quo[i - dq] = c
        if c:
            for j in range(dq + 1):
                rem[i - dq + j] -= c * q[j]
    return poly(quo), poly(rem[:dq])


def rem(p: tuple, q: tuple) -> tuple:
    return divmod_(p, q)[1]


def monic(p: tuple) -> tuple:
    return scale(p, 1 / p[-1]) if p else p


def gcd(p: tuple, q: tuple) -> tuple:
    """Monic greatest common divisor."""
    while q:
        limits.check()
        p, q = q, rem(p, q)
    return monic(p)


def gcdex(p: tuple, q: tuple) -> tuple[tuple, tuple, tuple]:
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


def derivative(p: tuple) -> tuple:
    return poly(i * c for i, c in enumerate(p) if i)


def value(p: tuple, x):
    """p(x) by Horner's rule (x of any number type)."""
    acc = 0
    for c in reversed(p):
        acc = acc * x + c
    return acc


def shift(p: tuple, a) -> tuple:
    """Coefficients of p(x + a) (Taylor shift, exact)."""
    out = list(p)
    n = len(out)
    for i in range(n):
        for j in range(n - 2, i - 1, -1):
            out[j] += a * out[j + 1]
    return poly(out)


def factor(p: tuple) -> list[tuple[tuple, int]]:
    """Irreducible monic factors over the rationals with multiplicities."""
    if degree(p) <= 0:
        return []
    if degree(p) == 1:
        return [(monic(p), 1)]
    try:
        import flint
    except ImportError:
        return _factor_sympy(p)
    fp = flint.fmpq_poly([flint.fmpq(c.numerator, c.denominator) for c in p])
    _, factors = fp.factor()
    out = []
    for f, m in factors:
        coeffs = [Fraction(int(c.p), int(c.q)) if hasattr(c, "q") else Fraction(int(c))
                  for c in f.coeffs()]
        out.append((monic(poly(coeffs)), int(m)))
    return out


def _factor_sympy(p: tuple) -> list[tuple[tuple, int]]:
    import sympy as sp
    x = sp.Symbol("x")
    P = sp.Poly([sp.Rational(c.numerator, c.denominator) for c in reversed(p)], x, domain="QQ")
    _, factors = P.factor_list()
    out = []
    for f, m in factors:
        coeffs = [Fraction(int(sp.Rational(c).p), int(sp.Rational(c).q)) for c in reversed(f.all_coeffs())]
        out.append((monic(poly(coeffs)), int(m)))
    return out
