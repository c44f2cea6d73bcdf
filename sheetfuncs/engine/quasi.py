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
from .qpoly import Q
from .parse import FUNCTIONS, MAX_DEGREE, MAX_EXPONENT, MAX_NUMBER_EXPONENT, _Parser, check_param_name
from ..errors import LimitError, ParameterError


class NotQuasi(Exception):
    """The expression is not rational in s and e^{-sT} with rational coefficients."""


def _mono_mul(a: dict, b: dict) -> dict:
    if len(a) == 1 and len(b) == 1:
        (da, pa), = a.items()
        (db, pb), = b.items()
        p = qp.mul(pa, pb)
        return {da + db: p} if not qp.is_zero(p) else {}
    out: dict = {}
    for da, pa in a.items():
        for db, pb in b.items():
            d = da + db
            out[d] = qp.add(out.get(d, qp.ZERO), qp.mul(pa, pb))
    return {d: p for d, p in out.items() if not qp.is_zero(p)}


def _mono_add(a: dict, b: dict) -> dict:
    out = dict(a)
    for d, p in b.items():
        out[d] = qp.add(out.get(d, qp.ZERO), p)
    return {d: p for d, p in out.items() if not qp.is_zero(p)}


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
        return cls({Q(0): p} if not qp.is_zero(p) else {}, {Q(0): qp.ONE})

    @classmethod
    def s(cls) -> "Quasi":
        return cls({Q(0): qp.X}, {Q(0): qp.ONE})

    @classmethod
    def delay(cls, T) -> "Quasi":
        return cls({Q(T): qp.ONE}, {Q(0): qp.ONE})

    # queries ----------------------------------------------------------------
    @property
    def is_zero(self) -> bool:
        return not self.num

    def constant_value(self):
        """The value when the expression is a plain number, else None."""
        if not self.num:
            return Q(0)
        if set(self.num) == {0} and set(self.den) == {0} and qp.degree(self.num[0]) == 0 \
                and qp.degree(self.den[0]) == 0:
            return qp.coeff(self.num[0], 0) / qp.coeff(self.den[0], 0)
        return None

    @property
    def delay_free_den(self) -> bool:
        return set(self.den) == {0}

    def degree(self) -> int:
        return max(_degree(self.num), _degree(self.den))

    # arithmetic -------------------------------------------------------------
    def _normal(self) -> "Quasi":
        num, den = self.num, self.den
        if not den:
            raise ZeroDivisionError("division by zero")
        if not num:
            return Quasi({}, {Q(0): qp.ONE})
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
            c = 1 / qp.lc(D)
            if c != 1:
                D = qp.scale(D, c)
                num = {d: qp.scale(p, c) for d, p in num.items()}
            den = {Q(0): D}
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
            c = 1 / qp.lc(den[0]) if 0 in den else 1 / qp.lc(den[max(den)])
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


def _is_poly(x) -> bool:
    return not isinstance(x, Quasi)


def _lift(x) -> "Quasi":
    """A plain polynomial as a Quasi."""
    if isinstance(x, Quasi):
        return x
    return Quasi({Q(0): x} if not qp.is_zero(x) else {}, {Q(0): qp.ONE})


def _const_of(x):
    """The value of a constant node, else None."""
    if isinstance(x, Quasi):
        return x.constant_value()
    if qp.is_zero(x):
        return Q(0)
    return qp.coeff(x, 0) if qp.degree(x) == 0 else None


def _check_degree(p):
    if qp.degree(p) > MAX_DEGREE:
        raise LimitError("polynomial degree", qp.degree(p), MAX_DEGREE)
    return p


