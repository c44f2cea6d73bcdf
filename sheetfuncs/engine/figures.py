"""Response figures: poles with damping, stability, DC gain, initial and final
value, and for a step input rise time, peak, overshoot and settling time.

Time figures are found on the closed form by root finding (brentq on the
function or its exact derivative, bracketed on a dense grid), not read off
coarse samples.
"""
from __future__ import annotations

import math
from typing import Mapping

import numpy as np
import sympy as sp

from .._types import S, T
from ..errors import ParameterError
from . import limits
from .invert import invert_expr, time_function, to_s_expr
from .results import finite_or_none, pair
from .figcore import (GRID, Figures, PoleInfo, _no_step, _stability, check_bands, no_final_value, pole_info,  # noqa: F401
                      time_figures)
from .sample import input_transform, numpy_function
from .split import split_delays



def _poles(result) -> list[tuple[complex, int]]:
    acc: dict = {}
    for piece in result.pieces:
        for pole, mult in piece.decomposition.poles:
            re, im = pair(pole)
            if isinstance(re, str) or isinstance(im, str):
                raise ParameterError("pole figures need values for the parameters", None)
            key = (round(re, 10), round(im, 10))
            value, m0 = acc.get(key, (complex(re, im), 0))
            acc[key] = (value, max(m0, mult))
    return sorted(acc.values(), key=lambda kv: (-kv[0].real, kv[0].imag))


def figures(expr, params: Mapping | None = None, *, input="step", settle: float = 0.02,
            rise: tuple = (0.1, 0.9), timeout: float | None = None) -> Figures:
    """Figures of the response of ``expr`` to ``input`` (impulse, step, ramp or U(s))."""
    lo, hi = check_bands(settle, rise)
    F = to_s_expr(expr, params)
    U = input_transform(input, params)
    label = input if isinstance(input, str) and input in ("impulse", "step", "ramp") else "given"
    if label == "given" and not (U * S).has(S) and U != 0:
        label = "step"                  # a scaled step such as 5/s: step figures apply
    free = sorted(str(x) for x in (F * U).free_symbols if x != S)
    if free:
        raise ParameterError(f"figures need values for {', '.join(free)}", free[0])
    with limits.deadline(timeout):
        if split_delays(F) is None or split_delays(F * U) is None:
            from .figures_numeric import nonrational_figures
            return Figures(**nonrational_figures(F, U, label, settle, lo, hi))
        sys_res = invert_expr(F, numeric=False)
        resp = invert_expr(F * U, numeric=False)
    poles = _poles(sys_res)
    stable, stability = _stability(poles)
    zeros = _zeros(sys_res)
    dc = _dc_gain(sys_res)
    initial, final, note = _initial_final(resp)
    out = dict(input=label, poles=tuple(pole_info(p, m) for p, m in poles), zeros=zeros,
               stable=stable, stability=stability, dc_gain=dc, initial_value=initial,
               final_value=final, final_value_note=note, settling_band=settle, rise_band=(lo, hi))
    if label == "step":
        out.update(_step_figures(resp, poles, final, settle, lo, hi))
    return Figures(**out)


def _zeros(result) -> tuple:
    if len(result.pieces) != 1 or result.pieces[0].delay != 0:
        return ()
    F = result.expr
    num, _ = sp.fraction(sp.cancel(sp.together(F)))
    poly = sp.Poly(num, S)
    if poly.degree() <= 0:
        return ()
    return tuple(complex(z) for z in np.roots([complex(sp.N(c)) for c in poly.all_coeffs()]))


def _dc_gain(result):
    total = sp.S.Zero
    for piece in result.pieces:
        dec = piece.decomposition
        if any(sp.simplify(pole) == 0 for pole, _ in dec.poles):
            return None
        val = sum((d for d in dec.direct[:1]), sp.S.Zero)
        for term in dec.terms:
            val += term.coefficient / (-term.pole) ** term.order
        total += piece.gain * val
    return finite_or_none(complex(sp.N(total, 17)).real)


def _initial_final(resp):
    """IVT and FVT on the response, from its partial fractions."""
    initial = sp.S.Zero
    note = ""
    for piece in resp.pieces:
        dec = piece.decomposition
        if piece.delay != 0:
            continue
        if dec.direct:
            initial = None
            break
        initial += sum((t.coefficient for t in dec.terms if t.order == 1), sp.S.Zero)
    initial_v = None if initial is None else complex(sp.N(initial, 17)).real
    poles = _poles(resp)
    note = no_final_value(poles)
    if note:
        return initial_v, None, note
    final = sp.S.Zero
    for piece in resp.pieces:
        for t in piece.decomposition.terms:
            if t.order == 1 and t.pole == 0:
                final += piece.gain * t.coefficient
    return initial_v, complex(sp.N(final, 17)).real, "final value theorem: all poles of sY(s) in the open left half-plane"


def _response_functions(resp):
    fns = []
    for piece in resp.pieces:
        f = sp.expand(piece.gain) * time_function(piece.decomposition)
        f = f.replace(lambda e: isinstance(e, sp.DiracDelta), lambda e: sp.S.Zero)
        fns.append((float(piece.delay), numpy_function(f), numpy_function(sp.diff(f, T))))

    def summed(which):
        def fn(t):
            t = np.atleast_1d(np.asarray(t, dtype=float))
            out = np.zeros_like(t)
            for piece in fns:
                m = t >= piece[0]
                out[m] += piece[which](t[m] - piece[0])
            return out
        return fn
    return summed(1), summed(2), max(d for d, _, _ in fns)


def _step_figures(resp, sys_poles, final, settle, lo, hi) -> dict:
    if final is None or final == 0 or not sys_poles:
        return _no_step()
    slow = min(-p.real for p, _ in sys_poles)
    kmax = max(m for _, m in sys_poles)
    y, dy, delay = _response_functions(resp)
    horizon = delay + (math.log(1.0 / settle) + 14 + 4 * (kmax - 1)) / slow
    return time_figures(y, dy, horizon, final, settle, lo, hi)


