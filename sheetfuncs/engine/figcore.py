"""Figures that need no SymPy: pole records, stability from pole locations, and the
step-response time figures found by root finding on a vectorised response.

Rise, peak, overshoot and settling are found by Brent's method bracketed on a
dense grid (``GRID`` points over [0, horizon]), not read off coarse samples.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .roots import brent, golden_max

GRID = 40_000


def _fmt(p: complex) -> str:
    if abs(p.imag) < 1e-15:
        return f"s = {p.real:.6g}"
    return f"s = {p.real:.6g} \u00b1 {abs(p.imag):.6g}j"


def no_final_value(poles) -> str | None:
    """Why the final value theorem does not apply to a response with these poles of Y(s)
    ((complex, multiplicity) pairs), or None when it does (all in the open left half-plane
    but a simple pole at s = 0)."""
    bad = [(p, m) for p, m in poles if not (p.real < -1e-12 * max(1.0, abs(p)))
           and not (abs(p) <= 1e-14 and m == 1)]
    if not bad:
        return None
    p, m = bad[0]
    if p.real > 1e-12 * max(1.0, abs(p)):
        return f"no final value: pole at {_fmt(p)} in the right half-plane (the response grows)"
    if abs(p) <= 1e-14:
        return "no final value: repeated pole at s = 0 (the response grows without bound)"
    return f"no final value: poles at {_fmt(p)} on the imaginary axis (the response keeps oscillating)"


def check_bands(settle: float, rise: tuple) -> tuple[float, float]:
    """The settling band and rise levels checked (one place for both routes); (low, high)."""
    from ..errors import UnsupportedExpressionError
    if not 0 < settle < 1:
        raise UnsupportedExpressionError(f"settling band {settle} must be between 0 and 1 (e.g. 0.02)")
    lo, hi = rise
    if not 0 <= lo < hi <= 1:
        raise UnsupportedExpressionError(f"rise band {rise} must satisfy 0 <= low < high <= 1")
    return lo, hi


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


def _no_step(note="no step figures without a non-zero final value") -> dict:
    return dict(rise_time=None, peak_time=None, peak_value=None, overshoot_percent=None,
                settling_time=None, notes=(note,))


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
        return brent(lambda x: sy(x) - level, grid[i - 1], grid[i], xtol=1e-15, rtol=1e-14)

    t_lo, t_hi = first_cross(lo), first_cross(hi)
    rise_time = (t_hi - t_lo) if t_lo is not None and t_hi is not None else None
    i_max = int(np.argmax(z))
    peak_time = peak_value = None
    overshoot = 0.0
    if z[i_max] > 1 + 1e-12 and 0 < i_max < points - 1:
        a, b = grid[i_max - 1], grid[i_max + 1]
        if dy is not None:
            d = lambda x: float(dy(x)[0]) / final      # noqa: E731
            peak_time = brent(d, a, b, xtol=1e-15, rtol=1e-14) if d(a) > 0 > d(b) else grid[i_max]
        else:
            peak_time = golden_max(sy, a, b)
        peak_value = float(y(peak_time)[0])
        overshoot = 100.0 * (peak_value - final) / abs(final)
    outside = np.nonzero(np.abs(z - 1) > settle)[0]
    settling = None
    if outside.size:
        j = outside[-1]
        if j < points - 1:
            side = 1 if z[j] > 1 else -1
            settling = brent(lambda x: sy(x) - 1 - side * settle, grid[j], grid[j + 1],
                              xtol=1e-15, rtol=1e-14)
    else:
        settling = 0.0
    def f(x):
        return None if x is None else float(x)
    return dict(rise_time=f(rise_time), peak_time=f(peak_time), peak_value=f(peak_value),
                overshoot_percent=f(overshoot), settling_time=f(settling))
