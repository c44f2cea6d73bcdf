"""Exact inversion of loops closed around a dead time (delays in the denominator).

With ``F = sum_i N_i(s) e^{-a_i s} / (D_0(s) + sum_j D_j(s) e^{-b_j s})`` and
``b_j > 0``, ``deg D_j <= deg D_0``, expand ``1/(1 + sum_j R_j e^{-b_j s})``
(``R_j = D_j/D_0``) as a geometric series in the delays:

    F = sum_n sum_i N_i (-sum_j D_j e^{-b_j s})^n / D_0^{n+1} e^{-a_i s}

For any finite t only the terms whose total delay is at most t contribute
(the method of steps), so y(t) is a finite sum of delayed closed forms, each
inverted exactly by partial fractions.  The terms alternate and grow, so the
evaluator's error control re-evaluates cancelling points in extended
precision.  Stability of the loop is decided by the argument principle on
the characteristic quasi-polynomial ``D(jω)`` (retarded type).
"""
from __future__ import annotations

import math

from . import limits
from . import qpoly as qp
from .modal import Piece
from .numbers import text
from ..errors import LimitError, UnsupportedExpressionError

#: most delayed terms generated for one evaluation window
MAX_TERMS = 100


class Series:
    method = "dead-time series (method of steps)"

    def __init__(self, q, num, D0, others):
        self.quasi = q
        self.num = num                  # {a_i: N_i}
        self.D0 = D0
        self.others = others            # [(b_j, D_j)]
        self.factors = qp.factor(D0) if qp.degree(D0) > 0 else []
        self._levels = [{qp.Q(0): qp.ONE}]      # level n: {delay: numerator over D0^(n+1)}
        self._pieces: list = []
        self._horizon = -1.0
        self._cache: dict = {}

    @classmethod
    def build(cls, q) -> "Series":
        den = dict(q.den)
        if 0 not in den:
            raise UnsupportedExpressionError("the denominator has no delay-free part")
        D0 = den.pop(next(d for d in den if d == 0))
        others = sorted(den.items())
        for b, Dj in others:
            if qp.degree(Dj) > qp.degree(D0):
                raise UnsupportedExpressionError(
                    f"the delayed part of the denominator (delay {text(b)}) has a higher degree "
                    "than its delay-free part: an advanced-type system with no causal inverse")
        if any(a < 0 for a in q.num):
            raise UnsupportedExpressionError(
                f"exp({text(-min(q.num))}*s) is a time advance (output before input), not a causal system",
                "delays are written exp(-T*s) with T >= 0")
        return cls(q, dict(q.num), D0, others)

    @property
    def neutral(self) -> bool:
        return any(qp.degree(Dj) == qp.degree(self.D0) for _, Dj in self.others)

    def delays(self) -> list:
        return sorted({float(b) for b, _ in self.others} | {float(a) for a in self.num if a})

    # series terms ------------------------------------------------------------------
    def _extend(self, horizon: float) -> None:
        amin = float(min(self.num)) if self.num else 0.0
        n = len(self._levels) - 1
        while True:
            limits.check()
            level = self._levels[n]
            nxt: dict = {}
            for d, M in level.items():
                for b, Dj in self.others:
                    nd = d + b
                    if float(nd) + amin > horizon:
                        continue
                    nxt[nd] = qp.sub(nxt.get(nd, qp.ZERO), qp.mul(M, Dj))
            nxt = {d: p for d, p in nxt.items() if not qp.is_zero(p)}
            if not nxt:
                break
            self._levels.append(nxt)
            n += 1
            if sum(len(lv) for lv in self._levels) * max(len(self.num), 1) > MAX_TERMS:
                raise LimitError(f"terms of the dead-time series up to t = {horizon:g}",
                                 f"over {MAX_TERMS}", MAX_TERMS)

    def pieces_upto(self, horizon: float | None) -> list:
        horizon = float(horizon) if horizon is not None else max(self._horizon, 0.0)
        if horizon > self._horizon:
            self._extend(horizon)
            self._horizon = horizon
        out = []
        for n, level in enumerate(self._levels):
            for d, M in level.items():
                for a, N in self.num.items():
                    delay = d + a
                    if float(delay) > horizon:
                        continue
                    key = (n, d, a)
                    piece = self._cache.get(key)
                    if piece is None:
                        limits.check()
                        modal = self._modal(qp.mul(N, M), n + 1)
                        piece = self._cache[key] = Piece(delay, modal)
                    out.append(piece)
        return out

    def _roots(self):
        """Roots of D0 at NUMERIC_DPS digits with multiplicities (im >= 0 once per pair)."""
        if "roots" not in self._cache:
            import mpmath
            from .modal import exact_roots
            from .numbers import NUMERIC_DPS, to_mp
            out = []
            with mpmath.workdps(NUMERIC_DPS):
                for f, m in self.factors:
                    if qp.degree(f) == 1:
                        out.append((mpmath.mpc(-to_mp(qp.coeff(f, 0)), 0), m))
                        continue
                    for z in exact_roots(f):
                        if abs(z.imag) <= abs(z) * mpmath.mpf(10) ** (-(NUMERIC_DPS - 10)):
                            z = mpmath.mpc(z.real, 0)
                        out.append((z, m))
            self._cache["roots"] = out
        return self._cache["roots"]

    def _modal(self, P, power):
        """Partial fractions of P / D0^power from the roots of D0 (Laurent series at
        NUMERIC_DPS digits; the exact route's gcd steps grow too fast with the power)."""
        import mpmath
        from .modal import Modal, PairMode, RealMode, _taylor
        from .numbers import NUMERIC_DPS, to_mp
        Q = qp.power(self.D0, power)
        direct, P = qp.divmod_(P, Q)
        roots = self._roots()
        lc = to_mp(qp.lc(self.D0), NUMERIC_DPS) ** power
        reals, pairs = [], []
        with mpmath.workdps(NUMERIC_DPS):
            Pm = [to_mp(c) for c in reversed(qp.coeffs(P))]
            every = []
            for z, m in roots:
                every.append((z, m * power))
                if z.imag != 0:
                    every.append((mpmath.conj(z), m * power))
            for z, M in every:
                if z.imag < 0:
                    continue
                limits.check()
                # h(s) = lc * prod_{r != z} (s - r)^M_r as a Taylor series at z, to order M
                hser = [mpmath.mpc(lc)] + [mpmath.mpc(0)] * (M - 1)
                for r, Mr in every:
                    if r == z:
                        continue
                    d = z - r
                    fac = [mpmath.binomial(Mr, j) * d ** (Mr - j) for j in range(min(Mr, M - 1) + 1)]
                    hser = [sum(hser[i] * fac[j - i] for i in range(max(0, j - len(fac) + 1), j + 1))
                            for j in range(M)]
                a = _taylor(Pm, z, M) if Pm else [mpmath.mpc(0)] * M
                q = []
                for j in range(M):
                    q.append((a[j] - sum(q[i] * hser[j - i] for i in range(j))) / hser[0])
                coeffs = list(reversed(q))          # coefficient of 1/(s-z)^k, k = 1..M
                if z.imag == 0:
                    reals.append(RealMode(z.real, tuple(c.real for c in coeffs)))
                else:
                    pairs.append(PairMode(z.real, z.imag, tuple(c.real for c in coeffs),
                                          tuple(c.imag for c in coeffs)))
        return Modal(tuple(qp.coeffs(direct)), tuple(reals), tuple(pairs), (), False)

    def evaluator(self, horizon: float | None):
        """An evaluator valid on [0, horizon]: the series re-expanded window by window."""
        horizon = float(horizon) if horizon is not None else max(self._horizon, 0.0)
        key = ("windows", horizon)
        ev = self._cache.get(key)
        if ev is None:
            from .evaluate import Evaluator
            ev = self._cache[key] = Evaluator(windows(self.pieces_upto(horizon), horizon))
        return ev

    # stability ---------------------------------------------------------------------------
    def characteristic(self):
        """(D0, [(b, Dj)]) of the characteristic quasi-polynomial."""
        return self.D0, self.others

    def rhp_roots(self) -> int | None:
        """Number of roots of D(s) = D0 + sum Dj e^{-bj s} in the open right half-plane
        (argument principle along the imaginary axis); None when it cannot be decided
        (neutral type, roots on or near the axis)."""
        if self.neutral:
            return None
        return rhp_root_count(self.D0, self.others)


