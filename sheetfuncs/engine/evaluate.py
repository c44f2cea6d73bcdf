"""Evaluators of modal sums with error control.

``f(t) = sum over pieces [t >= T] sum over modes (terms of the mode at t - T)``.

The fast pass evaluates every term in double precision (vectorised, in log
scale so that ``t^k/k! e^{pt}`` neither overflows nor makes ``inf * 0``) and
also the sum of the terms' magnitudes.  Where that sum exceeds ``|f|`` by more
than ``COND_LIMIT`` -- large partial-fraction terms cancelling, as with
near-repeated poles, poles near zero or high multiplicity at small t -- the
point is evaluated again with mpmath at ``20 + log10(condition)`` digits from
the exact (or 60-digit) coefficients.  So every value carries about 1e-12
relative error or better; at an exact zero of f the error is below 1e-(digits)
times the largest term.

Near t = 0 (within ``TAYLOR_REACH / max|pole|`` of a piece's start) such points
are first tried with the Taylor series of the piece, whose coefficients are the
exact Markov parameters of the rational function (``Modal.markov``): there the
series has no cancellation, and it is vectorised.
"""
from __future__ import annotations

import math
import numpy as np

from . import limits
from .modal import Modal, PairMode, Piece, RealMode  # noqa: F401 - Piece re-exported
from .numbers import to_float, to_mp

#: above this ratio of sum-of-magnitudes to |value|, a point is redone in extended precision
COND_LIMIT = 1e4
MAX_DPS = 90
#: the Taylor series at a piece's start is used for rho * (t - start) <= TAYLOR_REACH
TAYLOR_REACH = 3.0
TAYLOR_TERMS = 60


def _lgamma_table(n):
    return np.array([math.lgamma(k + 1) for k in range(n)])


