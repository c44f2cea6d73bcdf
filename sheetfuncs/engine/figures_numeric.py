"""Figures of a non-rational F(s) (e.g. diffusion, e^{-k sqrt(s)}), where poles
cannot be listed: limits by the initial and final value theorems and DC gain
by SymPy's limit, and step figures by root finding on the numerical inverse
(vectorised Talbot, verified against de Hoog).

The final value theorem needs all singularities of sY(s) in the open left
half-plane; for a non-rational F(s) that is not checked here, and the note
says so.  The horizon is found by doubling until the response stays within a
tenth of the settling band of the final value.
"""
from __future__ import annotations

import numpy as np
import sympy as sp

from .._types import S
from ..errors import SheetfuncsError
from .numeric import NumericInverse

MAX_HORIZON_DOUBLINGS = 40
POINTS = 4000


def _limit(expr, point, direction="+"):
    try:
        v = sp.limit(expr, S, point, direction) if point == 0 else sp.limit(expr, S, sp.oo)
    except (SheetfuncsError, KeyboardInterrupt):
        raise
    except Exception:  # noqa: BLE001 - SymPy's limit fails in many ways; no value then
        return None
    if v is None or not v.is_finite or v.has(sp.I) or v.free_symbols:
        return None
    return float(v)


def nonrational_figures(F, U, label, settle, lo, hi) -> dict:
    from .figcore import _no_step, time_figures
    Y = F * U
    free = sorted(str(x) for x in Y.free_symbols if x != S)
    if free:
        from ..errors import ParameterError
        raise ParameterError(f"figures need values for {', '.join(free)}", free[0])
    dc = _limit(F, 0)
    initial = _limit(S * Y, sp.oo)
    final = _limit(S * Y, 0)
    note = ("final value theorem applied without a check of the singularities of sY(s): "
            "F(s) is not rational" if final is not None else
            "no final value: lim s Y(s) as s -> 0 does not exist")
    out = dict(input=label, poles=(), zeros=(), stable=None,
               stability="not determined (F(s) is not rational: no finite list of poles)",
               dc_gain=dc, initial_value=initial, final_value=final, final_value_note=note,
               settling_band=settle, rise_band=(lo, hi), notes=("figures from the numerical inverse (Talbot)",))
    if label != "step":
        return out
    if not final:
        out.update(_no_step())
        return out
    inv = NumericInverse.build(Y)
    y = lambda t: inv.values(np.atleast_1d(np.asarray(t, dtype=float)))  # noqa: E731
    horizon = 1.0
    for _ in range(MAX_HORIZON_DOUBLINGS):
        tail = y(np.linspace(horizon / 2, horizon, 16)) / final
        if np.all(np.abs(tail - 1) < settle / 10):
            break
        horizon *= 2
    else:
        out.update(_no_step("the response does not settle within the search horizon"))
        return out
    inv.verify(np.linspace(horizon / POINTS, horizon, 50))
    figs = time_figures(y, None, horizon, final, settle, lo, hi, points=POINTS)
    out.update(figs)
    return out


__all__ = ["nonrational_figures"]
