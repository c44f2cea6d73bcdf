"""Loop figures of an open loop L(s) and loop algebra.

Margins: gain crossovers are the roots of |L(jw)| = 1 (exact polynomial in
w^2 for a rational L with one delay, a bracketed scan otherwise); phase
crossovers the roots of phase(w) = -180 deg + k 360 deg on the continuous
phase; the gain margin is the smallest over the phase crossovers, the phase
margin the smallest over the gain crossovers; delay margin min over the gain
crossovers of (phase margin mod 360 deg)/w_c; peak sensitivity max |1/(1+L)|
by a fine scan polished by bounded minimisation.

Closed-loop stability by the Nyquist criterion, exact with dead time: for
L = sum_k e^{-s T_k} N_k(s)/D(s) (proper; strictly proper when a delay is
present, or |L(j inf)| < 1), 1 + L = Q/D with the entire function
Q = D + sum_k e^{-s T_k} N_k.  Along the D-contour (up the imaginary axis,
back on a large right half-circle of radius R where |L| < 1 is guaranteed by a
coefficient bound) the argument principle gives the closed-loop right
half-plane poles

    Z = n/2 + (arg(1 + L(jR)) - [arg Q(jw)]_{w=0}^{R}) / pi ,   n = deg D,

the phase of Q tracked on a grid refined until each step turns by less than
pi/8.  With P the open-loop right half-plane poles, the Nyquist plot of L
encircles -1 clockwise N = Z - P times.  Without a delay the closed-loop poles
(roots of D + N) are computed too and must agree.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import sympy as sp
from scipy.optimize import brentq, minimize_scalar

from .._types import S
from ..errors import UnsupportedExpressionError
from . import limits
from .frequency import (FrequencyModel, SCAN_PER_DECADE, _scale_of, bracket_roots, level_crossings, model,
                        to_expr, tracked)
from .split import split_delays

#: largest number of grid points for a scan with dead time
MAX_SCAN = 400_000
#: phase crossovers refined (with dead time there are infinitely many; those with the largest |L|)
MAX_CROSSINGS = 24


@dataclass(frozen=True)
class Margins:
    gain_crossover: float | None
    gain_crossovers: tuple
    phase_margin_deg: float | None
    phase_crossover: float | None
    phase_crossovers: tuple
    gain_margin_db: float | None
    delay_margin: float | None
    peak_sensitivity: float | None
    peak_sensitivity_frequency: float | None
    closed_loop_stable: bool | None
    open_loop_rhp_poles: int | None
    closed_loop_rhp_poles: int | None
    encirclements: int | None           # clockwise encirclements of -1 by L(jw), w from -inf to inf
    closed_loop_poles: tuple = ()       # without delay: roots of D + N
    notes: tuple = field(default=())

    def to_dict(self) -> dict:
        return {"gain_crossover": self.gain_crossover, "phase_margin_deg": self.phase_margin_deg,
                "phase_crossover": self.phase_crossover, "gain_margin_db": self.gain_margin_db,
                "delay_margin": self.delay_margin, "closed_loop_stable": self.closed_loop_stable,
                "gain_crossovers": list(self.gain_crossovers), "phase_crossovers": list(self.phase_crossovers),
                "peak_sensitivity": self.peak_sensitivity,
                "peak_sensitivity_frequency": self.peak_sensitivity_frequency,
                "open_loop_rhp_poles": self.open_loop_rhp_poles,
                "closed_loop_rhp_poles": self.closed_loop_rhp_poles, "encirclements": self.encirclements,
                "closed_loop_poles": [[p.real, p.imag] for p in self.closed_loop_poles],
                "notes": list(self.notes)}


def _wrap_deg(x: float) -> float:
    """x wrapped into (-180, 180]."""
    y = math.remainder(x, 360.0)
    return 180.0 if abs(y + 180.0) < 1e-9 else y + 0.0


def scan_grid(m: FrequencyModel, top: float | None = None) -> np.ndarray:
    """A frequency grid for scans: logarithmic (SCAN_PER_DECADE a decade) over
    the range of interest, plus a linear grid fine enough for the delays, plus
    points around every lightly damped pole and zero."""
    lo, hi = _scale_of(m)
    if top is not None:
        hi = max(min(hi, top), lo * 10)
    parts = [np.geomspace(lo, hi, int(SCAN_PER_DECADE * math.log10(hi / lo)) + 1)]
    T = max(m.delays) if m.rational and m.delays else 0.0
    if T > 0:
        step = math.pi / (16 * T)
        parts.append(np.arange(step, min(hi, step * MAX_SCAN), step))
    for roots in (m.den_roots, m.zeros):
        if roots is not None:
            for r in roots:
                if r.imag > 0:
                    width = max(abs(r.real), 1e-12 * abs(r))
                    parts.append(r.imag + width * np.linspace(-8, 8, 161))
    w = np.unique(np.concatenate(parts))
    return w[w > 0]


def _useful_top(m: FrequencyModel) -> float:
    """A frequency above which |L| stays below 1e-4 (rational strictly proper),
    so phase crossovers beyond it have gain margins above 80 dB."""
    lo, hi = _scale_of(m)
    if not m.rational or m.relative_degree is None or m.relative_degree <= 0:
        return hi
    w = np.geomspace(lo, hi, int(20 * math.log10(hi / lo)) + 1)
    mag = np.abs(m.values(w))
    above = np.nonzero(mag > 1e-4)[0]
    return float(w[min(above[-1] + 1, w.size - 1)]) if above.size else lo * 10


def margins(expr, params: Mapping | None = None) -> Margins:
    """Loop figures of the open loop ``expr``."""
    m = model(expr, params)
    notes = []
    with limits.deadline(None):
        gc = level_crossings(m, 1.0)
        ph_gc = [float(np.degrees(m.phase(np.array([w]))[0])) for w in gc]
        pms = [_wrap_deg(180.0 + p) for p in ph_gc]
        pm = pc_w = gm = wc = None
        if gc:
            i = int(np.argmin(pms))
            pm, wc = pms[i], gc[i]
        else:
            notes.append("no gain crossover: |L(jw)| does not cross 1")
        pcs = phase_crossovers(m)
        gms = [-20.0 * math.log10(abs(complex(m.values(np.array([w]))[0]))) for w in pcs]
        if pcs:
            i = int(np.argmin(gms))
            gm, pc_w = gms[i], pcs[i]
        else:
            notes.append("no phase crossover: the phase does not reach -180 deg")
        ms, ms_w = peak_sensitivity(m)
        stab = nyquist(m)
    notes += list(stab["notes"])
    hidden = [r for r in (m.cancelled if m.cancelled is not None else []) if r.real >= 0]
    if hidden:
        r = hidden[0]
        where = f"{r.real:.6g}" if r.imag == 0 else f"{r.real:.6g}{r.imag:+.6g}j"
        notes.append(f"a factor with the root s = {where} cancels in L(s): the closed loop keeps that "
                     "mode (not internally stable)")
        stab = dict(stab, stable=False)
    dm = None
    if stab["stable"] and gc:
        dm = min(math.radians(p % 360.0) / w for p, w in zip(pms, gc))
    elif gc and stab["stable"] is False:
        notes.append("no delay margin: the closed loop is unstable already")
    return Margins(wc, tuple(gc), pm, pc_w, tuple(pcs), gm, dm, ms, ms_w, stab["stable"], stab["P"], stab["Z"],
                   stab["N"], tuple(stab["poles"]), tuple(notes))


def phase_crossovers(m: FrequencyModel) -> list[float]:
    """w > 0 where the continuous phase is -180 deg + k 360 deg."""
    w = scan_grid(m, _useful_top(m))
    ph = m.phase(w)
    h = (ph + math.pi) / (2 * math.pi)
    k = np.floor(h)
    out = []
    idx = np.nonzero(k[1:] != k[:-1])[0]
    if idx.size > MAX_CROSSINGS:            # a delay keeps turning: keep those with the largest |L|
        mag = np.abs(m.values(w[idx]))
        idx = np.sort(idx[np.argsort(-mag, kind="stable")[:MAX_CROSSINGS]])
    for i in idx:
        target_k = max(k[i], k[i + 1])
        level = 2 * math.pi * target_k - math.pi

        def g(x):
            return float(m.phase(np.array([x]))[0]) - level
        try:
            x = brentq(g, w[i], w[i + 1], xtol=1e-15 * w[i], rtol=1e-15, maxiter=200)
        except ValueError:
            continue
        if abs(g(x)) < 1e-6:            # not a jump of the phase at a root on the axis
            out.append(float(x))
    return out


def peak_sensitivity(m: FrequencyModel) -> tuple[float | None, float | None]:
    """(max |1/(1 + L(jw))| over w > 0, where); for a supremum approached as
    w -> inf (or 0) the value at the end of the range and that frequency."""
    w = scan_grid(m)
    d = np.abs(1.0 + m.values(w))
    ok = np.isfinite(d)
    if not np.any(ok):
        return None, None
    i0 = int(np.argmin(np.where(ok, d, np.inf)))
    best = (float(d[i0]), float(w[i0]))
    cand = [i for i in range(1, w.size - 1) if d[i] <= d[i - 1] and d[i] <= d[i + 1]]
    cand = sorted(cand, key=lambda i: d[i])[:8]
    for i in cand:
        r = minimize_scalar(lambda x: abs(1.0 + complex(m.values(np.array([x]))[0])),
                            bounds=(w[i - 1], w[i + 1]), method="bounded", options={"xatol": 1e-12 * w[i]})
        if r.fun < best[0]:
            best = (float(r.fun), float(r.x))
    if best[0] <= 0:
        return None, None
    return 1.0 / best[0], best[1]


def _q_values(m: FrequencyModel):
    """w -> a positive multiple of Q(jw) = D(jw) + sum e^{-jwT} N(jw) (same angle)."""
    den = m.den
    n = len(den) - 1

    def q(w):
        u = np.asarray(w, dtype=float) / m.w0
        ju = 1j * u
        out = np.empty(u.shape, dtype=complex)
        lo = np.abs(u) <= 1
        hi = ~lo
        with np.errstate(all="ignore"):
            if lo.any():
                acc = np.polyval(den, ju[lo])
                for T, num in zip(m.delays, m.nums):
                    acc = acc + np.exp(-1j * u[lo] * m.w0 * T) * np.polyval(num, ju[lo])
                out[lo] = acc
            if hi.any():
                r = 1.0 / ju[hi]
                acc = np.polyval(den[::-1], r)
                for T, num in zip(m.delays, m.nums):
                    acc = acc + np.exp(-1j * u[hi] * m.w0 * T) * np.polyval(num[::-1], r) * r ** (n - (len(num) - 1))
                out[hi] = acc * (1j ** (n % 4))
        return out
    return q


def _radius(m: FrequencyModel, target: float, nums=None) -> float | None:
    """R (rad/s) with |sum_k N_k(s)/D(s)| <= target for |s| >= R in the closed right
    half-plane (N_k = the loop's numerators unless given), from a coefficient bound
    of the scaled polynomials (None if not found)."""
    den = np.abs(m.den)
    n = len(den) - 1
    nums = m.nums if nums is None else nums
    rho = 1.0
    for _ in range(200):
        inv = rho ** -np.arange(0, n + 1, dtype=float)
        lower = den[0] - float(np.sum(den[1:] * inv[1:]))
        if lower > 0:
            upper = 0.0
            for num in nums:
                d = len(num) - 1
                upper += float(np.sum(np.abs(num) * rho ** -np.arange(0, d + 1, dtype=float))) * rho ** (d - n)
            if upper / lower <= target:
                return rho * m.w0
        rho *= 2.0
    return None


def sum_polys(polys) -> np.ndarray:
    out = np.zeros(1)
    for p in polys:
        out = np.polyadd(out, p)
    return out


def nyquist(m: FrequencyModel) -> dict:
    """Closed-loop stability by the argument principle (see the module text)."""
    out = {"stable": None, "P": None, "Z": None, "N": None, "poles": [], "notes": []}
    if not m.rational:
        out["notes"].append("closed-loop stability not decided: L(s) is not rational with delays "
                            "(the Nyquist count needs its poles)")
        return out
    n = len(m.den) - 1
    degs = [len(c) - 1 for c in m.nums]
    delayed = any(T > 0 for T in m.delays)
    if max(degs) > n:
        out["notes"].append("closed-loop stability not decided: L(s) is improper (more zeros than poles)")
        return out
    lead = sum(c[0] for c, d in zip(m.nums, degs) if d == n) / m.den[0] if max(degs) == n else 0.0
    if max(degs) == n and delayed:
        lead = sum(abs(c[0]) for c, d in zip(m.nums, degs) if d == n) / abs(m.den[0])
        if lead >= 1:
            out["notes"].append("closed-loop stability not decided: with dead time the Nyquist count needs "
                                "|L(j inf)| < 1 (this loop is of neutral type)")
            return out
    if not delayed and abs(1 + lead) < 1e-12:
        out["notes"].append("closed-loop stability not decided: 1 + L(j inf) = 0")
        return out
    roots = m.den_roots
    tol = 1e-10 * max(1.0, float(np.max(np.abs(roots)))) if roots.size else 0.0
    P = int(np.sum(roots.real > tol))
    out["P"] = P
    if delayed or max(degs) < n:
        centre = 1.0                 # on the large arc 1 + L stays within |L| <= target of 1
        R = _radius(m, 0.5 if max(degs) < n else (1 + abs(lead)) / 2)
    else:                            # biproper, no delay: 1 + L stays near 1 + L(inf) on the arc
        centre = 1.0 + lead
        rest = np.polysub(sum_polys(m.nums), lead * np.asarray(m.den))
        rest = np.trim_zeros(rest, "f") if np.any(rest) else np.zeros(1)
        R = _radius(m, abs(centre) / 2, [rest])
    if R is None:
        out["notes"].append("closed-loop stability not decided: no radius found for the Nyquist contour")
        return out
    q = _q_values(m)
    base = [np.array([0.0]), np.geomspace(R * 1e-12, R, int(100 * 12) + 1)]
    T = max(m.delays)
    if T > 0:
        step = math.pi / (16 * T)
        base.append(np.arange(step, R, step) if R / step < 4_000_000 else np.array([]))
        if R / step >= 4_000_000:
            out["notes"].append("closed-loop stability not decided: dead time too long against the "
                                "loop's bandwidth for the contour grid")
            return out
    for r in roots:
        if r.imag > 0:
            base.append(r.imag + max(abs(r.real), 1e-12 * abs(r)) * np.linspace(-8, 8, 81))
    grid = np.unique(np.concatenate(base))
    grid = grid[(grid >= 0) & (grid <= R)]
    grid, cont, jumps = tracked(q, grid, max_step=np.pi / 8)
    if jumps:
        out["stable"] = False
        out["notes"].append("marginal: a closed-loop pole lies on the imaginary axis (the phase of "
                            "1 + L(jw) jumps)")
        return out
    q0 = complex(q(np.array([0.0]))[0])
    if abs(q0) <= 1e-13 * (abs(m.den[-1]) + sum(abs(c[-1]) for c in m.nums)):
        out["stable"] = False
        out["notes"].append("marginal: a closed-loop pole at s = 0")
        return out
    from .frequency import _branch_angle
    d_axis = float(_branch_angle(np.array([R]), roots)[0] - _branch_angle(np.array([-R]), roots)[0])
    L_R = complex(m.values(np.array([R]))[0])
    arc = (1 + L_R) / centre
    winding = 2 * (cont[-1] - cont[0]) - d_axis - 2 * math.atan2(arc.imag, arc.real)
    Zf = P - winding / (2 * math.pi)
    Z = int(round(Zf))
    with np.errstate(all="ignore"):
        closest = float(np.nanmin(np.abs(1.0 + m.values(grid[grid > 0]))))
    if closest < 1e-9:
        out["stable"] = False
        out["notes"].append("marginal: a closed-loop pole lies on the imaginary axis (1 + L(jw) = 0 at "
                            "some w)")
        return out
    if abs(Zf - Z) > 0.05:
        if abs(abs(Zf - math.floor(Zf)) - 0.5) < 0.05:
            out["stable"] = False
            out["notes"].append("marginal: a closed-loop pole lies on the imaginary axis")
        else:
            out["notes"].append(f"closed-loop stability not decided: the Nyquist count {Zf:.3f} is not a whole "
                                "number")
        return out
    out["Z"], out["N"] = Z, Z - P
    out["stable"] = Z == 0
    if not delayed:
        qc = np.array(m.den, dtype=float)
        for num in m.nums:
            qc = np.polyadd(qc, num)
        poles = np.roots(np.trim_zeros(qc, "f")) * m.w0
        out["poles"] = [complex(p) for p in sorted(poles, key=lambda z: (z.real, z.imag))]
        ptol = 1e-9 * max(1.0, float(np.max(np.abs(poles)))) if poles.size else 0.0
        z_roots = int(np.sum(poles.real > ptol))
        if np.any(np.abs(poles.real) <= ptol):
            out["notes"].append("a closed-loop pole is (numerically) on the imaginary axis")
        if z_roots != Z:
            out["stable"] = None
            out["notes"].append(f"closed-loop stability not decided: the Nyquist count ({Z}) and the "
                                f"closed-loop roots ({z_roots} in the right half-plane) disagree")
    return out


# ------------------------------------------------------------------ loop algebra
@dataclass(frozen=True)
class LoopAlgebra:
    loop: str            # L = C G H
    closed: str          # T = C G / (1 + L), reference to output
    sensitivity: str     # S = 1 / (1 + L)
    effort: str          # C / (1 + L), reference to controller output
    disturbance: str     # G / (1 + L), disturbance at the plant input to output
    cancellations: tuple
    rhp_zeros: tuple
    notes: tuple = ()

    def to_dict(self) -> dict:
        return {"loop": self.loop, "closed_loop": self.closed, "sensitivity": self.sensitivity,
                "effort": self.effort, "disturbance": self.disturbance,
                "cancellations": list(self.cancellations), "rhp_zeros": list(self.rhp_zeros),
                "notes": list(self.notes)}

    def part(self, which: str) -> str:
        return {"loop": self.loop, "closed": self.closed, "sensitivity": self.sensitivity,
                "effort": self.effort, "disturbance": self.disturbance}[which]


LOOP_PARTS = ("loop", "closed", "sensitivity", "effort", "disturbance")


def expression_text(e: sp.Expr) -> str:
    """Text that ``parse`` reads back to the same expression: one fraction,
    polynomials expanded, delays kept as exp(-T*s) factors of the terms."""
    atoms = sorted(e.atoms(sp.exp), key=sp.default_sort_key)
    subs = {a: sp.Dummy(f"z{i}", positive=True) for i, a in enumerate(atoms)}
    back = {v: k for k, v in subs.items()}
    r = sp.cancel(sp.together(e.xreplace(subs)))
    num, den = sp.fraction(r)
    zs = list(back)
    num = sp.collect(sp.expand(num), zs).xreplace(back) if zs else sp.expand(num)
    den = sp.collect(sp.expand(den), zs).xreplace(back) if zs else sp.expand(den)
    if den == 1:
        return sp.sstr(num)

    def wrap(x):
        return sp.sstr(x) if (x.is_Atom or x.is_Pow or (x.is_Mul and not x.could_extract_minus_sign())) \
            else f"({sp.sstr(x)})"
    return f"{wrap(num)}/{wrap(den)}" if not den.is_Mul and not den.is_Pow else f"{wrap(num)}/({sp.sstr(den)})"


def _rational_block(e: sp.Expr):
    """(num poly, den poly) of a block without its delay, or None."""
    try:
        pieces = split_delays(e)
    except Exception:  # noqa: BLE001
        return None
    if not pieces or len(pieces) != 1:
        return None
    p = pieces[0]
    try:
        return sp.Poly(sp.expand(p.gain * p.num), S), sp.Poly(sp.expand(p.den), S)
    except sp.PolynomialError:
        return None


def _root_text(r) -> str:
    r = sp.nsimplify(r) if isinstance(r, sp.Float) else r
    if r.is_number:
        v = complex(sp.N(r))
        if abs(v.imag) < 1e-15 * max(1.0, abs(v)):
            exact = sp.sstr(r)
            return exact if len(exact) <= 24 else f"{v.real:.6g}"
        return f"{v.real:.6g} {'+' if v.imag >= 0 else '-'} {abs(v.imag):.6g}j"
    return sp.sstr(r)


def _roots_of(p: sp.Poly):
    try:
        rs = sp.roots(p)
        if sum(rs.values()) == p.degree():
            return [r for r, k in rs.items() for _ in range(k)]
    except Exception:  # noqa: BLE001
        pass
    if p.free_symbols - {S}:
        return []
    return [sp.Float(complex(z).real) + sp.I * sp.Float(complex(z).imag)
            for z in np.roots([complex(sp.N(c)) for c in p.all_coeffs()])]


def _is_rhp(r) -> bool | None:
    if not r.is_number:
        re = sp.re(r)
        return True if re.is_positive else (False if re.is_nonpositive else None)
    return complex(sp.N(r)).real > 0


def close_loop(plant, controller=None, sensor=None, params: Mapping | None = None) -> LoopAlgebra:
    """L, T, S, controller effort and disturbance response of the loop with
    ``controller`` C (default 1) driving ``plant`` G, ``sensor`` H (default 1)
    in the feedback path, negative feedback."""
    G = to_expr(plant, params)
    C = to_expr(controller, params) if controller not in (None, "") else sp.S.One
    H = to_expr(sensor, params) if sensor not in (None, "") else sp.S.One
    with limits.deadline(None):
        blocks = {"controller": C, "plant": G, "sensor": H}
        rat = {k: _rational_block(v) for k, v in blocks.items()}
        cancellations = []
        notes = []
        for a in blocks:
            for b in blocks:
                if a == b or rat[a] is None or rat[b] is None:
                    continue
                g = rat[a][0].gcd(rat[b][1])
                if g.degree() <= 0:
                    continue
                for r in _roots_of(g):
                    text = f"the {a} zero at s = {_root_text(r)} cancels a {b} pole"
                    if _is_rhp(r):
                        text += (" in the right half-plane: that mode stays in the loop, hidden from L(s) - "
                                 "the closed loop is internally unstable")
                    cancellations.append(text)
        L = C * G * H
        one = 1 + L
        parts = {"loop": L, "closed": C * G / one, "sensitivity": 1 / one, "effort": C / one,
                 "disturbance": G / one}
        texts = {k: expression_text(v) for k, v in parts.items()}
        rhp = []
        for who in ("plant", "controller", "sensor"):
            if rat[who] is None:
                continue
            for r in _roots_of(rat[who][0]):
                flag = _is_rhp(r)
                if flag:
                    rhp.append(f"{who} zero at s = {_root_text(r)} in the right half-plane (inverse response; "
                               "it limits the achievable bandwidth)")
                elif flag is None:
                    notes.append(f"{who} zero at s = {_root_text(r)}: half-plane not known without values")
        for who, r in rat.items():
            if r is None:
                notes.append(f"the {who} is not a rational function with one delay: no cancellation check")
    return LoopAlgebra(texts["loop"], texts["closed"], texts["sensitivity"], texts["effort"], texts["disturbance"],
                       tuple(cancellations), tuple(rhp), tuple(notes))


__all__ = ["Margins", "margins", "phase_crossovers", "peak_sensitivity", "nyquist", "LoopAlgebra", "close_loop",
           "LOOP_PARTS", "expression_text", "scan_grid"]
