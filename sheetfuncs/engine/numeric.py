"""Numerical inverse Laplace transform (Talbot's method, checked by de Hoog's).

Used when no closed form exists.  Pure delays are split off first
(F = sum_k e^{-s T_k} G_k(s) -> f(t) = sum_k g_k(t - T_k) u(t - T_k)), since
a contour method cannot represent the jump of a delay.  ``verify`` compares
Talbot with de Hoog at a few times: where they disagree (for example when a
branch cut or poles lie off the negative real axis, outside Talbot's
contour) the result is refused rather than shown wrong.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import mpmath
import sympy as sp

from .._types import S
from ..errors import ParameterError, SamplingError
from .split import additive_terms

DPS = 20
#: largest accepted relative disagreement between Talbot and de Hoog
AGREEMENT = 1e-6


def _delay_groups(F: sp.Expr) -> list[tuple[float, sp.Expr]]:
    groups: dict = {}
    for term in additive_terms(F):
        delay = sp.S.Zero
        rest = []
        for factor in sp.Mul.make_args(term):
            if isinstance(factor, sp.exp) and factor.has(S):
                arg = sp.expand(factor.args[0])
                c1 = arg.coeff(S, 1)
                c0 = arg - c1 * S
                if c1.is_number and c1.is_nonpositive and c1 != 0:
                    delay += -c1
                    rest.append(sp.exp(c0))
                    continue
            rest.append(factor)
        groups.setdefault(delay, []).append(sp.Mul(*rest))
    return [(float(d), sp.Add(*g)) for d, g in sorted(groups.items(), key=lambda kv: float(kv[0]))]


@dataclass(frozen=True)
class NumericInverse:
    expr: sp.Expr
    method: str = "Talbot"
    _parts: tuple = field(default=(), repr=False, compare=False)   # (delay, G, mpmath fn)

    @classmethod
    def build(cls, F: sp.Expr) -> "NumericInverse":
        free = sorted(str(x) for x in F.free_symbols if x != S)
        if free:
            raise ParameterError(f"numerical inversion needs values for {', '.join(free)}", free[0])
        parts = tuple((d, G, sp.lambdify(S, G, modules="mpmath")) for d, G in _delay_groups(F))
        return cls(F, "Talbot", parts)

    def _one(self, fn, G, t, method="talbot"):
        if t == 0:
            return _initial_value(G)
        with mpmath.workdps(DPS):
            try:
                return float(mpmath.invertlaplace(fn, t, method=method))
            except Exception as exc:  # noqa: BLE001 - mpmath fails in many ways on wild input
                raise SamplingError(f"numerical inversion failed at t={t:g} "
                                    f"({type(exc).__name__}); check the expression") from exc

    def value(self, t: float, method: str = "talbot") -> float:
        if t < 0:
            return 0.0
        return sum(self._one(fn, G, t - d, method) for d, G, fn in self._parts if t >= d)

    def error_estimate(self, t: float) -> float:
        """|Talbot - de Hoog| at t."""
        return abs(self.value(t, "talbot") - self.value(t, "dehoog"))

    def verify(self, times) -> float:
        """Largest relative disagreement of the two methods at up to 3 of ``times``;
        raises SamplingError when above ``AGREEMENT``."""
        pts = sorted({float(t) for t in times if t > 0 and all(abs(t - d) > 1e-3 for d, _, _ in self._parts)})
        if not pts:
            return 0.0
        probe = [pts[0], pts[len(pts) // 2], pts[-1]]
        worst = 0.0
        for t in probe:
            a, b = self.value(t, "talbot"), self.value(t, "dehoog")
            rel = abs(a - b) / max(abs(a), abs(b), 1e-12)
            worst = max(worst, rel)
            if rel > AGREEMENT:
                raise SamplingError(
                    f"numerical inversion is unreliable here (Talbot {a:.6g} vs de Hoog {b:.6g} at "
                    f"t={t:g}); F(s) may have singularities off the negative real axis")
        return worst


def _initial_value(G) -> float:
    # initial value theorem: g(0+) = lim s G(s) as s -> oo
    try:
        v = sp.limit(S * G, S, sp.oo)
        return float(v) if v.is_finite else float("nan")
    except Exception:  # noqa: BLE001 - sympy may fail many ways; no value then
        return float("nan")