def _cval(p, z):
    acc = 0j
    for c in reversed(qp.coeffs(p)):
        acc = acc * z + float(c)
    return acc


def rhp_root_count(D0, others) -> int | None:
    """Roots in Re s > 0 of a retarded quasi-polynomial, by Stepan's formula
    Z = n/2 - (1/pi) * (change of arg D(jw) for w from 0 to infinity)."""
    import numpy as np
    n = qp.degree(D0)
    lc0 = abs(float(qp.lc(D0)))
    c0 = qp.coeffs(D0)

    def D(w):
        z = 1j * w
        return _cval(D0, z) + sum(_cval(Dj, z) * np.exp(-float(b) * z) for b, Dj in others)

    # beyond W the delayed part is below half of |D0| (coefficient bounds)
    W = 1.0
    for _ in range(200):
        d0_low = lc0 * W ** n - sum(abs(float(c)) * W ** i for i, c in enumerate(c0[:-1]))
        dj_high = sum(sum(abs(float(c)) * W ** i for i, c in enumerate(qp.coeffs(Dj))) for _, Dj in others)
        if d0_low > 2 * dj_high:
            break
        W *= 1.5
    else:
        return None
    if abs(D(0.0)) < 1e-12 * max(1.0, abs(float(c0[0]))):
        return None                                        # a root at s = 0
    # arg change on [0, W] with step control
    total = 0.0
    w, prev = 0.0, D(0.0)
    step = W / 2000
    while w < W:
        limits.check()
        w2 = min(W, w + step)
        cur = D(w2)
        if abs(cur) < 1e-13 * (abs(prev) + 1e-300):
            return None
        d = math.atan2((cur / prev).imag, (cur / prev).real)
        if abs(d) > 0.3 and step > W * 1e-9:
            step /= 4
            continue
        total += d
        w, prev = w2, cur
        if abs(d) < 0.05:
            step *= 1.5
    # from W to infinity: D0's own arg change (from its roots) minus the arg of 1 + sum R_j at W
    roots = np.roots([float(c) for c in reversed(c0)]) if n > 0 else []
    tail = sum(math.copysign(math.pi / 2, 1.0) - np.angle(1j * W - r) for r in roots)
    ratio = D(W) / _cval(D0, 1j * W)
    total += tail - math.atan2(ratio.imag, ratio.real)
    Z = n / 2 - total / math.pi
    k = round(Z)
    if abs(Z - k) > 0.1 or k < 0:
        return None
    return int(k)


