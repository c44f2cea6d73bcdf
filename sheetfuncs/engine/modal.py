"""Partial fractions of P(s)/Q(s) as modal terms, exact where the input is exact.

``decompose(P, Q)`` (polynomials from ``qpoly``) gives a :class:`Modal`:

* the polynomial part (impulses δ, δ', ... in time);
* one :class:`RealMode` per real pole p of order m:
  ``sum_k c_k t^(k-1)/(k-1)! e^(p t)`` (coefficient c_k of ``1/(s-p)^k``);
* one :class:`PairMode` per complex pair α ± jω: ``2 Re sum_k (x_k + j y_k) t^(k-1)/(k-1)! e^((α+jω)t)``;
* the real-form groups ``a_k(s)/f(s)^k`` per irreducible factor f (for the tables).

The denominator is factored over the rationals; for each factor f^m the
numerator ``A = P (Q/f^m)^-1 mod f^m`` is split f-adically into the groups.
Linear factors give exact rational poles and residues; quadratic ones exact
surds (an irrational real pair becomes two real modes -- two exponentials,
never cosh/sinh, which overflow); factors of degree >= 3 get roots polished at
``NUMERIC_DPS`` digits from the exact coefficients and residues by power series
at that precision.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from math import comb

from . import limits
from . import qpoly as qp
from .qpoly import Q
from .numbers import NUMERIC_DPS, Surd, to_float, to_mp


@dataclass(frozen=True)
class RealMode:
    pole: object                 # Fraction | Surd | mpf
    coeffs: tuple                # c_1 .. c_m


@dataclass(frozen=True)
class PairMode:
    alpha: object
    omega: object                # > 0
    xs: tuple                    # Re c_1 .. c_m
    ys: tuple                    # Im c_1 .. c_m


@dataclass(frozen=True)
class Group:
    """``numerator(s) / base(s)^power`` with base monic irreducible (real form)."""
    numerator: tuple
    base: tuple
    power: int


@dataclass(frozen=True)
class Modal:
    direct: tuple                # polynomial part, ascending Fractions
    real: tuple                  # RealMode
    pairs: tuple                 # PairMode
    groups: tuple                # Group (exact factors) / numeric ones
    exact: bool
    numeric_groups: tuple = field(default=())   # (numerator mp coeffs, base mp coeffs, power)
    #: the strictly proper part P1/Q exactly (for the Taylor series at small t), when known
    proper: tuple | None = field(default=None, compare=False)

    def markov(self, n: int) -> list:
        """First n Taylor coefficients of f at t = 0+ (f = sum m_k t^k / k!), exactly:
        the coefficients of P1/Q in powers of 1/s, by power-series division."""
        if self.proper is None:
            return []
        P1, Qd = self.proper
        d = qp.degree(Qd)
        qs = list(reversed(qp.coeffs(Qd)))                 # Q~(x) = x^d Q(1/x), qs[0] = lc
        pc = qp.coeffs(P1)
        ps = [pc[d - 1 - i] if 0 <= d - 1 - i < len(pc) else Q(0) for i in range(d)]
        out = []
        inv = 1 / qs[0]
        for k in range(n):
            acc = ps[k] if k < len(ps) else Q(0)
            for i in range(1, min(k, d) + 1):
                acc -= qs[i] * out[k - i]
            out.append(acc * inv)
        return out

    def poles(self) -> list[tuple[object, object, int]]:
        """(re, im, multiplicity) with im >= 0 once per pair."""
        out = [(m.pole, 0, len(m.coeffs)) for m in self.real]
        out += [(m.alpha, m.omega, len(m.xs)) for m in self.pairs]
        return out



@dataclass(frozen=True)
class Piece:
    """One delayed rational piece: ``modal`` applies to t - delay for t >= delay."""
    delay: object                # Fraction (exact) or float
    modal: Modal
    sign: int = 1
    until: float | None = None   # the piece applies for delay <= t < until (None: for ever)
    #: optional power series of the piece about a centre: (centre, half width, coefficients of
    #: u^k highest first, their magnitudes) with u = (t - centre)/half in [-1, 1]
    taylor: tuple | None = None


def _groups(P1: tuple, Q: tuple, f: tuple, m: int) -> list[tuple[int, tuple]]:
    """[(k, a_k)] with a_k / f^k the groups of the factor f^m of the monic Q."""
    fm = qp.power(f, m)
    rest = qp.divmod_(Q, fm)[0]
    if qp.degree(rest) == 0:
        A = qp.rem(P1, fm)
        A = qp.scale(A, 1 / qp.coeff(rest, 0))
    else:
        u, _v, h = qp.gcdex(rest, fm)          # u*rest + v*fm = 1
        A = qp.rem(qp.mul(P1, u), fm)
    out = []
    for k in range(m, 0, -1):
        q, r = qp.divmod_(A, f)
        out.append((k, r))
        A = q
    return out


def decompose(P, Qd, factors=None) -> Modal:
    """Partial fractions of P/Q (Q not zero); ``factors`` of Q may be given."""
    if qp.is_zero(Qd):
        raise ZeroDivisionError("the denominator is zero")
    c = 1 / qp.lc(Qd)
    P, Qd = qp.scale(P, c), qp.scale(Qd, c)
    if factors is None:
        g = qp.gcd(P, Qd) if not qp.is_zero(P) else qp.ONE
        if qp.degree(g) > 0:
            P, Qd = qp.divmod_(P, g)[0], qp.divmod_(Qd, g)[0]
    direct, P1 = qp.divmod_(P, Qd)
    direct = tuple(qp.coeffs(direct))
    real, pairs, groups, numeric_groups = [], [], [], []
    exact = True
    if not qp.is_zero(P1):
        for f, m in (factors if factors is not None else qp.factor(Qd)):
            limits.check()
            gr = _groups(P1, Qd, f, m)
            d = qp.degree(f)
            if d <= 2:
                groups.extend(Group(tuple(qp.coeffs(r)), tuple(qp.coeffs(f)), k)
                              for k, r in gr if not qp.is_zero(r))
            if d == 1:
                coeffs = [Q(0)] * m
                for k, r in gr:
                    coeffs[k - 1] = qp.coeff(r, 0) if not qp.is_zero(r) else Q(0)
                real.append(RealMode(-qp.coeff(f, 0), _trim(coeffs)))
            elif d == 2:
                _quadratic(f, gr, m, real, pairs)
            else:
                exact = False
                _numeric(f, gr, m, real, pairs, numeric_groups)
    real = [r for r in real if r.coeffs]
    pairs = [p for p in pairs if p.xs]
    # dominant (slowest) modes first: the order an engineer reads a response in
    real.sort(key=lambda r: -to_float(r.pole))
    pairs.sort(key=lambda p: (-to_float(p.alpha), to_float(p.omega)))
    return Modal(direct, tuple(real), tuple(pairs), tuple(groups), exact, tuple(numeric_groups),
                 (P1, Qd) if not qp.is_zero(P1) else None)


def _trim(coeffs):
    out = list(coeffs)
    while out and not out[-1]:
        out.pop()
    return tuple(out)


def _binom_neg(k, n):
    return (-1) ** n * comb(k + n - 1, n)


def _quadratic(f, gr, m, real, pairs):
    """Exact terms of an irreducible monic quadratic s^2 + b s + c."""
    c0, b = qp.coeff(f, 0), qp.coeff(f, 1)
    alpha = -b / 2
    disc = b * b / 4 - c0
    sigma = -1 if disc < 0 else 1
    W = -disc if sigma == -1 else disc
    zero = Surd(0, 0, W)
    one = Surd(0, 1, W)                          # omega = sqrt(W)
    acc_x = [zero] * m
    acc_y = [zero] * m

    def pmul(a, bb):
        return (a[0] * bb[0] + sigma * (a[1] * bb[1]), a[0] * bb[1] + a[1] * bb[0])

    for k, r in gr:
        if qp.is_zero(r):
            continue
        A = qp.coeff(r, 1) if qp.degree(r) == 1 else Q(0)
        B = qp.coeff(r, 0)
        apb = (Surd(A * alpha + B, 0, W), one * A)
        b_prev = None
        for n in range(k):
            mm = k + n
            sc = Q(_binom_neg(k, n), 2 ** mm)
            mag = Surd(sc / W ** (mm // 2), 0, W) if mm % 2 == 0 else \
                Surd(0, sc / W ** ((mm + 1) // 2), W)
            jr = mm % 4 if sigma == -1 else mm % 2
            bn = [(mag, zero), (zero, -mag), (-mag, zero), (zero, mag)][jr] if sigma == -1 \
                else [(mag, zero), (zero, mag)][jr]
            x, y = pmul(apb, bn)
            if b_prev is not None:
                x, y = x + b_prev[0] * A, y + b_prev[1] * A
            acc_x[k - n - 1] = acc_x[k - n - 1] + x
            acc_y[k - n - 1] = acc_y[k - n - 1] + y
            b_prev = bn
    if sigma == -1:
        xs, ys = _trim_pair([_norm(x) for x in acc_x], [_norm(y) for y in acc_y])
        pairs.append(PairMode(alpha, _norm(one), xs, ys))
    else:                                        # two real exponentials
        hi = [_norm(x + y) for x, y in zip(acc_x, acc_y)]
        lo = [_norm(x - y) for x, y in zip(acc_x, acc_y)]
        real.append(RealMode(_norm(Surd(alpha, 1, W)), _trim(hi)))
        real.append(RealMode(_norm(Surd(alpha, -1, W)), _trim(lo)))


def _square_root(q):
    from math import isqrt
    a, b = int(q.numerator), int(q.denominator)
    ra, rb = isqrt(a), isqrt(b)
    return Q(ra, rb) if ra * ra == a and rb * rb == b else None


def _norm(x):
    """A surd with a square radicand or no surd part as a Fraction."""
    if isinstance(x, Surd):
        if not x.q:
            return x.p
        r = _square_root(x.W)
        if r is not None:
            return x.p + x.q * r
    return x


def _trim_pair(xs, ys):
    n = len(xs)
    while n and not xs[n - 1] and not ys[n - 1]:
        n -= 1
    return tuple(xs[:n]), tuple(ys[:n])


# numeric factors ---------------------------------------------------------------
def polish_roots(coeffs_mp, dps=NUMERIC_DPS):
    """Roots of the polynomial with mpmath coefficients (highest first): companion
    roots in double precision, then Newton steps at ``dps`` on the exact coefficients."""
    import mpmath
    import numpy as np
    with mpmath.workdps(dps):
        approx = np.roots([complex(c) for c in coeffs_mp])
        roots = []
        for z in approx:
            z = mpmath.mpc(z)
            for _ in range(80):
                limits.check()
                p, dp = mpmath.mpf(0), mpmath.mpf(0)
                for c in coeffs_mp:
                    dp = dp * z + p
                    p = p * z + c
                if dp == 0:
                    break
                step = p / dp
                z -= step
                if abs(step) <= abs(z) * mpmath.mpf(10) ** (-dps + 5):
                    break
            roots.append(z)
    return roots


def exact_roots(f, dps=NUMERIC_DPS):
    """Roots of an exact polynomial (qpoly) at ``dps`` digits as mpmath numbers (mpc):
    ball arithmetic from flint when available (the radius is checked), else companion
    roots polished by Newton steps on the exact coefficients."""
    import mpmath
    if qp.BACKEND == "flint":
        import flint
        old = flint.ctx.prec
        flint.ctx.prec = int(dps * 3.33) + 40
        try:
            found = f.complex_roots()
        finally:
            flint.ctx.prec = old
        out = []
        with mpmath.workdps(dps):
            for z, m in found:
                re_ = mpmath.mpf(z.real.mid().str(dps + 5, radius=False))
                im_ = mpmath.mpf(z.imag.mid().str(dps + 5, radius=False))
                out.extend([mpmath.mpc(re_, im_)] * int(m))
        return out
    with mpmath.workdps(dps):
        return polish_roots([to_mp(c) for c in reversed(qp.coeffs(f))], dps)


def _taylor(coeffs, z, n):
    """First n Taylor coefficients (ascending) at z of a polynomial (highest first)."""
    import mpmath
    work = list(coeffs)
    out = []
    for _ in range(n):
        if not work:
            out.append(mpmath.mpc(0))
            continue
        val = mpmath.mpc(0)
        nxt = []
        for c in work:
            val = val * z + c
            nxt.append(val)
        out.append(nxt[-1])
        work = nxt[:-1]
    return out


def laurent(num, g, z, k):
    """Coefficients of h^0..h^(k-1) of num(s)/g(s)^k at s = z + h (mp lists, highest first)."""
    import mpmath
    a = _taylor(num, z, k)
    gt = _taylor(g, z, k)
    gk = [mpmath.mpc(1)] + [mpmath.mpc(0)] * (k - 1)
    for _ in range(k):
        gk = [sum(gk[i] * gt[n - i] for i in range(n + 1)) for n in range(k)]
    q = []
    for n in range(k):
        q.append((a[n] - sum(q[i] * gk[n - i] for i in range(n))) / gk[0])
    return q


def _deflate(coeffs, z):
    out = [coeffs[0]]
    for c in coeffs[1:-1]:
        out.append(out[-1] * z + c)
    return out


def _numeric(f, gr, m, real, pairs, numeric_groups):
    import mpmath
    with mpmath.workdps(NUMERIC_DPS):
        coeffs = [to_mp(c) for c in reversed(qp.coeffs(f))]   # exact -> 60 digits, highest first
        roots = exact_roots(f)
        tiny = mpmath.mpf(10) ** (-(NUMERIC_DPS - 10))
        for z in roots:
            is_real = abs(z.imag) <= abs(z) * tiny
            if not is_real and z.imag < 0:
                continue
            if is_real:
                z = mpmath.mpc(z.real, 0)
            g = _deflate(coeffs, z)
            acc = [mpmath.mpc(0)] * m
            for k, r in gr:
                if qp.is_zero(r):
                    continue
                rc = [to_mp(c) for c in reversed(qp.coeffs(r))]
                for j, c in enumerate(laurent(rc, g, z, k)):     # multiplies 1/(s-z)^(k-j)
                    acc[k - j - 1] += c
            if is_real:
                real.append(RealMode(z.real, _trim([c.real for c in acc])))
                for k, c in enumerate(acc, 1):
                    numeric_groups.append(((c.real,), (-z.real, mpmath.mpf(1)), k))
            else:
                xs, ys = _trim_pair([c.real for c in acc], [c.imag for c in acc])
                pairs.append(PairMode(z.real, z.imag, xs, ys))
                if m == 1:
                    x, y = acc[0].real, acc[0].imag
                    base = (z.real ** 2 + z.imag ** 2, -2 * z.real, mpmath.mpf(1))
                    numeric_groups.append(((-2 * (x * z.real + y * z.imag), 2 * x), base, 1))
