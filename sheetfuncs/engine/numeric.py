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
import numpy as np
import sympy as sp

from .._types import S
from ..errors import ParameterError, SamplingError, SheetfuncsError
from .split import additive_terms, pure_delay

DPS = 20
#: largest accepted relative disagreement between Talbot and de Hoog
AGREEMENT = 1e-6
#: at most this many times are redone with mpmath when the fast contour fails
MPMATH_FALLBACK_POINTS = 50


def _delay_groups(F: sp.Expr) -> list[tuple[float, sp.Expr]]:
    groups: dict = {}
    for term in additive_terms(F):
        delay, rest = pure_delay(term)
        groups.setdefault(delay, []).append(rest)
    return [(float(d), sp.Add(*g)) for d, g in sorted(groups.items(), key=lambda kv: float(kv[0]))]


#: nodes of the fixed Talbot contour in double precision (Abate & Valko 2004):
#: truncation about 10^(-0.6 M), round-off about eps * e^(0.4 M)
TALBOT_NODES = 24


def talbot(fn: Callable, times: np.ndarray, nodes: int = TALBOT_NODES) -> np.ndarray:
    """Fixed Talbot inversion of a vectorised complex function at t > 0."""
    t = np.asarray(times, dtype=float)[:, None]
    k = np.arange(1, nodes)
    theta = k * np.pi / nodes
    cot = 1.0 / np.tan(theta)
    r = 2.0 * nodes / (5.0 * t)
    sk = r * theta * (cot + 1j)
    sigma = theta + (theta * cot - 1.0) * cot
    with np.errstate(all="ignore"):
        f0 = np.real(np.asarray(fn(r + 0j), dtype=complex)) * np.exp(r * t)
        fk = np.asarray(fn(sk), dtype=complex)
        terms = np.real(np.exp(t * sk) * fk * (1 + 1j * sigma))
        out = (r / nodes) * (0.5 * f0 + terms.sum(axis=1, keepdims=True))
    return out[:, 0]


@dataclass(frozen=True)
class NumericInverse:
    expr: sp.Expr
    method: str = "Talbot"
    _parts: tuple = field(default=(), repr=False, compare=False)   # (delay, G, mpmath fn, numpy fn)
    _verified: dict = field(default_factory=dict, repr=False, compare=False)   # window -> rel. diff

    @classmethod
    def build(cls, F: sp.Expr) -> "NumericInverse":
        free = sorted(str(x) for x in F.free_symbols if x != S)
        if free:
            raise ParameterError(f"numerical inversion needs values for {', '.join(free)}", free[0])
        parts = []
        for d, G in _delay_groups(F):
            try:
                fast = sp.lambdify(S, G, modules=["scipy", "numpy"])
            except Exception:  # noqa: BLE001 - no numpy form: mpmath only
                fast = None
            parts.append((d, G, sp.lambdify(S, G, modules="mpmath"), fast))
        return cls(F, "Talbot", tuple(parts))

    def values(self, times) -> np.ndarray:
        """f at many times: vectorised fixed Talbot, mpmath where that fails."""
        times = np.asarray(times, dtype=float)
        out = np.zeros_like(times)
        for d, G, fn, fast in self._parts:
            m = times > d
            if m.any():
                vals = talbot(fast, times[m] - d) if fast is not None else None
                if vals is None or not np.all(np.isfinite(vals)):
                    bad = m.sum() if vals is None else int((~np.isfinite(vals)).sum())
                    if bad > MPMATH_FALLBACK_POINTS:
                        raise SamplingError(
                            f"numerical inversion does not converge at {bad} of {int(m.sum())} times; "
                            "F(s) may not be the transform of an ordinary function")
                    vals = np.array([self._one(fn, G, x - d) for x in times[m]])
                out[m] += vals
            at = times == d
            if at.any():
                out[at] += _initial_value(G)
        return out

    def _one(self, fn, G, t, method="talbot"):
        if t == 0:
            return _initial_value(G)
        with mpmath.workdps(DPS):
            try:
                return float(mpmath.invertlaplace(fn, t, method=method))
            except SheetfuncsError:
                raise
            except Exception as exc:  # noqa: BLE001 - mpmath fails in many ways on wild input
                raise SamplingError(f"numerical inversion failed at t={t:g} "
                                    f"({type(exc).__name__}); check the expression") from exc

    def value(self, t: float, method: str = "talbot") -> float:
        if t < 0:
            return 0.0
        return sum(self._one(fn, G, t - d, method) for d, G, fn, _ in self._parts if t >= d)

    def error_estimate(self, t: float) -> float:
        """|Talbot - de Hoog| at t."""
        return abs(self.value(t, "talbot") - self.value(t, "dehoog"))

    def verify(self, times) -> float:
        """Largest relative disagreement of the two methods at up to 3 of ``times`` (the
        first, middle and last of this evaluation window); raises SamplingError when above
        ``AGREEMENT``.  Every new window is checked again: a pass on one range of t says
        nothing about another."""
        pts = sorted({float(t) for t in times if t > 0 and all(abs(t - d) > 1e-3 for d, *_ in self._parts)})
        if not pts:
            return 0.0
        key = (round(pts[0], 12), round(pts[-1], 12), len(pts))
        if key in self._verified:
            return self._verified[key]
        probe = sorted({pts[0], pts[len(pts) // 2], pts[-1]})
        fast = self.values(np.array(probe))
        worst = 0.0
        for t, a in zip(probe, fast):
            b = self.value(t, "dehoog")
            rel = abs(a - b) / max(abs(a), abs(b), 1e-12) if np.isfinite(a) and np.isfinite(b) else np.inf
            worst = max(worst, rel)
            if rel > AGREEMENT:
                raise SamplingError(
                    f"numerical inversion is unreliable here (Talbot {a:.6g} vs de Hoog {b:.6g} at "
                    f"t={t:g}); F(s) may have singularities off the negative real axis")
        self._verified[key] = worst
        return worst


def _initial_value(G) -> float:
    # initial value theorem: g(0+) = lim s G(s) as s -> oo
    try:
        v = sp.limit(S * G, S, sp.oo)
        return float(v) if v.is_finite else float("nan")
    except Exception:  # noqa: BLE001 - sympy may fail many ways; no value then
        return float("nan")