class QuasiBuilder:
    """Grammar nodes as polynomials (while they are) or :class:`Quasi`; NotQuasi otherwise.

    Sums and products of polynomials stay plain polynomials of the backend (C
    speed with flint); a division or a delay makes a Quasi."""

    def __init__(self, params: Mapping | None):
        self.params = params or {}
        self._values: dict = {}

    def number(self, frac):
        return qp.const(Q(frac))

    def imag(self, frac):
        raise NotQuasi("complex number")

    def var(self):
        return qp.X

    def constant(self, low):
        raise NotQuasi(low)

    def param(self, name, tok, parser):
        if name not in self.params:
            raise NotQuasi(f"symbolic parameter {name}")
        if name not in self._values:
            self._values[name] = param_fraction(name, self.params[name])
        return qp.const(self._values[name])

    def add(self, a, b):
        if _is_poly(a) and _is_poly(b):
            return qp.add(a, b)
        return _lift(a) + _lift(b)

    def sub(self, a, b):
        if _is_poly(a) and _is_poly(b):
            return qp.sub(a, b)
        return _lift(a) - _lift(b)

    def mul(self, a, b):
        if _is_poly(a) and _is_poly(b):
            return _check_degree(qp.mul(a, b))
        return _lift(a) * _lift(b)

    def div(self, a, b):
        c = _const_of(b) if _is_poly(b) else None
        if c is not None and c != 0 and _is_poly(a):
            return qp.scale(a, 1 / c)
        return _lift(a) / _lift(b)

    def neg(self, a):
        return qp.neg(a) if _is_poly(a) else -a

    def is_zero(self, a):
        return qp.is_zero(a) if _is_poly(a) else a.is_zero

    def is_whole(self, a):
        v = _const_of(a)
        return v is not None and v.denominator == 1 and v >= 0

    def pow(self, base, exponent, tok, parser):
        e = _const_of(exponent)
        if e is None or e.denominator != 1:
            raise NotQuasi("power")
        n = int(e)
        if _is_poly(base):
            holds_s = qp.degree(base) > 0
        else:
            holds_s = base.degree() > 0 or len(base.num) > 1 or set(base.num) != {0} or \
                set(base.den) != {0}
        limit = MAX_EXPONENT if holds_s else MAX_NUMBER_EXPONENT
        if abs(n) > limit:
            raise LimitError(f"the exponent at position {tok[2] + 1}", abs(n), limit)
        deg = qp.degree(base) if _is_poly(base) else base.degree()
        if abs(n) * max(deg, 0) > MAX_DEGREE:
            raise LimitError("polynomial degree", abs(n) * deg, MAX_DEGREE)
        if self.is_zero(base) and n < 0:
            parser.error("division by zero", tok)
        if _is_poly(base) and n >= 0:
            return qp.power(base, n)
        return _lift(base) ** n

    def call(self, low, args, tok, parser):
        if low != "exp":
            raise NotQuasi(low)
        (a,) = args
        if not _is_poly(a):
            if not a.delay_free_den or set(a.num) - {0} or qp.degree(a.den[0]) != 0:
                raise NotQuasi("exp of a non-polynomial")
            a = qp.scale(a.num.get(0, qp.ZERO), 1 / qp.coeff(a.den[0], 0))
        if qp.degree(a) > 1 or (not qp.is_zero(a) and qp.coeff(a, 0) != 0):
            raise NotQuasi("exp with a constant factor or a non-linear exponent")
        c1 = qp.coeff(a, 1) if qp.degree(a) >= 1 else Q(0)
        return Quasi.delay(-c1)


def param_fraction(name: str, value):
    """A parameter value as an exact fraction, or NotQuasi when it is not rational."""
    if isinstance(value, bool) or value is None:
        raise ParameterError(f"parameter '{name}' has no numeric value", name)
    if isinstance(value, int):
        return Q(value)
    if isinstance(value, (Fraction,) + qp.RATIONAL):
        return Q(value)
    if isinstance(value, float):
        if value != value or value in (float("inf"), float("-inf")):
            raise ParameterError(f"parameter '{name}' is not a finite number", name)
        from .parse import LiteralRangeError, exact_fraction
        try:
            return Q(exact_fraction(repr(value)))
        except LiteralRangeError as exc:
            raise ParameterError(f"parameter '{name}': {exc.reason}", name) from exc
    if isinstance(value, str):
        from ..units import prefixed_number          # '10k', '22n' (SI prefixes; values only)
        prefixed = prefixed_number(value)
        if prefixed is not None:
            return Q(prefixed)
        try:
            q = _lift(_Parser(value.strip(), "_novar", frozenset(), QuasiBuilder({})).parse())
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
        return Q(int(sym.p), int(sym.q))
    raise NotQuasi(f"parameter {name} is not rational")


def read_quasi(text: str, params: Mapping | None = None) -> Quasi:
    """Text -> Quasi (syntax errors raise as usual; NotQuasi when outside the class)."""
    if params:
        for name in params:
            check_param_name(name)
    try:
        return _lift(_Parser(text.strip(), "s", FUNCTIONS, QuasiBuilder(params)).parse())
    except ZeroDivisionError:
        raise NotQuasi("division by zero after simplification") from None
