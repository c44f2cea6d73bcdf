"""Self-check: a closed-form result against an independent numerical inversion.

The numerical side inverts F(s) minus its polynomial part (impulses cannot
be sampled) with Talbot's method at a few times, away from any delay where
f jumps.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from .._types import S
from .numeric import NumericInverse
from .results import InversionResult
from .sample import evaluate


@dataclass(frozen=True)
class SelfCheck:
    times: tuple
    closed: tuple
    numerical: tuple
    max_abs_deviation: float
    max_rel_deviation: float

    def to_dict(self):
        return {"times": list(self.times), "closed": list(self.closed),
                "numerical": list(self.numerical), "max_abs_deviation": self.max_abs_deviation,
                "max_rel_deviation": self.max_rel_deviation}


def default_times(result: InversionResult) -> list[float]:
    rates = []
    for piece in result.pieces:
        for pole, _ in piece.decomposition.poles:
            v = abs(complex(sp.N(pole)))
            if v > 0:
                rates.append(v)
    scale = 1.0 / float(np.median(rates)) if rates else 1.0
    delays = [float(p.delay) for p in result.pieces if p.delay != 0]
    times = []
    for x in (0.3, 1.0, 2.0, 4.0):
        t = x * scale + (max(delays) if delays else 0.0)
        if all(abs(t - d) > 0.05 * scale for d in delays):
            times.append(t)
    return times


def self_check(result: InversionResult, times=None) -> SelfCheck:
    """Deviation of the closed form from Talbot's inversion at ``times``."""
    if result.f_t is None:
        raise ValueError("a numerical result has nothing to check against")
    times = list(times) if times is not None else default_times(result)
    F = result.expr
    for piece in result.pieces:
        for i, c in enumerate(piece.decomposition.direct):
            F = F - piece.gain * c * S ** i * sp.exp(-piece.delay * S)
    inv = NumericInverse.build(sp.expand(F) if F.has(sp.exp) else F)
    closed = evaluate(result, np.asarray(times, dtype=float))
    numerical = np.array([inv.value(t) for t in times])
    dev = np.abs(closed - numerical)
    scale = max(float(np.max(np.abs(numerical))) if len(times) else 0.0, 1e-300)
    return SelfCheck(tuple(times), tuple(float(x) for x in closed), tuple(float(x) for x in numerical),
                     float(dev.max()) if len(times) else 0.0,
                     float(dev.max() / scale) if len(times) else 0.0)
