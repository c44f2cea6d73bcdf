"""Exact rational functions of s and delays: F = N(s, e^{-s}) / D(s, e^{-s}).

The fast core reads text straight into a :class:`Quasi`: a numerator and a
denominator, each a map ``delay -> polynomial in s`` over the rationals
(``{T: P}`` stands for ``P(s) e^{-sT}``).  That covers rational transfer
functions, delays in the numerator (delayed pieces) and delays in the
denominator (loops closed around a dead time), exactly and without SymPy.
Anything else (``sqrt(s)``, symbolic parameters, ``pi``, complex numbers)
raises :class:`NotQuasi` and the caller takes the general SymPy route.
"""
from __future__ import annotations

from fractions import Fraction
from typing import Mapping

from . import qpoly as qp
from .parse import FUNCTIONS, MAX_DEGREE, MAX_EXPONENT, MAX_NUMBER_EXPONENT, _Parser, check_param_name
from ..errors import LimitError, ParameterError


class NotQuasi(Exception):
    """The expression is not rational in s and e^{-sT} with rational coefficients."""


def _mono_mul(a: dict, b: dict) -> dict:
    out: dict = {}
    for da, pa in a.items():
        for db, pb in b.items():
            d = da + db
            out[d] = qp.add(out.get(d, qp.ZERO), qp.mul(pa, pb))
    return {d: p for d, p in out.items() if p}


def _mono_add(a: dict, b: dict) -> dict:
    out = dict(a)
    for d, p in b.items():
        out[d] = qp.add(out.get(d, qp.ZERO), p)
    return {d: p for d, p in out.items() if p}


def _degree(m: dict) -> int:
    return max((qp.degree(p) for p in m.values()), default=-1)


class Quasi:
    """``num / den`` with num, den maps ``delay (Fraction) -> poly``; immutable."""
    __slots__ = ("num", "den")

    def __init__(self, num: dict, den: dict):
        self.num = num
        self.den = den

    # construction ---------------------------------------------------------
    @classmethod
    def constant(cls, c) -> "Quasi":
        p = qp.const(c)
        return cls({Fraction(0): p} if p else {}, {Fraction(0): qp.ONE})

    @classmethod
    def s(cls) -> "Quasi":
        return cls({Fraction(0): qp.X}, {Fraction(0): qp.ONE})

    @classmethod
    def delay(cls, T: Fraction) -> "Quasi":
        return cls({Fraction(T): qp.ONE}, {Fraction(0): qp.ONE})

    # queries ----------------------------------------------------------------
    @property
    def is_zero(self) -> bool:
        return not self.num

    def constant_value(self) -> Fraction | None:
        """The value when the expression is a plain number, else None."""
        if not self.num:
            return Fraction(0)
        if set(self.num) == {0} and set(self.den) == {0} and len(self.num[0]) == 1 \
                and len(self.den[0]) == 1:
            return self.num[0][0] / self.den[0][0]
        return None

    @property
    def delay_free_den(self) -> bool:
        return set(self.den) == {Fraction(0)}

    def degree(self) -> int:
        return max(_degree(self.num), _degree(self.den))

    # arithmetic -------------------------------------------------------------
    def _normal(self) -> "Quasi":
        num, den = self.num, self.den
        if not den:
            raise ZeroDivisionError("division by zero")
        if not num:
            return Quasi({}, {Fraction(0): qp.ONE})
        if len(den) == 1:
            (b, D), = den.items()
            if b != 0:                                   # e^{-bs} in the denominator: an advance
                num = {d - b: p for d, p in num.items()}
            g = D
            for p in num.values():
                if qp.degree(g) <= 0:
                    break
                g = qp.gcd(g, p)
            if qp.degree(g) > 0:
                D = qp.divmod_(D, g)[0]
                num = {d: qp.divmod_(p, g)[0] for d, p in num.items()}
            c = 1 / D[-1]
            if c != 1:
                D = qp.scale(D, c)
                num = {d: qp.scale(p, c) for d, p in num.items()}
            den = {Fraction(0): D}
        else:
            g = None
            for p in list(den.values()) + list(num.values()):
                g = p if g is None else qp.gcd(g, p)
                if qp.degree(g) <= 0:
                    break
            if g is not None and qp.degree(g) > 0:
                den = {d: qp.divmod_(p, g)[0] for d, p in den.items()}
                num = {d: qp.divmod_(p, g)[0] for d, p in num.items()}
            b = min(den)
            if b != 0:
                den = {d - b: p for d, p in den.items()}
                num = {d - b: p for d, p in num.items()}
            c = 1 / den[Fraction(0)][-1] if Fraction(0) in den else 1 / den[max(den)][-1]
            den = {d: qp.scale(p, c) for d, p in den.items()}
            num = {d: qp.scale(p, c) for d, p in num.items()}
        out = Quasi(num, den)
        if out.degree() > MAX_DEGREE:
            raise LimitError("polynomial degree", out.degree(), MAX_DEGREE)
        return out

    def __add__(self, o: "Quasi") -> "Quasi":
        if self.den == o.den:
            return Quasi(_mono_add(self.num, o.num), self.den)._normal()
        return Quasi(_mono_add(_mono_mul(self.num, o.den), _mono_mul(o.num, self.den)),
                     _mono_mul(self.den, o.den))._normal()

    def __neg__(self) -> "Quasi":
        return Quasi({d: qp.neg(p) for d, p in self.num.items()}, self.den)

    def __sub__(self, o: "Quasi") -> "Quasi":
        return self + (-o)

    def __mul__(self, o: "Quasi") -> "Quasi":
        return Quasi(_mono_mul(self.num, o.num), _mono_mul(self.den, o.den))._normal()

    def inverse(self) -> "Quasi":
        if not self.num:
            raise ZeroDivisionError("division by zero")
        return Quasi(self.den, self.num)._normal()

    def __truediv__(self, o: "Quasi") -> "Quasi":
        return self * o.inverse()

    def __pow__(self, n: int) -> "Quasi":
        if n < 0:
            return self.inverse() ** (-n)
        out = Quasi.constant(1)
        base = self
        while n:
            if n & 1:
                out = out * base
            n >>= 1
            if n:
                base = base * base
        return out

    def __repr__(self):
        return f"Quasi(num={self.num}, den={self.den})"


