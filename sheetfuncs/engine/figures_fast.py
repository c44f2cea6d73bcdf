"""Figures on the fast core: poles from the modal terms, exact DC gain and
initial/final values, step figures by root finding on the error-controlled
evaluators -- also for loops closed around a dead time, whose stability is
decided by the argument principle on the characteristic quasi-polynomial.

``figures`` falls back to the general route (``figures.py``) for what the fast
core does not cover.
"""
from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from . import limits
from . import qpoly as qp
from .qpoly import Q
from .fast import invert_quasi, quasi_of
from .figcore import Figures, _no_step, _stability, check_bands, no_final_value, pole_info, time_figures
from .numbers import to_float
from .quasi import Quasi
from .sample import input_name, input_quasi

DEADTIME_POINTS = 1500
MAX_HORIZON_DOUBLINGS = 30


def figures(expr, params: Mapping | None = None, *, input="step", settle: float = 0.02,
            rise: tuple = (0.1, 0.9), timeout: float | None = None) -> Figures:
    """Figures of the response of ``expr`` to ``input`` (impulse, step, ramp or U(s))."""
    lo, hi = check_bands(settle, rise)
    with limits.deadline(timeout):
        qF = quasi_of(expr, params)
        qU = input_quasi(input, params) if qF is not None else None
        if qF is None or qU is None:
            from .figures import figures as general
            return general(expr, params, input=input, settle=settle, rise=rise, timeout=timeout)
        label = input_name(input)
        if label == "given":
            c = (qU * Quasi.s()).constant_value()
            if c is not None and c != 0:
                label = "step"             # a scaled step such as 5/s: step figures apply
        return quasi_figures(qF, qU, label, settle, lo, hi)


def value_at_zero(q: Quasi, order: int = 24):
    """lim F(s) as s -> 0 exactly (Taylor series of the quasi-polynomials, e^{-sT} included):
    a Fraction, or None for a pole at s = 0."""
    def taylor(m):
        out = [Q(0)] * order
        for d, p in m.items():
            # p(s) e^{-ds} = sum_i p_i s^i * sum_k (-d)^k s^k / k!
            ek = [Q(1)]
            for k in range(1, order):
                ek.append(ek[-1] * (-d) / k)
            for i, c in enumerate(qp.coeffs(p)):
                if c and i < order:
                    for k in range(order - i):
                        out[i + k] += c * ek[k]
        return out
    n, d = taylor(q.num), taylor(q.den)
    kn = next((i for i, c in enumerate(n) if c), None)
    kd = next((i for i, c in enumerate(d) if c), None)
    if kn is None:
        return Q(0)
    if kd is None or kn < kd:
        return None
    if kn > kd:
        return Q(0)
    return n[kn] / d[kd]


def _merge_poles(res) -> list[tuple[complex, int]]:
    acc: dict = {}
    for piece in res.modal_pieces:
        for re_, im_, mult in piece.modal.poles():
            p = complex(to_float(re_), to_float(im_))
            for z in ((p, p.conjugate()) if p.imag else (p,)):
                key = (round(z.real, 10), round(z.imag, 10))
                v, m0 = acc.get(key, (z, 0))
                acc[key] = (v, max(m0, mult))
    return sorted(acc.values(), key=lambda kv: (-kv[0].real, kv[0].imag))


def _zeros(q: Quasi) -> tuple:
    if not q.delay_free_den or set(q.num) != {0}:
        return ()
    N = q.num[next(iter(q.num))]
    if qp.degree(N) <= 0:
        return ()
    return tuple(complex(z) for z in np.roots([float(c) for c in reversed(qp.coeffs(N))]))


def _initial_value(resY):
    total = 0.0
    for piece in resY.modal_pieces if resY.series is None else resY.series.pieces_upto(0.0):
        if piece.delay != 0:
            continue
        if piece.modal.direct:
            return None
        for m in piece.modal.real:
            if m.coeffs:
                total += piece.sign * to_float(m.coeffs[0])
        for m in piece.modal.pairs:
            if m.xs:
                total += piece.sign * 2 * to_float(m.xs[0])
    return total