#: digits of the window re-expansion (the alternating terms cancel here, once per window)
WINDOW_DPS = 50


def windows(pieces, horizon: float | None = None) -> list:
    """The pieces summed and re-expanded about the start of each window between
    consecutive delays: on [t0, t1) the response is one modal sum in t - t0, whose
    coefficients are computed once in extended precision (where the large
    alternating terms of the series cancel)."""
    import mpmath
    from .modal import Modal, PairMode, RealMode
    from .numbers import to_mp
    starts = sorted({p.delay for p in pieces})
    out = []
    with mpmath.workdps(WINDOW_DPS):
        state: dict = {}               # key -> [is_pair, pole (mp/mpc), coeffs (list)]
        prev = None
        for i, t0 in enumerate(starts):
            limits.check()
            if prev is not None:
                delta = to_mp(t0 - prev)
                for entry in state.values():
                    entry[2] = _shift(entry[1], entry[2], delta)
            for piece in pieces:
                if piece.delay != t0:
                    continue
                for m in piece.modal.real:
                    key = ("r", round(float(to_mp(m.pole)), 12))
                    _accumulate(state, key, False, to_mp(m.pole), [piece.sign * to_mp(c) for c in m.coeffs])
                for m in piece.modal.pairs:
                    pole = mpmath.mpc(to_mp(m.alpha), to_mp(m.omega))
                    key = ("p", round(float(pole.real), 12), round(float(pole.imag), 12))
                    cs = [piece.sign * mpmath.mpc(to_mp(x), to_mp(y)) for x, y in zip(m.xs, m.ys)]
                    _accumulate(state, key, True, pole, cs)
            prev = t0
            until = starts[i + 1] if i + 1 < len(starts) else None
            reals, pairs = [], []
            for is_pair, pole, cs in state.values():
                if is_pair:
                    pairs.append(PairMode(pole.real, pole.imag, tuple(c.real for c in cs),
                                          tuple(c.imag for c in cs)))
                else:
                    reals.append(RealMode(pole, tuple(cs)))
            end = float(until) if until is not None else max(float(horizon or 0), float(t0) + 1.0)
            series = _window_series(state, float(t0), end)
            out.append(Piece(t0, Modal((), tuple(reals), tuple(pairs), (), False), 1, until, series))
    return out