class QuasiBuilder:
    """Grammar nodes as :class:`Quasi` (see ``parse._Parser``); NotQuasi otherwise."""

    def __init__(self, params: Mapping | None):
        self.params = params or {}
        self._values: dict = {}

    def number(self, frac):
        return Quasi.constant(frac)

    def imag(self, frac):
        raise NotQuasi("complex number")

    def var(self):
        return Quasi.s()

    def constant(self, low):
        raise NotQuasi(low)

    def param(self, name, tok, parser):
        if name not in self.params:
            raise NotQuasi(f"symbolic parameter {name}")
        if name not in self._values:
            self._values[name] = param_fraction(name, self.params[name])
        return Quasi.constant(self._values[name])

    def add(self, a, b):
        return a + b

    def sub(self, a, b):
        return a - b

    def mul(self, a, b):
        return a * b

    def div(self, a, b):
        return a / b

    def neg(self, a):
        return -a

    def is_zero(self, a):
        return a.is_zero

    def is_whole(self, a):
        v = a.constant_value()
        return v is not None and v.denominator == 1 and v >= 0

    def pow(self, base, exponent, tok, parser):
        e = exponent.constant_value()
        if e is None or e.denominator != 1:
            raise NotQuasi("power")
        n = int(e)
        holds_s = base.degree() > 0 or len(base.num) > 1 or set(base.num) != {0} or \
            set(base.den) != {0}
        limit = MAX_EXPONENT if holds_s else MAX_NUMBER_EXPONENT
        if abs(n) > limit:
            raise LimitError(f"the exponent at position {tok[2] + 1}", abs(n), limit)
        if abs(n) * max(base.degree(), 0) > MAX_DEGREE:
            raise LimitError("polynomial degree", abs(n) * base.degree(), MAX_DEGREE)
        if base.is_zero and n < 0:
            parser.error("division by zero", tok)
        return base ** n

    def call(self, low, args, tok, parser):
        if low != "exp":
            raise NotQuasi(low)
        (a,) = args
        if not a.delay_free_den or set(a.num) - {Fraction(0)} or qp.degree(a.den[0]) != 0:
            raise NotQuasi("exp of a non-polynomial")
        p = qp.scale(a.num.get(Fraction(0), qp.ZERO), 1 / a.den[0][0])
        if qp.degree(p) > 1 or (p and p[0] != 0):
            raise NotQuasi("exp with a constant factor or a non-linear exponent")
        c1 = p[1] if len(p) > 1 else Fraction(0)
        return Quasi.delay(-c1)


def param_fraction(name: str, value) -> Fraction:
    """A parameter value as an exact fraction, or NotQuasi when it is not rational."""
    if isinstance(value, bool) or value is None:
        raise ParameterError(f"parameter '{name}' has no numeric value", name)
    if isinstance(value, int):
        return Fraction(value)
    if isinstance(value, Fraction):
        return value
    if isinstance(value, float):
        if value != value or value in (float("inf"), float("-inf")):
            raise ParameterError(f"parameter '{name}' is not a finite number", name)
        from .parse import LiteralRangeError, exact_fraction
        try:
            return exact_fraction(repr(value))
        except LiteralRangeError as exc:
            raise ParameterError(f"parameter '{name}': {exc.reason}", name) from exc
    if isinstance(value, str):
        try:
            q = _Parser(value.strip(), "_novar", frozenset(), QuasiBuilder({})).parse()
        except NotQuasi:
            q = None
        except ParameterError:
            raise
        except Exception:           # a syntax error: the general route words it
            q = None
        v = q.constant_value() if q is not None else None
        if v is not None:
            return v
    # anything else: the general route reads it (and may find it rational after all)
    from .parse import param_value
    sym = param_value(name, value)
    if getattr(sym, "is_Rational", False):
        return Fraction(int(sym.p), int(sym.q))
    raise NotQuasi(f"parameter {name} is not rational")


def read_quasi(text: str, params: Mapping | None = None) -> Quasi:
    """Text -> Quasi (syntax errors raise as usual; NotQuasi when outside the class)."""
    if params:
        for name in params:
            check_param_name(name)
    try:
        return _Parser(text.strip(), "s", FUNCTIONS, QuasiBuilder(params)).parse()
    except ZeroDivisionError:
        raise NotQuasi("division by zero after simplification") from None
