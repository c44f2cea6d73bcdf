"""Numerical inverse Laplace transform (Talbot's method, checked by de Hoog's).

Used when no closed form exists.  Values come with an error estimate: the
difference between two independent methods at the same t.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import mpmath
import sympy as sp

from .._types import S
from ..errors import SamplingError

DPS = 20


@dataclass(frozen=True)
class NumericInverse:
    expr: sp.Expr
    method: str = "Talbot"
    _f: Callable = field(default=None, repr=False, compare=False)

    @classmethod
    def build(cls, F: sp.Expr) -> "NumericInverse":
        free = sorted(str(x) for x in F.free_symbols if x != S)
        if free:
            from ..errors import ParameterError
            raise ParameterError(
                f"numerical inversion needs values for {', '.join(free)}", free[0])
        f = sp.lambdify(S, F, modules="mpmath")
        return cls(F, "Talbot", f)

    def value(self, t: float) -> float:
        if t <= 0:
            return 0.0 if t < 0 else self._limit0()
        with mpmath.workdps(DPS):
            try:
                return float(mpmath.invertlaplace(self._f, t, method="talbot"))
            except Exception as exc:  # noqa: BLE001 - mpmath fails in many ways on wild input
                raise SamplingError(f"numerical inversion failed at t={t:g} "
                                    f"({type(exc).__name__}); check the expression") from exc

    def _limit0(self) -> float:
        # initial value theorem: f(0+) = lim s F(s) as s -> oo
        try:
            v = sp.limit(S * self.expr, S, sp.oo)
            return float(v) if v.is_finite else float("nan")
        except Exception:  # noqa: BLE001 - sympy may fail many ways; no value then
            return float("nan")

    def error_estimate(self, t: float) -> float:
        """|Talbot - de Hoog| at t."""
        if t <= 0:
            return 0.0
        with mpmath.workdps(DPS):
            a = mpmath.invertlaplace(self._f, t, method="talbot")
            b = mpmath.invertlaplace(self._f, t, method="dehoog")
        return float(abs(a - b))

