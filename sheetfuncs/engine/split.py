"""Split F(s) into delayed rational pieces: F = sum_k g_k * exp(-s*T_k) * R_k(s).

Every ``exp(c0 + c1*s)`` atom is replaced by a placeholder; if what remains is
rational in s and the placeholders, with the placeholders only in the
numerator, the numerator is expanded in them and each monomial becomes one
delayed piece.  Anything else (periodic ``1/(1 - e^-sT)``, ``sqrt(s)``, ...)
is reported as not rational.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from .._types import S
from ..errors import UnsupportedExpressionError


@dataclass(frozen=True)
class Piece:
    """``gain * exp(-s*delay) * num/den``."""
    delay: sp.Expr
    gain: sp.Expr
    num: sp.Expr
    den: sp.Expr


def split_delays(F: sp.Expr) -> list[Piece] | None:
    """Delayed rational pieces of F, or None when F is not of that form."""
    atoms = [a for a in F.atoms(sp.exp) if a.has(S)]
    subs = {}
    linear = {}
    for a in atoms:
        arg = sp.expand(a.args[0])
        c1 = arg.coeff(S, 1)
        c0 = sp.expand(arg - c1 * S)
        if c0.has(S) or c1.has(S):
            return None
        z = sp.Dummy("z")
        subs[a] = z
        linear[z] = (c0, c1)
    G = F.xreplace(subs) if subs else F
    zs = list(linear)
    gens = [S] + zs
    if not G.is_rational_function(*gens):
        return None
    num, den = G.as_numer_denom()
    if den.has(*zs) if zs else False:
        return None
    if not zs:
        return [Piece(sp.S.Zero, sp.S.One, num, den)]
    try:
        poly = sp.Poly(num, *zs)
    except sp.PolynomialError:
        return None
    groups: dict = {}
    for monom, coeff in poly.terms():
        c0 = sum((e * linear[z][0] for e, z in zip(monom, zs)), sp.S.Zero)
        c1 = sum((e * linear[z][1] for e, z in zip(monom, zs)), sp.S.Zero)
        delay = sp.nsimplify(-c1) if c1.is_Float else -c1
        if delay.is_negative:
            raise UnsupportedExpressionError(
                f"exp({sp.sstr(c1 * S)}) is a time advance (output before input), not a causal system",
                "delays are written exp(-T*s) with T >= 0")
        if not (delay.is_nonnegative or delay.free_symbols):
            raise UnsupportedExpressionError(f"delay {delay} is not a real number")
        gain = sp.exp(c0)
        key = delay
        groups.setdefault(key, []).append(gain * coeff)
    pieces = []
    for delay in sorted(groups, key=lambda d: (bool(d.free_symbols), float(d) if d.is_number else 0.0)):
        pieces.append(Piece(delay, sp.S.One, sp.Add(*groups[delay]), den))
    return pieces


def additive_terms(F: sp.Expr, limit: int = 256) -> list[sp.Expr]:
    """F as a list of terms, products over sums in the numerator distributed
    (denominators and exponentials left alone), e.g. (1 - e^{-s})/sqrt(s) ->
    [1/sqrt(s), -e^{-s}/sqrt(s)]."""
    out = []
    for term in sp.Add.make_args(F):
        parts = [[]]
        for f in sp.Mul.make_args(term):
            if f.is_Add and len(parts) * len(f.args) <= limit:
                parts = [p + [a] for p in parts for a in f.args]
            else:
                parts = [p + [f] for p in parts]
        out.extend(sp.Mul(*p) for p in parts)
    return out


def pure_delay(term: sp.Expr) -> tuple[sp.Expr, sp.Expr]:
    """``term = rest * exp(-delay*s)``: the delay carried by the term's exponential
    factors (``exp(c0 + c1 s)`` with ``c1 <= 0``) and the rest, keeping any part
    of an exponent that is not linear in s (``exp(-s - sqrt(s))`` -> 1, ``exp(-sqrt(s))``)."""
    delay = sp.S.Zero
    rest = []
    for factor in sp.Mul.make_args(term):
        if isinstance(factor, sp.exp) and factor.has(S):
            arg = sp.expand(factor.args[0])
            c1 = arg.coeff(S, 1)
            if c1 != 0 and not c1.has(S) and c1.is_nonpositive:
                delay += -c1
                c0 = arg - c1 * S
                if c0 != 0:
                    rest.append(sp.exp(c0))
                continue
        rest.append(factor)
    return delay, sp.Mul(*rest)
