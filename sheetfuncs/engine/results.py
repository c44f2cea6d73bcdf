"""Frozen result records of the engine and their JSON-ready forms.

Results hold SymPy expressions and numbers; ``to_dict`` turns them into
primitives (complex numbers as ``[re, im]``) matching the command-line
contract.  Results never refer to a workbook, a cell or a cache.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import sympy as sp

from .._types import S


def number(x):
    """A SymPy number as a float, or its text when it is symbolic."""
    if x is None:
        return None
    if isinstance(x, (int, float)):
        return float(x)
    x = sp.sympify(x)
    if x.free_symbols:
        return sp.sstr(x)
    v = complex(sp.N(x, 17))
    return v.real if v.imag == 0 else sp.sstr(x)


def pair(x):
    """A SymPy number as ``[re, im]`` floats (text when symbolic)."""
    x = sp.sympify(x)
    if x.free_symbols:
        re, im = x.as_real_imag()
        return [_num_or_text(re), _num_or_text(im)]
    v = complex(sp.N(x, 17))
    return [v.real, v.imag]


def _num_or_text(x):
    x = sp.simplify(x) if x.free_symbols else x
    return sp.sstr(x) if x.free_symbols else float(x)


def finite_or_none(v):
    if v is None:
        return None
    return float(v) if math.isfinite(float(v)) else None


@dataclass(frozen=True)
class DelayedPiece:
    """One piece ``gain * exp(-s*delay) * R(s)`` with its decomposition."""
    delay: sp.Expr
    gain: sp.Expr
    decomposition: object


@dataclass(frozen=True)
class InversionResult:
    expr: sp.Expr                 # F(s)
    f_t: sp.Expr | None           # f(t) for t >= 0, None when only numerical
    method: str
    terms: tuple                  # partfrac.Term (rational, no delay)
    direct: tuple                 # polynomial part, ascending powers
    real_terms: tuple             # partfrac.RealTerm
    pieces: tuple = ()            # DelayedPiece, one per distinct delay
    numerical: object = field(default=None, compare=False)
    #: derived forms computed once per result (compiled samplers); not part of the value
    derived: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def is_numerical(self) -> bool:
        return self.f_t is None

    def to_dict(self, digits: int | None = None) -> dict:
        from ..printing import to_sympy_text
        out = {
            "f_t": None if self.f_t is None else to_sympy_text(self.f_t, digits=digits),
            "method": self.method,
            "terms": [{"pole": pair(t.pole), "order": t.order, "coefficient": pair(t.coefficient)}
                      for t in self.terms],
            "direct": [number(c) for c in self.direct],
            "real_terms": [real_term_dict(r) for r in self.real_terms],
            "delays": [number(p.delay) for p in self.pieces if p.delay != 0],
        }
        return out


def real_term_dict(r) -> dict:
    num = sp.Poly(r.numerator, S)
    base = sp.Poly(r.base, S)
    return {"numerator": [number(c) for c in reversed(num.all_coeffs())],
            "base": [number(c) for c in reversed(base.all_coeffs())],
            "power": r.power}
