"""Frequency response F(jw) and frequency figures.

An expression is read once into a ``FrequencyModel``:

* rational with delays, ``F = sum_k e^{-s T_k} N_k(s) / D(s)``: exact polynomial
  coefficients (SymPy, once) become float arrays; F(jw) is evaluated with numpy,
  each polynomial on a frequency scale w0 and, above w0, in powers of
  1/(jw), so high degrees and wide grids neither overflow nor lose digits;
  ``e^{-jwT}`` is exact per delay.
* anything else (diffusion ``exp(-sqrt(s))``, ``1/cosh(sqrt(s))`` ...): a
  numpy function of s made once by lambdify, evaluated at s = jw.

Phase is continuous from w -> 0+.  For one delayed rational piece it is the
sum of the angles of the factors (gain sign, s^k at the origin, each zero and
pole on its own continuous branch) minus w T, so a delay keeps turning and no
sampled phase is unwrapped.  Otherwise the phase is tracked from a small
frequency upwards on a grid refined until every step turns by less than
pi/4.  Group delay is analytic: from the roots (one piece), from the exact
derivative dF/ds (several pieces, non-rational).

Figures come from root finding on the exact |F(jw)|: for a rational F with
one delay |F(jw)|^2 is a ratio of polynomials in x = w^2, so band edges are
the positive roots of N2(x) - level D2(x) and the peaks the positive roots of
N2' D2 - N2 D2' (numpy roots, polished by brentq on |F(jw)| itself); otherwise
a fine logarithmic scan brackets the roots and brentq / bounded minimisation
refine them.  This module uses SymPy only while building the model.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np
import sympy as sp
from scipy.optimize import brentq, minimize_scalar

from .._types import S
from ..errors import ParameterError, SamplingError, UnsupportedExpressionError
from . import cache, limits
from .parse import parse, parse_params
from .split import split_delays

MAX_POINTS = 1_000_000
SQRT_HALF = math.sqrt(0.5)
_TWO_PI = 2.0 * math.pi


# ------------------------------------------------------------------ reading
def to_expr(expr, params: Mapping | None = None) -> sp.Expr:
    """Text or SymPy -> SymPy expression in s with parameter values put in."""
    if isinstance(expr, str):
        return parse(expr, params)
    if isinstance(expr, (int, float)) and not isinstance(expr, bool):
        return parse(repr(expr))
    if isinstance(expr, sp.Basic):
        if params:
            vals = parse_params(params)
            expr = expr.xreplace({x: vals[x.name] for x in expr.free_symbols if x.name in vals})
        return expr
    raise UnsupportedExpressionError(f"cannot read an expression from {type(expr).__name__}")


def require_values(F: sp.Expr, what: str = "a frequency response") -> None:
    free = sorted(str(x) for x in F.free_symbols if x != S)
    if free:
        raise ParameterError(f"{what} needs values for {', '.join(free)}", free[0])


# ------------------------------------------------------------------ polynomials
def _coeffs(p: sp.Poly) -> np.ndarray:
    out = []
    for c in p.all_coeffs():
        v = complex(sp.N(c, 17))
        if abs(v.imag) > 1e-12 * max(1.0, abs(v.real)):
            raise UnsupportedExpressionError("a coefficient of F(s) is not real")
        out.append(v.real)
    return np.array(out, dtype=float)


def _roots(p: sp.Poly) -> np.ndarray:
    """All roots with multiplicity, each distinct root computed from a
    square-free factor (so repeated roots stay accurate)."""
    if p.degree() <= 0:
        return np.zeros(0, dtype=complex)
    try:
        _, factors = p.sqf_list()
    except Exception:  # noqa: BLE001 - odd coefficient domains: plain numeric roots
        factors = [(p, 1)]
    out = []
    for f, m in factors:
        if f.degree() <= 0:
            continue
        r = np.roots(_coeffs(f)) if f.degree() > 0 else []
        for z in np.atleast_1d(r):
            out.extend([complex(z)] * m)
    roots = np.array(out, dtype=complex)
    # a root on the imaginary axis is exact there (real coefficients: check the pair)
    scale = np.maximum(np.abs(roots), 1e-300)
    roots = np.where(np.abs(roots.real) <= 1e-13 * scale, 1j * roots.imag, roots)
    roots = np.where(np.abs(roots.imag) <= 1e-13 * scale, roots.real + 0j, roots)
    return roots


def _scaled(c: np.ndarray, w0: float) -> np.ndarray:
    n = len(c) - 1
    return c * w0 ** np.arange(n, -1, -1, dtype=float)


def _ratio(num: np.ndarray, den: np.ndarray, u: np.ndarray) -> np.ndarray:
    """num(j u)/den(j u) for scaled coefficient arrays, evaluated in powers of
    1/(ju) where |u| > 1 (no overflow for high degrees)."""
    ju = 1j * u
    out = np.empty(u.shape, dtype=complex)
    lo = np.abs(u) <= 1.0
    with np.errstate(all="ignore"):
        if lo.any():
            out[lo] = np.polyval(num, ju[lo]) / np.polyval(den, ju[lo])
        hi = ~lo
        if hi.any():
            r = 1.0 / ju[hi]
            d = (len(num) - 1) - (len(den) - 1)
            out[hi] = (np.polyval(num[::-1], r) / np.polyval(den[::-1], r)) * ju[hi] ** d
    return out


class _Shared:
    """Evaluation of several numerators over one denominator at the same
    frequencies: the split at |u| = 1 and the denominator values made once."""

    def __init__(self, den: np.ndarray, u: np.ndarray):
        self.u = u
        self.lo = np.abs(u) <= 1.0
        self.hi = ~self.lo
        self.ju_lo = 1j * u[self.lo]
        self.r_hi = 1.0 / (1j * u[self.hi])
        self.ju_hi = 1j * u[self.hi]
        self.nd = len(den) - 1
        with np.errstate(all="ignore"):
            self.d_lo = np.polyval(den, self.ju_lo)
            self.d_hi = np.polyval(den[::-1], self.r_hi)

    def ratio(self, num: np.ndarray) -> np.ndarray:
        out = np.empty(self.u.shape, dtype=complex)
        with np.errstate(all="ignore"):
            out[self.lo] = np.polyval(num, self.ju_lo) / self.d_lo
            d = (len(num) - 1) - self.nd
            out[self.hi] = np.polyval(num[::-1], self.r_hi) / self.d_hi * self.ju_hi ** d
        return out


def _branch_angle(w: np.ndarray, roots: np.ndarray) -> np.ndarray:
    """Sum over roots r = a + jb of the continuous angle of (jw - r): for a < 0
    atan((w-b)/(-a)); for a > 0  pi - atan((w-b)/a); on the axis +-pi/2."""
    w = np.asarray(w, dtype=float)
    out = np.zeros(w.shape)
    if roots.size == 0:
        return out
    off = roots[roots.real != 0]
    if off.size:
        c = np.abs(off.real)
        sgn = np.where(off.real < 0, 1.0, -1.0)
        out += sgn @ np.arctan((w[None, :] - off.imag[:, None]) / c[:, None]) + np.pi * np.sum(off.real > 0)
    for r in roots[roots.real == 0]:
        out += 0.5 * np.pi * np.sign(w - r.imag)
    return out


def _branch_rate(w: np.ndarray, roots: np.ndarray) -> np.ndarray:
    """d/dw of ``_branch_angle``: sum of -a/(a^2 + (w-b)^2) (0 on the axis)."""
    w = np.asarray(w, dtype=float)
    off = roots[roots.real != 0] if roots.size else roots
    if off.size == 0:
        return np.zeros(w.shape)
    a = off.real[:, None]
    return np.sum(-a / (a * a + (w[None, :] - off.imag[:, None]) ** 2), axis=0)


# ------------------------------------------------------------------ the model
@dataclass(frozen=True)
class FrequencyModel:
    """F(s) ready for evaluation at s = jw (see the module text)."""
    text: str
    rational: bool
    delays: tuple = ()              # T_k (float)
    nums: tuple = ()                # N_k, scaled coefficient arrays (highest power first)
    den: np.ndarray | None = None   # D, scaled
    w0: float = 1.0                 # frequency scale of the scaled arrays
    zeros: np.ndarray | None = None  # single piece: zeros and poles (unscaled, rad/s)
    poles: np.ndarray | None = None
    gain_angle: float = 0.0         # single piece: arg of the leading-coefficient ratio
    origin_order: int = 0           # net power of s at the origin (zeros - poles)
    dc: float | None = None         # F(0) (None: infinite or not found); 0.0 for a zero at 0
    dc_note: str = ""
    relative_degree: int | None = None
    mag2: tuple | None = None       # single delay: (N2, D2) in x = w^2, unscaled
    func: object = None             # non-rational: numpy function of s
    dfunc: object = None            # non-rational: dF/ds
    den_roots: np.ndarray | None = None   # poles of F (any number of pieces)
    cancelled: np.ndarray | None = None   # roots of the factor common to numerator and denominator

    @property
    def single(self) -> bool:
        return self.rational and len(self.nums) == 1

    # values ----------------------------------------------------------
    def values(self, w) -> np.ndarray:
        """F(jw) (complex)."""
        w = np.asarray(w, dtype=float)
        if not self.rational:
            with np.errstate(all="ignore"):
                return np.asarray(self.func(1j * w), dtype=complex) * np.ones_like(w)
        sh = _Shared(self.den, w / self.w0)
        out = np.zeros(w.shape, dtype=complex)
        for T, num in zip(self.delays, self.nums):
            part = sh.ratio(num)
            out += part * np.exp(-1j * w * T) if T else part
        return out

    def magnitude_db(self, w) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(np.abs(self.values(w)))

    def phase(self, w) -> np.ndarray:
        """Continuous phase (rad) from w -> 0+ at frequencies w >= 0."""
        w = np.asarray(w, dtype=float)
        if self.single:
            base = self.gain_angle + self.origin_order * 0.5 * np.pi
            zeros, poles = self.zeros, self.poles
            raw = base + _branch_angle(w, zeros) - _branch_angle(w, poles)
            raw0 = base + _branch_angle(np.zeros(1), zeros)[0] - _branch_angle(np.zeros(1), poles)[0]
            k = self.origin_order * 0.5 * np.pi
            target = _principal(raw0 - k) + k          # arg(c) + k 90 deg for F ~ c s^k at w -> 0+
            shift = _TWO_PI * round((target - raw0) / _TWO_PI)
            return raw + shift - w * self.delays[0]
        return track_phase(self.values, w, self._start_phase)

    def _start_phase(self, w_small: float) -> float:
        v = complex(self.values(np.array([w_small]))[0])
        return math.atan2(v.imag, v.real)

    def group_delay(self, w) -> np.ndarray:
        """-d(phase)/dw (s)."""
        w = np.asarray(w, dtype=float)
        if self.single:
            return -(_branch_rate(w, self.zeros) - _branch_rate(w, self.poles)) + self.delays[0]
        F = self.values(w)
        Fs = self.derivative(w)
        with np.errstate(all="ignore"):
            return -np.real(Fs / F)

    def derivative(self, w) -> np.ndarray:
        """dF/ds at s = jw."""
        w = np.asarray(w, dtype=float)
        if not self.rational:
            with np.errstate(all="ignore"):
                return np.asarray(self.dfunc(1j * w), dtype=complex) * np.ones_like(w)
        sh = _Shared(self.den, w / self.w0)
        dden = np.polyder(self.den) / self.w0 if len(self.den) > 1 else np.zeros(1)
        rd = sh.ratio(dden) if len(self.den) > 1 else np.zeros(w.shape, complex)
        out = np.zeros(w.shape, dtype=complex)
        for T, num in zip(self.delays, self.nums):
            f = sh.ratio(num)
            dn = sh.ratio(np.polyder(num) / self.w0) if len(num) > 1 else 0.0
            part = dn - f * rd - T * f
            out += part * np.exp(-1j * w * T) if T else part
        return out


def _principal(x: float) -> float:
    """x wrapped into (-pi, pi]."""
    y = math.remainder(x, _TWO_PI)
    return math.pi if abs(y + math.pi) < 1e-12 else y


def track_phase(values, w: np.ndarray, start_phase) -> np.ndarray:
    """Continuous phase of ``values`` (a function of w) at ``w`` (>= 0), tracked
    from a small frequency below the smallest positive w (where
    ``start_phase(w_start)`` gives the phase) on a grid refined until every
    step turns by less than pi/4."""
    w = np.asarray(w, dtype=float)
    if w.size == 0:
        return np.zeros(0)
    pos = w[w > 0]
    top = float(pos.max()) if pos.size else 1.0
    low = float(pos.min()) if pos.size else 1.0
    w_start = low * 1e-4
    base = np.unique(np.concatenate([[w_start], np.geomspace(w_start, top, 400), pos]))
    grid, cont, _ = tracked(values, base)
    cont = cont + (start_phase(w_start) - cont[0])
    out = np.interp(w, grid, cont)
    idx = np.minimum(np.searchsorted(grid, w), grid.size - 1)
    ok = grid[idx] == w
    out[ok] = cont[idx[ok]]
    out[w <= 0] = cont[0]
    return out


def tracked(values, grid: np.ndarray, max_step: float = np.pi / 4) -> tuple[np.ndarray, np.ndarray, int]:
    """(grid, continuous angle of values on it starting at the principal angle at
    grid[0], number of jumps): every step of the grid that turns by more than
    max_step is subdivided (8 parts a level, all such steps at once) until each
    part turns by less; a part narrower than 1e-12 of its frequency that still
    jumps is a zero on the path (a jump of the phase) and is counted."""
    grid = np.asarray(grid, dtype=float)
    vals = values(grid)
    d = np.angle(vals[1:] * np.conj(vals[:-1]))
    owner = np.nonzero(~(np.abs(d) <= max_step))[0]
    lo, hi, vlo, vhi = grid[owner], grid[owner + 1], vals[owner], vals[owner + 1]
    d[owner] = 0.0
    frac = np.linspace(0.0, 1.0, 9)
    jumps = 0
    for _ in range(60):
        if owner.size == 0:
            break
        t = lo[:, None] + (hi - lo)[:, None] * frac[None, :]
        inner = values(t[:, 1:-1].ravel()).reshape(owner.size, 7)
        vv = np.concatenate([vlo[:, None], inner, vhi[:, None]], axis=1)
        dd = np.angle(vv[:, 1:] * np.conj(vv[:, :-1]))
        tiny = (hi - lo) <= 1e-12 * np.maximum(np.abs(hi), 1e-300)
        good = (np.abs(dd) <= max_step) | tiny[:, None]
        jumps += int(np.sum(~(np.abs(dd) <= max_step) & tiny[:, None]))
        np.add.at(d, owner, np.where(good, dd, 0.0).sum(axis=1))
        bi, bj = np.nonzero(~good)
        owner, lo, hi, vlo, vhi = owner[bi], t[bi, bj], t[bi, bj + 1], vv[bi, bj], vv[bi, bj + 1]
    cont = np.angle(vals[0]) + np.concatenate([[0.0], np.cumsum(d)])
    return grid, cont, jumps


def _lambdified(F):
    from .sample import floats
    fn = sp.lambdify(S, floats(F), modules=["scipy", "numpy"])
    return fn


def _exact_value_at_zero(num_exprs, den_poly):
    """(order of the zero (+) or pole (-) at s = 0, limit of F/s^k at 0) exactly."""
    n_total = sp.Add(*num_exprs)
    k_den = 0
    coeffs = den_poly.all_coeffs()[::-1]
    while k_den < len(coeffs) and coeffs[k_den] == 0:
        k_den += 1
    k_num = 0
    d0 = None
    for k in range(0, 64):
        val = sp.simplify(sp.diff(n_total, S, k).subs(S, 0)) if k else sp.simplify(n_total.subs(S, 0))
        if val != 0:
            d0 = val / sp.factorial(k)
            k_num = k
            break
    if d0 is None:
        return None, None
    c = d0 / coeffs[k_den]
    return k_num - k_den, c


@cache.memo
def _model_cached(text: str, params):
    return build_model(text, params)


def model(expr, params: Mapping | None = None) -> FrequencyModel:
    """The frequency model of ``expr`` (text is cached)."""
    if isinstance(expr, str):
        return _model_cached(expr, None if params is None else dict(params))
    return build_model(expr, params)


def build_model(expr, params: Mapping | None = None) -> FrequencyModel:
    F = to_expr(expr, params)
    require_values(F)
    text = sp.sstr(F)
    with limits.deadline(None):
        try:
            pieces = split_delays(F)
        except UnsupportedExpressionError:
            raise
        except Exception:  # noqa: BLE001 - not of the delayed-rational form
            pieces = None
        if pieces:
            return _rational_model(text, pieces)
        return _nonrational_model(text, F)


def _rational_model(text, pieces) -> FrequencyModel:
    den = sp.Poly(pieces[0].den, S)
    nums = [sp.Poly(sp.expand(p.gain * p.num), S) for p in pieces]
    delays = [float(p.delay) for p in pieces]
    if any(math.isnan(T) for T in delays):
        raise UnsupportedExpressionError("a delay is not a number")
    g = den
    for n in nums:
        g = g.gcd(n)
    cancelled = _roots(g) if g.degree() > 0 else np.zeros(0, dtype=complex)
    if g.degree() > 0:
        den = den.quo(g)
        nums = [n.quo(g) for n in nums]
    keep = [(T, n) for T, n in zip(delays, nums) if not n.is_zero]
    if not keep:
        raise UnsupportedExpressionError("F(s) is zero: there is no frequency response")
    delays, nums = [k[0] for k in keep], [k[1] for k in keep]
    den_roots = _roots(den)
    nz = np.abs(den_roots[den_roots != 0]) if den_roots.size else np.zeros(0)
    num_roots = [_roots(n) for n in nums]
    allr = np.concatenate([nz] + [np.abs(r[r != 0]) for r in num_roots])
    w0 = float(np.exp(np.mean(np.log(allr)))) if allr.size else 1.0
    if not (1e-300 < w0 < 1e300):
        w0 = 1.0
    den_c = _scaled(_coeffs(den), w0)
    num_c = [_scaled(_coeffs(n), w0) for n in nums]
    # common normalisation (avoid tiny/huge leading coefficients)
    norm = float(np.max(np.abs(den_c)))
    den_c = den_c / norm
    num_c = [c / norm for c in num_c]
    order, c0 = _exact_value_at_zero([n.as_expr() * sp.exp(-sp.nsimplify(T) * S) if T else n.as_expr()
                                      for T, n in zip(delays, nums)], den)
    if order is None:
        dc, note = 0.0, "F(s) has a zero of unlimited order at s = 0"
    elif order < 0:
        dc, note = None, f"infinite: F(s) has {-order} pole(s) at s = 0"
    elif order > 0:
        dc, note = 0.0, f"zero: F(s) has {order} zero(s) at s = 0"
    else:
        dc, note = abs(float(sp.N(c0, 17))), ""
    rel = den.degree() - max(n.degree() for n in nums)
    kw = {}
    if len(nums) == 1:
        zr, pr = num_roots[0], den_roots
        k0 = int(np.sum(zr == 0)) - int(np.sum(pr == 0))
        lead = float(sp.N(nums[0].LC() / den.LC(), 17))
        kw = dict(zeros=zr[zr != 0], poles=pr[pr != 0], gain_angle=0.0 if lead > 0 else math.pi,
                  origin_order=k0)
    if len(set(delays)) == 1:
        N = sp.Add(*[n.as_expr() for n in nums])
        kw["mag2"] = (_even_square(N), _even_square(den.as_expr()))
    return FrequencyModel(text, True, tuple(delays), tuple(num_c), den_c, w0, dc=dc, dc_note=note,
                          relative_degree=rel, den_roots=den_roots, cancelled=cancelled, **kw)


def _even_square(P: sp.Expr) -> np.ndarray:
    """|P(jw)|^2 as a polynomial in x = w^2 (float coefficients, highest first)."""
    x = sp.Symbol("x")
    w = sp.Symbol("w", real=True)
    Pj = sp.expand(P.subs(S, sp.I * w))
    re, im = Pj.as_real_imag()
    sq = sp.expand(re ** 2 + im ** 2)
    poly = sp.Poly(sq, w)
    coeffs = poly.all_coeffs()[::-1]        # ascending in w
    asc = [coeffs[k] for k in range(0, len(coeffs), 2)]
    return np.array([float(sp.N(c, 17)) for c in asc[::-1]], dtype=float)


def _nonrational_model(text, F) -> FrequencyModel:
    try:
        fn = _lambdified(F)
        dfn = _lambdified(sp.diff(F, S))
    except Exception as exc:  # noqa: BLE001
        raise UnsupportedExpressionError(f"cannot evaluate F(jw) for this expression ({exc})") from exc
    probe = np.asarray(fn(1j * np.array([0.5, 1.0, 2.0])), dtype=complex)
    if not np.all(np.isfinite(probe)):
        raise UnsupportedExpressionError("F(jw) is not finite at w = 0.5, 1, 2 rad/s")
    from .figures_numeric import _limit
    try:
        with limits.deadline(5.0):
            dc = _limit(F, 0)
    except Exception:  # noqa: BLE001 - no limit within the time: numeric below
        dc = None
    note = ""
    if dc is None:
        v = np.abs(np.asarray(fn(1j * np.array([1e-9, 1e-10])), dtype=complex))
        if np.all(np.isfinite(v)) and abs(v[0] - v[1]) <= 1e-6 * max(v[1], 1e-300):
            dc, note = float(v[1]), "DC gain from |F(jw)| at w = 1e-10 rad/s"
        else:
            note = "no finite DC gain found (lim F(s) as s -> 0)"
    else:
        dc = abs(dc)
    return FrequencyModel(text, False, func=fn, dfunc=dfn, dc=dc, dc_note=note)


# ------------------------------------------------------------------ grids
def grid(omega: Sequence[float] | None = None, start=None, stop=None, n=None, *, hz: bool = False) -> np.ndarray:
    """Frequencies in rad/s: the given ones, or n log-spaced from start to stop
    (both in Hz when ``hz``)."""
    k = _TWO_PI if hz else 1.0
    if omega is not None:
        try:
            arr = np.asarray([float(x) for x in omega], dtype=float)
        except (TypeError, ValueError) as exc:
            raise SamplingError(f"frequencies must be numbers: {exc}") from exc
        if arr.size == 0:
            raise SamplingError("no frequencies given")
        if arr.size > MAX_POINTS:
            raise SamplingError(f"{arr.size} frequencies is above the limit of {MAX_POINTS}")
        if not np.all(np.isfinite(arr)) or np.any(arr < 0):
            raise SamplingError("frequencies must be finite and not negative")
        return arr * k
    if start is None or stop is None or n is None:
        raise SamplingError("give a list of frequencies or a start, a stop and a number of points")
    try:
        a, b, m = float(start), float(stop), int(n)
    except (TypeError, ValueError) as exc:
        raise SamplingError(f"start, stop and n must be numbers: {exc}") from exc
    if not (math.isfinite(a) and math.isfinite(b)) or a <= 0 or b <= 0:
        raise SamplingError("a logarithmic grid needs start and stop above zero")
    if b < a:
        raise SamplingError(f"stop ({b:g}) is below start ({a:g})")
    if not 1 <= m <= MAX_POINTS:
        raise SamplingError(f"the number of points must be between 1 and {MAX_POINTS}, got {m}")
    return np.geomspace(a, b, m) * k if m > 1 else np.array([a * k])


# ------------------------------------------------------------------ figures
@dataclass(frozen=True)
class Section:
    """A pole (or zero) pair: natural frequency, damping ratio, Q; or one real root."""
    kind: str                      # "poles" or "zeros"
    order: int                     # 2 for a complex pair, 1 for a real root
    natural_frequency: float       # |root| (rad/s); the corner frequency of a real root
    damping_ratio: float | None
    q: float | None

    def to_dict(self):
        return {"kind": self.kind, "order": self.order, "natural_frequency": self.natural_frequency,
                "damping_ratio": self.damping_ratio, "q": self.q}


@dataclass(frozen=True)
class FrequencyFigures:
    dc_gain: float | None
    dc_gain_db: float | None
    bandwidth: float | None
    peak: float | None
    peak_db: float | None
    peak_frequency: float | None
    band_edges: tuple | None
    hf_rolloff_db_per_decade: float | None
    sections: tuple
    notes: tuple = field(default=())

    def to_dict(self):
        return {"dc_gain": self.dc_gain, "dc_gain_db": self.dc_gain_db, "bandwidth": self.bandwidth,
                "peak": self.peak, "peak_db": self.peak_db, "peak_frequency": self.peak_frequency,
                "band_edges": list(self.band_edges) if self.band_edges else None,
                "hf_rolloff_db_per_decade": self.hf_rolloff_db_per_decade,
                "sections": [s.to_dict() for s in self.sections], "notes": list(self.notes)}


def _db(x):
    return None if x is None or x <= 0 or not math.isfinite(x) else 20.0 * math.log10(x)


def _pos_roots(c: np.ndarray) -> list[float]:
    """Positive real roots of a polynomial (highest first)."""
    c = np.trim_zeros(np.asarray(c, dtype=float), "f")
    if c.size <= 1:
        return []
    scale = np.max(np.abs(c))
    c = c / scale
    r = np.roots(c)
    out = []
    for z in r:
        if z.real > 0 and abs(z.imag) <= 1e-7 * max(abs(z), 1e-300):
            out.append(float(z.real))
    return sorted(out)


def _scale_of(m: FrequencyModel) -> tuple[float, float]:
    """A frequency range holding the interesting part of F."""
    mags = []
    if m.rational:
        mags.append(m.w0)
        if m.den_roots is not None:
            mags += [abs(r) for r in m.den_roots if r != 0]
        if m.zeros is not None:
            mags += [abs(r) for r in m.zeros]
        mags += [1.0 / T for T in m.delays if T > 0]
    else:
        mags = [1e-4, 1e4]
    lo, hi = min(mags), max(mags)
    return lo * 1e-4, hi * 1e4


def _polish(f, x: float, lo: float, hi: float) -> float:
    """brentq on a bracket around x if f changes sign there, else x."""
    a, b = max(lo, x * (1 - 1e-6)), min(hi, x * (1 + 1e-6))
    try:
        fa, fb = f(a), f(b)
        if fa == 0:
            return a
        if fb == 0:
            return b
        if fa * fb < 0:
            return brentq(f, a, b, xtol=1e-15 * x, rtol=1e-15, maxiter=200)
    except (ValueError, RuntimeError):
        pass
    return x


def level_crossings(m: FrequencyModel, level: float) -> list[float]:
    """All w > 0 where |F(jw)| = level, ascending."""
    def gv(w):
        with np.errstate(all="ignore"):
            return np.log(np.abs(m.values(np.atleast_1d(np.asarray(w, dtype=float))))) - math.log(level)

    def g(w):
        return float(gv(w)[0])
    if m.mag2 is not None:
        N2, D2 = m.mag2
        n = max(len(N2), len(D2))
        P = np.pad(N2, (n - len(N2), 0)) - level ** 2 * np.pad(D2, (n - len(D2), 0))
        return [_polish(g, math.sqrt(x), 0.0, math.inf) for x in _pos_roots(P)]
    lo, hi = _scale_of(m)
    w = np.geomspace(lo, hi, int(SCAN_PER_DECADE * max(1.0, math.log10(hi / lo))) + 1)
    return bracket_roots(g, w, gv(w))


SCAN_PER_DECADE = 200


def bracket_roots(g, w: np.ndarray, vals: np.ndarray) -> list[float]:
    """Roots of the scalar function g bracketed by sign changes of vals = g(w)."""
    out = []
    ok = np.isfinite(vals[:-1]) & np.isfinite(vals[1:])
    for i in np.nonzero(ok & (np.sign(vals[:-1]) != np.sign(vals[1:])))[0]:
        if vals[i] == 0:
            out.append(float(w[i]))
            continue
        try:
            out.append(float(brentq(g, w[i], w[i + 1], xtol=1e-15 * w[i], rtol=1e-15, maxiter=200)))
        except ValueError:
            pass
    return out


def stationary_points(m: FrequencyModel) -> list[float]:
    """w > 0 where d|F(jw)|/dw = 0 (rational with one delay: exact polynomial)."""
    if m.mag2 is not None:
        N2, D2 = m.mag2
        P = np.polysub(np.polymul(np.polyder(N2), D2), np.polymul(N2, np.polyder(D2)))
        xs = _pos_roots(P)

        def dg(w):
            wa = np.array([w])
            F = m.values(wa)
            return float(np.real(1j * m.derivative(wa) / F)[0])     # d ln|F| / dw
        return [_polish(dg, math.sqrt(x), 0.0, math.inf) for x in xs]
    lo, hi = _scale_of(m)
    w = np.geomspace(lo, hi, int(200 * math.log10(hi / lo)) + 1)
    mag = np.abs(m.values(w))
    out = []
    for i in range(1, w.size - 1):
        if mag[i] >= mag[i - 1] and mag[i] >= mag[i + 1] and mag[i] > 0:
            r = minimize_scalar(lambda x: -abs(complex(m.values(np.array([x]))[0])),
                                bounds=(w[i - 1], w[i + 1]), method="bounded",
                                options={"xatol": 1e-13 * w[i]})
            out.append(float(r.x))
    return out


def sections(m: FrequencyModel) -> tuple:
    out = []
    for kind, roots in (("poles", m.den_roots if m.single or m.rational else None),
                        ("zeros", m.zeros if m.single else None)):
        if roots is None:
            continue
        for r in sorted(roots, key=lambda z: (abs(z), z.imag)):
            if r.imag < 0 or r == 0:
                continue
            wn = abs(r)
            if r.imag > 0:
                zeta = -r.real / wn + 0.0
                out.append(Section(kind, 2, float(wn), float(zeta), float(1.0 / (2 * zeta)) if zeta != 0 else None))
            else:
                out.append(Section(kind, 1, float(wn), None, None))
    return tuple(out)


def frequency_figures(m: FrequencyModel) -> FrequencyFigures:
    notes = [m.dc_note] if m.dc_note else []
    dc = m.dc
    # high-frequency limit
    if m.rational:
        rel = m.relative_degree
        hf_slope = -20.0 * rel + 0.0
        if rel > 0:
            hf = 0.0
        elif rel < 0:
            hf = math.inf
        else:
            hf = abs(complex(m.values(np.array([1e6 * max(_scale_of(m)[1], 1.0)]))[0]))
    else:
        hf_slope, hf = None, None
        notes.append("no high-frequency roll-off figure: F(s) is not rational")
    axis_poles = [] if m.den_roots is None else [r for r in m.den_roots if r.real == 0 and r.imag > 0]
    bandwidth = None
    if dc and dc > 0:
        xs = level_crossings(m, dc * SQRT_HALF)
        bandwidth = xs[0] if xs else None
        if bandwidth is None:
            notes.append("no -3 dB frequency: |F| stays above 1/sqrt(2) of the DC gain")
    # resonant peak
    peak = peak_w = None
    if axis_poles:
        notes.append(f"no finite peak: a pole on the imaginary axis at w = {axis_poles[0].imag:.6g} rad/s")
    elif dc is not None:
        cands = [(abs(complex(m.values(np.array([w]))[0])), w) for w in stationary_points(m)]
        if cands:
            v, w = max(cands)
            ref = max(dc, hf if hf is not None and math.isfinite(hf) else 0.0)
            inside = m.rational or w < _scale_of(m)[1] / 100      # not the end of a scan
            if math.isfinite(v) and inside and v > ref * (1 + 1e-9) and (hf is None or math.isfinite(hf)):
                peak, peak_w = v, w
    edges = None
    if dc == 0.0 and peak is not None and hf == 0.0:
        xs = level_crossings(m, peak * SQRT_HALF)
        lo_e = [x for x in xs if x < peak_w]
        hi_e = [x for x in xs if x > peak_w]
        edges = (lo_e[-1] if lo_e else None, hi_e[0] if hi_e else None)
    elif dc == 0.0 and hf is not None and 0 < hf < math.inf:
        xs = level_crossings(m, hf * SQRT_HALF)
        edges = (xs[-1] if xs else None, None)
    return FrequencyFigures(dc, _db(dc), bandwidth, peak, _db(peak), peak_w, edges, hf_slope,
                            sections(m) if m.rational else (), tuple(notes))


# ------------------------------------------------------------------ response
@dataclass(frozen=True)
class FrequencyResponse:
    omega: np.ndarray              # rad/s
    value: np.ndarray              # complex F(jw)
    magnitude: np.ndarray
    magnitude_db: np.ndarray
    phase_deg: np.ndarray
    group_delay: np.ndarray
    figures: FrequencyFigures

    def to_dict(self) -> dict:
        def fl(a):
            return [float(x) if math.isfinite(x) else None for x in a]
        f = self.figures
        return {"omega": fl(self.omega), "magnitude_db": fl(self.magnitude_db), "phase_deg": fl(self.phase_deg),
                "magnitude": fl(self.magnitude), "group_delay": fl(self.group_delay),
                "dc_gain_db": f.dc_gain_db, "bandwidth": f.bandwidth, "peak_db": f.peak_db,
                "peak_frequency": f.peak_frequency, "figures": f.to_dict()}


def evaluate(m: FrequencyModel, w: np.ndarray) -> tuple:
    """(F(jw), |F|, dB, phase deg, group delay) at rad/s frequencies w."""
    F = m.values(w)
    mag = np.abs(F)
    with np.errstate(divide="ignore"):
        db = 20.0 * np.log10(mag)
    ph = np.degrees(m.phase(w))
    return F, mag, db, ph, m.group_delay(w)


def frequency_response(expr, omega=None, *, start=None, stop=None, n=None, hz=False,
                       params: Mapping | None = None) -> FrequencyResponse:
    """F(jw) on ``omega`` (or a log grid from start to stop), with the figures."""
    w = grid(omega, start, stop, n, hz=hz)
    m = model(expr, params)
    F, mag, db, ph, gd = evaluate(m, w)
    with limits.deadline(None):
        figs = frequency_figures(m)
    return FrequencyResponse(w, F, mag, db, ph, gd, figs)


__all__ = ["FrequencyModel", "FrequencyFigures", "FrequencyResponse", "Section", "model", "build_model",
           "frequency_response", "frequency_figures", "evaluate", "grid", "level_crossings",
           "stationary_points", "track_phase", "to_expr", "require_values"]