#: most terms of a window's power series
MAX_SERIES_TERMS = 400


def _window_series(state, t0: float, t1: float):
    """The window's sum as a power series in u = (t - c)/h on [t0, t1] (c the midpoint, h the
    half width), coefficients at WINDOW_DPS digits rounded to doubles: on a window the response
    is smooth and of moderate size, so its series has little cancellation where the modal sum
    (large polynomial and exponential parts of opposite sign) has much.  None when the series
    does not converge within MAX_SERIES_TERMS terms."""
    import mpmath
    import numpy as np
    c = (t0 + t1) / 2
    h = (t1 - t0) / 2
    if h <= 0:
        return None
    with mpmath.workdps(WINDOW_DPS):
        mc, mh = mpmath.mpf(c - t0), mpmath.mpf(h)
        # per mode: coefficients of e^{p x} sum_j C_j x^j / j! about the centre (x = t - c)
        shifted = [(is_pair, pole, _shift(pole, cs, mc)) for is_pair, pole, cs in state.values()]
        degree = max((len(cs) for *_, cs in shifted), default=0)
        big = max((abs(pole) for _, pole, _ in shifted), default=0)
        need = int(min(MAX_SERIES_TERMS, degree + 40 + 3 * float(big * mh)))
        coeffs = [mpmath.mpf(0)] * need
        for is_pair, pole, cs in shifted:
            # e^{p h u} * sum_j C_j (h u)^j / j!  as a power series in u: a convolution
            ph = pole * mh
            e = [mpmath.mpf(1)]
            for k in range(1, need):
                e.append(e[-1] * ph / k)
            cc = []
            f = mpmath.mpf(1)
            for j, cj in enumerate(cs):
                if j:
                    f = f * mh / j
                cc.append(cj * f)
            for n in range(need):
                acc = 0
                for j in range(min(n, len(cc) - 1) + 1):
                    acc += cc[j] * e[n - j]
                coeffs[n] += 2 * mpmath.re(acc) if is_pair else mpmath.re(acc)
        scale = max((abs(x) for x in coeffs), default=mpmath.mpf(0))
        if scale == 0:
            return None
        tail = max(abs(x) for x in coeffs[-5:])
        if tail > scale * mpmath.mpf(10) ** -18:
            return None
        b = np.array([float(x) for x in reversed(coeffs)])
    return (c, h, b, np.abs(b))


def _accumulate(state, key, is_pair, pole, cs):
    entry = state.get(key)
    if entry is None:
        state[key] = [is_pair, pole, list(cs)]
        return
    old = entry[2]
    if len(cs) > len(old):
        old.extend([0] * (len(cs) - len(old)))
    for k, c in enumerate(cs):
        old[k] += c


def _shift(pole, cs, delta):
    """Coefficients of sum_k c_k (tau + delta)^k / k! e^{p (tau + delta)} in powers tau^j / j!."""
    import mpmath
    e = mpmath.exp(pole * delta)
    n = len(cs)
    powers = [mpmath.mpf(1)]
    for k in range(1, n):
        powers.append(powers[-1] * delta / k)
    return [e * sum(cs[k] * powers[k - j] for k in range(j, n)) for j in range(n)]