class Evaluator:
    """Vectorised f(t) of a list of pieces (impulses excluded)."""

    def __init__(self, pieces):
        self.pieces = tuple(pieces)
        self._compiled = [self._compile(p) for p in self.pieces]
        self._taylor: dict = {}

    def _taylor_of(self, i):
        """(rho, b_k) with f(t0 + tau) = sum b_k (rho tau)^k near the start of piece i."""
        if i not in self._taylor:
            piece = self.pieces[i]
            out = None
            mags = [abs(complex(to_float(m.pole))) for m in piece.modal.real] + \
                [abs(complex(to_float(m.alpha), to_float(m.omega))) for m in piece.modal.pairs]
            ms = piece.modal.markov(TAYLOR_TERMS) if mags else []
            if ms:
                from .qpoly import Q
                rho = max(max(mags), 1e-300)
                # b_k = m_k / (k! rho^k) in exact arithmetic of a rational rho, then to floats
                rq = Q(*float(rho).as_integer_ratio())
                b, scale = [], Q(1)
                for k, m in enumerate(ms):
                    if k:
                        scale = scale * rq * k
                    b.append(piece.sign * float(m / scale))
                out = (float(rho), np.array(b[::-1]), np.abs(np.array(b[::-1])))
            self._taylor[i] = out
        return self._taylor[i]

    @staticmethod
    def _compile(piece):
        reals = [(to_float(m.pole), [to_float(c) for c in m.coeffs]) for m in piece.modal.real]
        pairs = [(to_float(m.alpha), to_float(m.omega), [to_float(x) for x in m.xs],
                  [to_float(y) for y in m.ys]) for m in piece.modal.pairs]
        until = math.inf if piece.until is None else float(piece.until)
        if piece.taylor is not None:
            return float(piece.delay), until, piece.sign, reals, pairs, piece.taylor
        return float(piece.delay), until, piece.sign, reals, pairs, None

    # fast pass -------------------------------------------------------------
    def _float(self, t: np.ndarray):
        y = np.zeros_like(t)
        mag = np.zeros_like(t)
        with np.errstate(all="ignore"):
            for index, (delay, until, sign, reals, pairs, series) in enumerate(self._compiled):
                m = (t >= delay) & (t < until)
                if not m.any():
                    continue
                if series is not None:
                    c, h, b, babs = series
                    u = (t[m] - c) / h
                    ok = np.abs(u) <= 1.0 + 1e-12
                    if ok.all():
                        y[m] += sign * np.polyval(b, u)
                        mag[m] += np.polyval(babs, np.abs(u))
                        continue
                tt = t[m] - delay
                logt = np.log(tt) if any(len(c) > 1 for _, c in reals) or \
                    any(len(x) > 1 for _, _, x, _ in pairs) else None
                acc = np.zeros_like(tt)
                amag = np.zeros_like(tt)
                for pole, coeffs in reals:
                    for k, c in enumerate(coeffs):
                        if c == 0:
                            continue
                        if k == 0:
                            e = np.exp(pole * tt) if pole != 0 else 1.0
                        else:
                            e = np.exp(pole * tt + k * logt - math.lgamma(k + 1))
                            e = np.where(tt == 0, 0.0, e)
                        acc += c * e
                        amag += abs(c) * e
                for alpha, omega, xs, ys in pairs:
                    cw, sw = np.cos(omega * tt), np.sin(omega * tt)
                    for k, (x, yy) in enumerate(zip(xs, ys)):
                        if x == 0 and yy == 0:
                            continue
                        if k == 0:
                            e = 2.0 * np.exp(alpha * tt)
                        else:
                            e = 2.0 * np.exp(alpha * tt + k * logt - math.lgamma(k + 1))
                            e = np.where(tt == 0, 0.0, e)
                        acc += e * (x * cw - yy * sw)
                        amag += e * math.hypot(x, yy)
                acc = sign * acc
                near = amag > COND_LIMIT * np.abs(acc)
                if near.any():
                    ts = self._taylor_of(index)
                    if ts is not None:
                        rho, b, babs = ts
                        u = rho * tt
                        use = near & (u <= TAYLOR_REACH)
                        if use.any():
                            uu = u[use]
                            acc[use] = np.polyval(b, uu)
                            amag[use] = np.polyval(babs, uu)
                y[m] += acc
                mag[m] += amag
        return y, mag

    def values(self, t) -> np.ndarray:
        t = np.atleast_1d(np.asarray(t, dtype=float))
        shape = t.shape
        t = t.ravel()
        y, mag = self._float(t)
        with np.errstate(all="ignore"):
            bad = ~np.isfinite(y) | ~np.isfinite(mag) | (mag > COND_LIMIT * np.abs(y))
        bad &= mag > 0
        if bad.any():
            idx = np.nonzero(bad)[0]
            for n, i in enumerate(idx):
                if n % 32 == 0:
                    limits.check()
                y[i] = self.value_mp(float(t[i]), mag[i], y[i])
        return y.reshape(shape)

    # extended precision ------------------------------------------------------
    def value_mp(self, t: float, mag=None, approx=None) -> float:
        """f(t) in extended precision, digits chosen from the float pass's condition."""
        import mpmath
        if mag is not None and approx is not None and np.isfinite(mag) and np.isfinite(approx) \
                and approx != 0:
            cond = max(mag / abs(approx), 1.0)
            dps = int(min(MAX_DPS, 22 + math.log10(cond)))
        else:
            dps = 50
        for _ in range(3):
            val, total = self._mp_sum(t, dps)
            if val == 0 or total == 0:
                return float(val)
            if abs(val) <= total * mpmath.mpf(10) ** (-(dps - 4)):
                return 0.0                       # zero to the working precision
            cond = float(total / abs(val))
            need = 22 + math.log10(max(cond, 1.0))
            if need <= dps or dps >= MAX_DPS:
                break
            dps = int(min(MAX_DPS, need + 5))
        with mpmath.workdps(dps):
            v = val
            if abs(v) > mpmath.mpf("1.7e308"):
                return math.copysign(math.inf, float(mpmath.sign(v)))
            return float(v)

    def _mp_sum(self, t: float, dps: int):
        import mpmath
        with mpmath.workdps(dps):
            tm = mpmath.mpf(t)
            total = mpmath.mpf(0)
            mag = mpmath.mpf(0)
            for piece in self.pieces:
                tt = tm - to_mp(piece.delay)
                if tt < 0 or (piece.until is not None and t >= float(piece.until)):
                    continue
                acc = mpmath.mpf(0)
                for m in piece.modal.real:
                    e = mpmath.exp(to_mp(m.pole) * tt)
                    powk = mpmath.mpf(1)
                    for k, c in enumerate(m.coeffs):
                        if k:
                            powk = powk * tt / k
                        if c:
                            term = to_mp(c) * powk * e
                            acc += term
                            mag += abs(term)
                for m in piece.modal.pairs:
                    a, w = to_mp(m.alpha), to_mp(m.omega)
                    e = 2 * mpmath.exp(a * tt)
                    cw, sw = mpmath.cos(w * tt), mpmath.sin(w * tt)
                    powk = mpmath.mpf(1)
                    for k, (x, yy) in enumerate(zip(m.xs, m.ys)):
                        if k:
                            powk = powk * tt / k
                        if x or yy:
                            xm, ym = to_mp(x), to_mp(yy)
                            term = e * powk * (xm * cw - ym * sw)
                            acc += term
                            mag += abs(e * powk) * mpmath.sqrt(xm * xm + ym * ym)
                total += piece.sign * acc
            return +total, +mag

    # derived evaluators ----------------------------------------------------------
    def derivative(self) -> "Evaluator":
        """Evaluator of f'(t) for t > 0 away from the delays (modal rule c'_k = p c_k + c_(k+1))."""
        out = []
        for piece in self.pieces:
            reals = []
            for m in piece.modal.real:
                c = list(m.coeffs) + [0]
                reals.append(RealMode(m.pole, tuple(m.pole * c[k] + c[k + 1]
                                                    for k in range(len(m.coeffs)))))
            pairs = []
            for m in piece.modal.pairs:
                xs, ys = list(m.xs) + [0], list(m.ys) + [0]
                nx = tuple(m.alpha * xs[k] - m.omega * ys[k] + xs[k + 1] for k in range(len(m.xs)))
                ny = tuple(m.alpha * ys[k] + m.omega * xs[k] + ys[k + 1] for k in range(len(m.xs)))
                pairs.append(PairMode(m.alpha, m.omega, nx, ny))
            modal = Modal((), tuple(reals), tuple(pairs), (), piece.modal.exact)
            out.append(Piece(piece.delay, modal, piece.sign, piece.until))
        return Evaluator(out)