def quasi_figures(qF: Quasi, qU: Quasi, label: str, settle: float, lo: float, hi: float) -> Figures:
    resF = invert_quasi(qF)
    qY = qF * qU
    resY = invert_quasi(qY)
    dc = value_at_zero(qF)
    dc = None if dc is None else float(dc)
    initial = _initial_value(resY)
    common = dict(input=label, dc_gain=dc, initial_value=initial, settling_band=settle,
                  rise_band=(lo, hi))
    if resF.series is not None:
        return _deadtime_figures(resF, resY, qY, common, settle, lo, hi)
    poles = _merge_poles(resF)
    stable, stability = _stability(poles)
    ypoles = _merge_poles(resY)
    final, note = None, no_final_value(ypoles) or ""
    if not note:
        v = value_at_zero(qY * Quasi.s())
        final = None if v is None else float(v)
        note = "final value theorem: all poles of sY(s) in the open left half-plane"
    out = dict(common, poles=tuple(pole_info(p, m) for p, m in poles), zeros=_zeros(qF),
               stable=stable, stability=stability, final_value=final, final_value_note=note)
    if label == "step":
        if final is None or final == 0 or not poles:
            out.update(_no_step())
        else:
            slow = min(-p.real for p, _ in poles)
            kmax = max(m for _, m in poles)
            delay = max(float(p.delay) for p in resY.modal_pieces)
            horizon = delay + (math.log(1.0 / settle) + 14 + 4 * (kmax - 1)) / slow
            ev = resY.evaluator()
            out.update(time_figures(ev.values, ev.derivative().values, horizon, final, settle, lo, hi))
    return Figures(**out)


def _deadtime_figures(resF, resY, qY, common, settle, lo, hi) -> Figures:
    series = resF.series
    z = series.rhp_roots()
    if z is None:
        stable, stability = None, ("not determined (roots of the characteristic equation on or near "
                                   "the imaginary axis, or a neutral-type loop)")
    elif z == 0:
        stable, stability = True, ("stable (no root of the characteristic equation with dead time in "
                                   "the right half-plane; argument principle)")
    else:
        stable, stability = False, f"unstable ({z} roots of the characteristic equation in the right half-plane)"
    final, note = None, ""
    sY = qY * Quasi.s()
    if stable:
        v = value_at_zero(sY)
        if v is None:
            note = "no final value: the response grows without bound (pole at s = 0)"
        else:
            final = float(v)
            note = "final value theorem: the loop is stable (argument principle on the characteristic equation)"
    else:
        note = "no final value: the loop is not shown stable"
    out = dict(common, poles=(), zeros=(), stable=stable, stability=stability, final_value=final,
               final_value_note=note,
               notes=("dead-time loop: response by the exact series in the delay (method of steps)",))
    if common["input"] != "step":
        return Figures(**out)
    if not final:
        out.update(_no_step())
        out["notes"] = out["notes"] + ("no step figures without a non-zero final value",)
        return Figures(**out)
    ydelays = [float(d) for d in qY.num] + [0.0]
    horizon = max(1.0, 4 * max(series.delays() + ydelays))
    for _ in range(MAX_HORIZON_DOUBLINGS):
        ev = resY.evaluator(horizon)
        tail = ev.values(np.linspace(horizon * 0.6, horizon, 24)) / final
        if np.all(np.abs(tail - 1) < settle / 10):
            break
        horizon *= 2
    else:
        out.update(_no_step("the response does not settle within the search horizon"))
        return Figures(**out)
    ev = resY.evaluator(horizon)
    figs = time_figures(ev.values, None, horizon, final, settle, lo, hi, points=DEADTIME_POINTS)
    out.update(figs)
    notes = out.pop("notes", ())
    out["notes"] = tuple(notes) + figs.get("notes", ())
    return Figures(**out)
