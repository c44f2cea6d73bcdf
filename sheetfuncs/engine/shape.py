"""Figures of any response y(t) (also one that goes to zero): the global
extremum and its time, undershoot, envelope decay time, and the logarithmic
decrement and period of the dominant mode.

The response is evaluated with ``api.sample`` (closed form, or the numerical
inverse for a non-rational Y(s)) on a dense grid over a horizon set by the
slowest pole (doubled until the tail is quiet); each figure is then refined on
finer grids around its bracket (three rounds of 200 points, so a time is
located to about 1e-8 of the horizon).  The dominant mode comes from the
poles of F(s): the pole pair with the largest real part, decrement
sigma * 2 pi / omega_d, period 2 pi / omega_d; the same two figures are also
measured on the response from its first two same-sign swings.

Definitions (y_inf the final value, when it exists):
* extremum: the value of largest magnitude of y(t), t >= 0, and its time (for
  a response that creeps up to y_inf without passing it, the supremum is
  y_inf itself, reached only as t -> inf: no time then);
* undershoot: the largest excursion of y to the side opposite the reference
  (y_inf if it is not zero, else the extremum), absolute and in % of |reference|;
* decay time to x %: the time after which |y - y_inf| stays below x % of its
  largest value.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import sympy as sp

from .._types import S
from ..errors import UnsupportedExpressionError
from .frequency import model, require_values, to_expr

POINTS = 20_001
POINTS_NUMERIC = 4001
ROUNDS = 3
SUB = 200
MAX_DOUBLINGS = 24


@dataclass(frozen=True)
class ShapeFigures:
    input: str
    final_value: float | None
    extremum_value: float | None
    extremum_time: float | None
    undershoot: float | None
    undershoot_percent: float | None
    decay_percent: float
    decay_time: float | None
    dominant_pole: complex | None
    decrement: float | None              # logarithmic decrement of the dominant mode (from its poles)
    period: float | None                 # its damped period 2 pi/omega_d (s)
    measured_decrement: float | None     # from two successive same-sign swings of y - y_inf
    measured_period: float | None
    horizon: float | None
    notes: tuple = field(default=())

    def to_dict(self) -> dict:
        p = self.dominant_pole
        return {"input": self.input, "final_value": self.final_value, "extremum_value": self.extremum_value,
                "extremum_time": self.extremum_time, "undershoot": self.undershoot,
                "undershoot_percent": self.undershoot_percent, "decay_percent": self.decay_percent,
                "decay_time": self.decay_time, "dominant_pole": None if p is None else [p.real, p.imag],
                "decrement": self.decrement, "period": self.period,
                "measured_decrement": self.measured_decrement, "measured_period": self.measured_period,
                "horizon": self.horizon, "notes": list(self.notes)}


def _input_expr(kind) -> tuple[sp.Expr, str]:
    if kind is None or (isinstance(kind, str) and kind.strip().lower() in ("", "impulse")):
        return sp.S.One, "impulse"
    key = kind.strip().lower() if isinstance(kind, str) else None
    if key == "step":
        return 1 / S, "step"
    if key == "ramp":
        return 1 / S ** 2, "ramp"
    return to_expr(kind), str(kind)


def _final_value(Y: sp.Expr, poles: np.ndarray | None) -> tuple[float | None, str]:
    """lim y(t) by the final value theorem when every pole of Y but a simple one
    at 0 lies in the open left half-plane."""
    if poles is None:
        return None, "no pole list (Y(s) is not rational)"
    scale = max([1.0] + [abs(p) for p in poles])
    tol = 1e-10 * scale
    at0 = int(np.sum(np.abs(poles) <= tol))
    bad = [p for p in poles if abs(p) > tol and p.real >= -tol]
    if bad or at0 > 1:
        where = bad[0] if bad else 0j
        return None, f"the response does not settle (pole at s = {where.real:.6g}{where.imag:+.6g}j)"
    if at0 == 0:
        return 0.0, ""
    e = sp.cancel(sp.together((S * Y).subs({a: sp.exp(sp.expand(a.args[0])) for a in Y.atoms(sp.exp)})))
    num, den = sp.fraction(e)
    d0 = den.subs(S, 0)
    if d0 == 0:
        return None, "no final value found"
    return float(sp.N(num.subs(S, 0) / d0)), ""


def _sample(text_or_expr, times, input_kind, params):
    from .. import api
    out = api.sample(text_or_expr, np.asarray(times, dtype=float), input=input_kind, params=params)
    return np.asarray(out.y, dtype=float)


def _refine(fn, t_lo, t_hi, score, rounds=ROUNDS):
    """Refine an extremum of score(y) (maximised) inside [t_lo, t_hi] on nested grids."""
    best_t, best_y = None, None
    for _ in range(rounds):
        ts = np.linspace(t_lo, t_hi, SUB + 1)
        ys = fn(ts)
        sc = score(ys)
        sc = np.where(np.isfinite(sc), sc, -np.inf)
        i = int(np.argmax(sc))
        best_t, best_y = float(ts[i]), float(ys[i])
        h = ts[1] - ts[0]
        t_lo, t_hi = max(ts[0], best_t - h), min(ts[-1], best_t + h)
    return best_t, best_y


def _refine_crossing(fn, t_lo, t_hi, above, rounds=ROUNDS):
    """The last time in [t_lo, t_hi] where above(y) holds (it holds at t_lo, not at t_hi)."""
    for _ in range(rounds):
        ts = np.linspace(t_lo, t_hi, SUB + 1)
        ok = above(fn(ts))
        idx = np.nonzero(ok)[0]
        i = int(idx[-1]) if idx.size else 0
        t_lo, t_hi = float(ts[i]), float(ts[min(i + 1, SUB)])
    return 0.5 * (t_lo + t_hi)


def response_shape(expr, params: Mapping | None = None, *, input=None, decay: float = 5.0) -> ShapeFigures:
    """Shape figures of the response of ``expr`` to ``input`` (default impulse:
    the expression is the response itself); ``decay`` is the x of the decay time
    in % of the largest deviation."""
    if not 0 < decay < 100:
        raise UnsupportedExpressionError(f"the decay level {decay:g} % must be between 0 and 100")
    F = to_expr(expr, params)
    require_values(F, "response figures")
    U, label = _input_expr(input)
    Y = F * U
    notes = []
    try:
        mY = model(Y)
        mF = model(F)
    except UnsupportedExpressionError:
        raise
    poles_Y = mY.den_roots if mY.rational else None
    poles_F = mF.den_roots if mF.rational else None
    delay = max(mY.delays) if mY.rational else 0.0
    yf, why = _final_value(Y, poles_Y)
    if not mY.rational:
        from .figures_numeric import _limit
        yf = _limit(S * Y, 0)
        why = "" if yf is not None else "no final value (lim s Y(s) as s -> 0 not found)"
        if yf is not None:
            notes.append("final value by the final value theorem without a check of the singularities "
                         "(Y(s) is not rational)")
    if yf is None:
        return ShapeFigures(label, None, None, None, None, None, decay, None, *_dominant(poles_F, notes),
                            None, None, None, tuple(notes + [why]))

    def fn(ts):
        return _sample(expr, ts, input, params)

    # horizon
    if poles_F is not None and poles_F.size:
        decaying = [p for p in poles_Y if abs(p) > 1e-12 and p.real < 0]
        sigma = min(-p.real for p in decaying) if decaying else 1.0
        mult = max(int(np.sum(np.abs(poles_Y - p) < 1e-6 * max(1.0, abs(p)))) for p in decaying) if decaying else 1
        horizon = delay + (math.log(100.0 / decay) + 10.0 + 4.0 * (mult - 1)) / sigma
    else:
        horizon = max(1.0, 2.0 * delay)
    n = POINTS if mY.rational else POINTS_NUMERIC
    for _ in range(MAX_DOUBLINGS):
        ts = np.linspace(0.0, horizon, n)
        ys = fn(ts)
        dev = np.abs(ys - yf)
        big = float(np.nanmax(dev)) if np.any(np.isfinite(dev)) else 0.0
        tail = dev[int(0.8 * n):]
        if big == 0 or float(np.nanmax(tail)) <= 0.1 * decay / 100 * big:
            break
        horizon *= 2
    else:
        return ShapeFigures(label, yf, None, None, None, None, decay, None, *_dominant(poles_F, notes),
                            None, None, horizon, tuple(notes + ["the response does not settle within the "
                                                                "search horizon"]))
    if not np.all(np.isfinite(ys)):
        raise UnsupportedExpressionError("the response is not finite on the search grid")
    h = ts[1] - ts[0]
    # extremum
    i = int(np.argmax(np.abs(ys)))
    t_ext, y_ext = _refine(fn, max(0.0, ts[i] - h), min(horizon, ts[i] + h), np.abs)
    if abs(yf) > 0 and abs(y_ext) <= abs(yf) * (1 + 1e-9):
        t_ext, y_ext = None, yf
        notes.append("the largest value is the final value, reached only as t -> infinity")
    # undershoot
    ref = yf if abs(yf) > 1e-12 * max(1.0, float(np.max(np.abs(ys)))) else y_ext
    sgn = 1.0 if ref >= 0 else -1.0
    j = int(np.argmax(-sgn * ys))
    under = 0.0
    if -sgn * ys[j] > 0:
        _, yu = _refine(fn, max(0.0, ts[j] - h), min(horizon, ts[j] + h), lambda y: -sgn * y)
        under = max(0.0, -sgn * yu)
        if under <= 1e-9 * abs(ref):
            under = 0.0
    under_pct = 100.0 * under / abs(ref) if ref else None
    # decay time
    level = decay / 100.0 * big
    above = np.nonzero(dev >= level)[0]
    t_decay = None
    if above.size:
        k = int(above[-1])
        t_decay = _refine_crossing(fn, float(ts[k]), float(ts[min(k + 1, n - 1)]),
                                   lambda y: np.abs(y - yf) >= level) if k < n - 1 else None
    dom, dec, per = _dominant(poles_F, notes)
    md, mp = _measured(ts, ys - yf, fn, yf, h, horizon)
    return ShapeFigures(label, yf, y_ext, t_ext, under, under_pct, decay, t_decay, dom, dec, per, md, mp,
                        float(horizon), tuple(notes))


def _dominant(poles, notes) -> tuple:
    """(dominant pole, logarithmic decrement, period) from the poles of F."""
    if poles is None:
        notes.append("no dominant mode: F(s) is not rational (no pole list)")
        return None, None, None
    cand = [p for p in poles if p != 0]
    if not cand:
        return None, None, None
    top = max(p.real for p in cand)
    scale = max(1.0, max(abs(p) for p in cand))
    slow = [p for p in cand if abs(p.real - top) <= 1e-9 * scale]
    osc = [p for p in slow if p.imag > 1e-12 * scale]
    if not osc:
        notes.append(f"the dominant mode is not oscillatory (real pole at s = {top:.6g}): no decrement")
        return complex(slow[0].real, 0.0), None, None
    p = max(osc, key=lambda z: z.imag)
    period = 2 * math.pi / p.imag
    return complex(p), float(-p.real * period) + 0.0, float(period)


def _measured(ts, dev, fn, yf, h, horizon):
    """Decrement and period from the first two same-sign local maxima of |y - y_inf|."""
    peaks = [i for i in range(1, dev.size - 1)
             if abs(dev[i]) >= abs(dev[i - 1]) and abs(dev[i]) > abs(dev[i + 1]) and dev[i] != 0]
    if dev.size and abs(dev[0]) > abs(dev[1]):
        peaks = [0] + peaks
    if len(peaks) < 3:
        return None, None
    refined = []
    for i in peaks[:4]:
        t, y = _refine(fn, max(0.0, ts[i] - h), min(horizon, ts[i] + h), lambda y: np.abs(y - yf))
        refined.append((t, y - yf))
    first = refined[0]
    same = [r for r in refined[1:] if (r[1] > 0) == (first[1] > 0)]
    if not same or same[0][1] == 0 or first[1] == 0:
        return None, None
    ratio = first[1] / same[0][1]
    if ratio <= 0:
        return None, None
    return math.log(ratio), same[0][0] - first[0]


__all__ = ["ShapeFigures", "response_shape"]
