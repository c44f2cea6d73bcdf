"""Response figures: poles with damping, stability, DC gain, initial and final
value, and for a step input rise time, peak, overshoot and settling time.

Time figures are found on the closed form by root finding (brentq on the
function or its exact derivative, bracketed on a dense grid), not read off
coarse samples.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import sympy as sp
from scipy.optimize import brentq

from .._types import S, T
from ..errors import ParameterError, UnsupportedExpressionError
from . import limits
from .invert import invert_expr, time_function, to_s_expr
from .results import finite_or_none, pair
from .sample import input_transform, numpy_function
from .split import split_delays

GRID = 40_000


@dataclass(frozen=True)
class PoleInfo:
    pole: complex
    multiplicity: int
    damping_ratio: float | None
    natural_frequency: float
    time_constant: float | None

    def to_dict(self):
        return {"pole": [self.pole.real, self.pole.imag], "multiplicity": self.multiplicity,
                "damping_ratio": self.damping_ratio, "natural_frequency": self.natural_frequency,
                "time_constant": self.time_constant}


@dataclass(frozen=True)
class Figures:
    input: str
    poles: tuple                      # PoleInfo of F(s)
    zeros: tuple                      # complex zeros of F(s) (rational, no delay)
    stable: bool | None
    stability: str
    dc_gain: float | None
    initial_value: float | None
    final_value: float | None
    final_value_note: str
    rise_time: float | None = None
    peak_time: float | None = None
    peak_value: float | None = None
    overshoot_percent: float | None = None
    settling_time: float | None = None
    settling_band: float = 0.02
    rise_band: tuple = (0.1, 0.9)
    notes: tuple = field(default=())

    def to_dict(self) -> dict:
        out = {
            "final_value": self.final_value, "initial_value": self.initial_value,
            "dc_gain": self.dc_gain, "stable": self.stable,
            "poles": [[p.pole.real, p.pole.imag] for p in self.poles for _ in range(p.multiplicity)],
            "zeros": [[z.real, z.imag] for z in self.zeros],
            "stability": self.stability, "final_value_note": self.final_value_note,
            "pole_table": [p.to_dict() for p in self.poles], "input": self.input,
        }
        if self.input == "step":
            out.update(rise_time=self.rise_time, peak_time=self.peak_time, peak_value=self.peak_value,
                       overshoot_percent=self.overshoot_percent, settling_time=self.settling_time,
                       settling_band=self.settling_band, rise_band=list(self.rise_band))
        out["notes"] = list(self.notes)
        return out


def pole_info(p: complex, mult: int) -> PoleInfo:
    wn = abs(p)
    zeta = (-p.real / wn) if wn > 0 else None
    tau = (-1.0 / p.real) if p.real < 0 else None
    return PoleInfo(p, mult, zeta, wn, tau)


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


def _stability(poles) -> tuple[bool | None, str]:
    scale = max([abs(p) for p, _ in poles] + [1.0])
    tol = 1e-12 * scale
    if any(p.real > tol for p, _ in poles):
        return False, "unstable (pole in the right half-plane)"
    axis = [(p, m) for p, m in poles if abs(p.real) <= tol]
    if any(m > 1 for _, m in axis):
        return False, "unstable (repeated pole on the imaginary axis)"
    if axis:
        return False, "marginally stable (simple pole on the imaginary axis)"
    return True, "stable (all poles in the open left half-plane)"


def figures(expr, params: Mapping | None = None, *, input="step", settle: float = 0.02,
            rise: tuple = (0.1, 0.9), timeout: float | None = None) -> Figures:
    """Figures of the response of ``expr`` to ``input`` (impulse, step, ramp or U(s))."""
    if not 0 < settle < 1:
        raise UnsupportedExpressionError(f"settling band {settle} must be between 0 and 1 (e.g. 0.02)")
    lo, hi = rise
    if not 0 <= lo < hi <= 1:
        raise UnsupportedExpressionError(f"rise band {rise} must satisfy 0 <= low < high <= 1")
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
    bad = [(p, m) for p, m in poles if not (p.real < -1e-12 * max(1.0, abs(p)))
           and not (abs(p) <= 1e-14 and m == 1)]
    if bad:
        p, m = bad[0]
        if p.real > 1e-12 * max(1.0, abs(p)):
            note = f"no final value: pole at {_fmt(p)} in the right half-plane (the response grows)"
        elif abs(p) <= 1e-14:
            note = "no final value: repeated pole at s = 0 (the response grows without bound)"
        else:
            note = f"no final value: poles at {_fmt(p)} on the imaginary axis (the response keeps oscillating)"
        return initial_v, None, note
    final = sp.S.Zero
    for piece in resp.pieces:
        for t in piece.decomposition.terms:
            if t.order == 1 and t.pole == 0:
                final += piece.gain * t.coefficient
    return initial_v, complex(sp.N(final, 17)).real, "final value theorem: all poles of sY(s) in the open left half-plane"


def _fmt(p: complex) -> str:
    if abs(p.imag) < 1e-15:
        return f"s = {p.real:.6g}"
    return f"s = {p.real:.6g} ± {abs(p.imag):.6g}j"


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


def _no_step(note="no step figures without a non-zero final value") -> dict:
    return dict(rise_time=None, peak_time=None, peak_value=None, overshoot_percent=None,
                settling_time=None, notes=(note,))


def _step_figures(resp, sys_poles, final, settle, lo, hi) -> dict:
    if final is None or final == 0 or not sys_poles:
        return _no_step()
    slow = min(-p.real for p, _ in sys_poles)
    kmax = max(m for _, m in sys_poles)
    y, dy, delay = _response_functions(resp)
    horizon = delay + (math.log(1.0 / settle) + 14 + 4 * (kmax - 1)) / slow
    return time_figures(y, dy, horizon, final, settle, lo, hi)


def time_figures(y, dy, horizon, final, settle, lo, hi, points=GRID) -> dict:
    """Rise, peak, overshoot and settling of y (vectorised) towards ``final``, found by
    Brent's method bracketed on a grid of ``points`` over [0, horizon]; the peak by the
    root of ``dy`` when given, else by a bounded scalar minimisation."""
    grid = np.linspace(0.0, horizon, points)
    z = y(grid) / final
    if not np.isfinite(z[0]):               # e.g. a numerical inverse singular at t = 0
        grid[0] = grid[1] * 1e-9
        z[0] = y(grid[:1])[0] / final
    if not np.all(np.isfinite(z)):
        return _no_step("the response is not finite everywhere on [0, horizon]")
    sy = lambda x: float(y(x)[0]) / final          # noqa: E731

    def first_cross(level):
        idx = np.nonzero(z >= level)[0]
        if idx.size == 0:
            return None
        i = idx[0]
        if i == 0:
            return 0.0
        return brentq(lambda x: sy(x) - level, grid[i - 1], grid[i], xtol=1e-15, rtol=1e-14)

    t_lo, t_hi = first_cross(lo), first_cross(hi)
    rise_time = (t_hi - t_lo) if t_lo is not None and t_hi is not None else None
    i_max = int(np.argmax(z))
    peak_time = peak_value = None
    overshoot = 0.0
    if z[i_max] > 1 + 1e-12 and 0 < i_max < points - 1:
        a, b = grid[i_max - 1], grid[i_max + 1]
        if dy is not None:
            d = lambda x: float(dy(x)[0]) / final      # noqa: E731
            peak_time = brentq(d, a, b, xtol=1e-15, rtol=1e-14) if d(a) > 0 > d(b) else grid[i_max]
        else:
            from scipy.optimize import minimize_scalar
            peak_time = float(minimize_scalar(lambda x: -sy(x), bounds=(a, b), method="bounded",
                                              options={"xatol": 1e-10 * max(b, 1e-300)}).x)
        peak_value = float(y(peak_time)[0])
        overshoot = 100.0 * (peak_value - final) / abs(final)
    outside = np.nonzero(np.abs(z - 1) > settle)[0]
    settling = None
    if outside.size:
        j = outside[-1]
        if j < points - 1:
            side = 1 if z[j] > 1 else -1
            settling = brentq(lambda x: sy(x) - 1 - side * settle, grid[j], grid[j + 1],
                              xtol=1e-15, rtol=1e-14)
    else:
        settling = 0.0
    return dict(rise_time=rise_time, peak_time=peak_time, peak_value=peak_value,
                overshoot_percent=overshoot, settling_time=settling)
