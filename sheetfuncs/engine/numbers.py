"""The numbers of the fast core: exact rationals, exact surds, high-precision floats.

* ``Fraction``          -- exact rational (poles and residues of linear factors);
* :class:`Surd`         -- exact ``p + q*sqrt(W)`` with rational p, q, W (quadratic factors);
* ``mpmath.mpf``        -- a polished numeric value at ``NUMERIC_DPS`` digits (factors of
  degree >= 3, and the dead-time series).

``to_mp`` and ``to_float`` convert any of them without losing digits first
(a surd is summed in extended precision, so ``-310 + sqrt(92100)`` keeps its
digits); ``text`` prints SymPy syntax that ``sympify`` reads back.
"""
from __future__ import annotations

import math
from fractions import Fraction
from functools import lru_cache

from .qpoly import RATIONAL, Q

_RAT = (Fraction,) + RATIONAL
_FAST = RATIONAL

#: working precision (decimal digits) of numeric roots and residues
NUMERIC_DPS = 60


class Surd:
    """``p + q*sqrt(W)`` with Fractions p, q and W > 0 (W not a square)."""
    __slots__ = ("p", "q", "W")

    def __init__(self, p, q, W):
        self.p = p if type(p) in _FAST else Q(p)
        self.q = q if type(q) in _FAST else Q(q)
        self.W = W if type(W) in _FAST else Q(W)

    def _c(self, o):
        if isinstance(o, Surd):
            if o.W != self.W and o.q and self.q:
                raise ValueError("surds of different radicands")
            return o
        return Surd(o, 0, self.W)

    def __add__(self, o):
        if _is_mp(o):
            return to_mp(self) + o
        o = self._c(o)
        return Surd(self.p + o.p, self.q + o.q, self.W if self.q or not o.q else o.W)

    __radd__ = __add__

    def __sub__(self, o):
        return self + (-o)

    def __rsub__(self, o):
        return (-self) + o

    def __mul__(self, o):
        if _is_mp(o):
            return to_mp(self) * o
        o = self._c(o)
        W = self.W if self.q else o.W
        return Surd(self.p * o.p + self.q * o.q * W, self.p * o.q + self.q * o.p, W)

    __rmul__ = __mul__

    def __neg__(self):
        return Surd(-self.p, -self.q, self.W)

    def __eq__(self, o):
        if isinstance(o, Surd):
            return self.p == o.p and self.q == o.q and (self.q == 0 or self.W == o.W)
        return self.q == 0 and self.p == o

    def __hash__(self):
        return hash((self.p, self.q, self.W if self.q else 0))

    def __bool__(self):
        return bool(self.p) or bool(self.q)

    def __repr__(self):
        return f"Surd({self.p}, {self.q}, {self.W})"


def _is_mp(x) -> bool:
    return type(x).__module__.startswith("mpmath")


def is_exact(x) -> bool:
    return isinstance(x, (int, Surd) + _RAT)


def to_mp(x, dps: int | None = None):
    """x as an mpmath number at the current (or given) precision."""
    import mpmath
    if dps is not None:
        with mpmath.workdps(dps):
            return to_mp(x)
    if isinstance(x, Surd):
        out = to_mp(x.p)
        if x.q:
            out += to_mp(x.q) * mpmath.sqrt(to_mp(x.W))
        return out
    if isinstance(x, _RAT):
        return mpmath.mpf(int(x.numerator)) / int(x.denominator)
    if isinstance(x, int):
        return mpmath.mpf(x)
    return +x


def to_float(x) -> float:
    """x rounded to the nearest double (surds summed in extended precision first)."""
    if isinstance(x, _RAT):
        return float(x)           # correctly rounded
    if isinstance(x, int):
        return float(x)
    if isinstance(x, Surd):
        if not x.q:
            return float(x.p)
        a, b = float(x.p), float(x.q) * math.sqrt(float(x.W))
        if a == 0 or (a > 0) == (b > 0) or abs(a + b) > 1e-3 * max(abs(a), abs(b)):
            return a + b
        return float(to_mp(x, 40))
    return float(x)


def text(x) -> str:
    """SymPy syntax of an exact or numeric value (numeric: 17 significant digits)."""
    if isinstance(x, int):
        return str(x)
    if isinstance(x, _RAT):
        n, d = int(x.numerator), int(x.denominator)
        return str(n) if d == 1 else f"{n}/{d}"
    if isinstance(x, Surd):
        if not x.q:
            return text(x.p)
        k, core = _square_part(int(x.W.numerator) * int(x.W.denominator))
        q = x.q * Q(k, int(x.W.denominator))          # q sqrt(W) = q k / den * sqrt(core)
        root = f"sqrt({core})"
        neg = q < 0
        a = -q if neg else q
        an, ad = int(a.numerator), int(a.denominator)
        body = root if a == 1 else (f"{root}/{ad}" if an == 1 else
                                    f"{an}*{root}" + (f"/{ad}" if ad != 1 else ""))
        if not x.p:
            return ("-" if neg else "") + body
        return f"{text(x.p)} {'-' if neg else '+'} {body}"
    return repr(float(x))


_SMALL_PRIMES = [p for p in range(2, 200) if all(p % q for q in range(2, int(p ** 0.5) + 1))]


@lru_cache(maxsize=4096)
def _square_part(n: int) -> tuple[int, int]:
    """n = k^2 * core, the square factors found by small primes and a final square test
    (the text stays exact either way; this only makes it shorter)."""
    from math import isqrt
    k, core = 1, n
    for d in _SMALL_PRIMES:
        dd = d * d
        if dd > core:
            break
        while core % dd == 0:
            core //= dd
            k *= d
    r = isqrt(core)
    if r * r == core:
        return k * r, 1
    return k, core


def sign(x) -> int:
    """-1, 0 or 1 (exactly for exact values)."""
    if isinstance(x, Surd):
        if not x.q:
            return (x.p > 0) - (x.p < 0)
        # p + q sqrt(W): compare p^2 with q^2 W when the signs differ
        sp_, sq = (x.p > 0) - (x.p < 0), (x.q > 0) - (x.q < 0)
        if sp_ == 0 or sp_ == sq:
            return sq if sp_ == 0 else sp_
        return sp_ if x.p * x.p > x.q * x.q * x.W else sq
    v = x if isinstance(x, (int,) + _RAT) else float(x)
    return (v > 0) - (v < 0)
