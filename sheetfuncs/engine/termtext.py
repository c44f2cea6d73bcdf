"""Text of f(t) printed straight from the modal terms, in three dialects.

* ``SYMPY``   -- exact SymPy syntax (the JSON ``f_t``): ``exp(-t)/4 + t*exp(-t)/2``;
* ``display(digits)`` -- short human text with ``^``, ``u(t - T)``, ``δ(t)`` and numbers
  to ``digits`` significant digits, delays kept visible (``exp(-(t - 4)/12)``), and
  coefficients below the numerical noise of the result shown as 0 (dropped);
* ``excel(cell)`` -- a native spreadsheet formula at full double precision
  (17 significant digits), ``IF(cell>=T, ..., 0)`` for a delayed piece.

One walker (:func:`time_text`) serves all three; a dialect only says how a number,
a power, an exponential, a step and an impulse are written.  No SymPy here.
"""
from __future__ import annotations

from fractions import Fraction
from math import factorial

from . import qpoly as qp
from .numbers import Surd, sign, text, to_float

#: display coefficients smaller than this times the largest of their piece are noise
NOISE = 1e-12


class Dialect:
    """Exact SymPy syntax."""
    plus, minus = " + ", " - "
    always_coefficient = False
    times = "*"
    power = "**"
    exact = True
    noise = 0.0

    def __init__(self, tname: str = "t"):
        self.tname = tname

    def tvar(self, delay) -> str:
        return self.tname if delay == 0 else f"({self.tname} - {self.number(delay)})"

    def number(self, x) -> str:
        return text(x)

    def scaled(self, c, body: str) -> str:
        """c*body compactly ('body', '-body', '2*body', 'body/4', '(1 + sqrt(2))*body')."""
        if body == "1":
            return self.number(c)
        if self.always_coefficient:
            neg = sign(c) < 0
            num = self.number(-c if neg else c)
            if num == "1" and not body.startswith(self.tname + "^") and not body.startswith("(" + self.tname):
                return ("-" if neg else "") + body
            return ("-" if neg else "") + num + self.times + body
        neg = sign(c) < 0 and not (isinstance(c, Surd) and c.q and c.p)
        a = -c if neg else c
        lead = "-" if neg else ""
        if self.exact and isinstance(a, (Fraction,) + qp.RATIONAL):
            an, ad = int(a.numerator), int(a.denominator)
            if an == 1 and ad == 1:
                return lead + body
            if an == 1:
                return f"{lead}{body}/{ad}"
            if ad == 1:
                return f"{lead}{an}{self.times}{body}"
            return f"{lead}{an}{self.times}{body}/{ad}"
        t = self.number(a)
        if t == "1":
            return lead + body
        if isinstance(a, Surd) and a.p and self.exact:
            return f"{lead}({t}){self.times}{body}"
        return f"{lead}{t}{self.times}{body}"

    def exp(self, arg: str) -> str:
        return f"exp({arg})"

    def cos(self, arg: str) -> str:
        return f"cos({arg})"

    def sin(self, arg: str) -> str:
        return f"sin({arg})"

    def tpow(self, tv: str, k: int) -> str:
        if k == 0:
            return ""
        return f"{tv}{self.power}{k}/{factorial(k)}" if k > 1 else tv

    def delta(self, arg: str, order: int) -> str | None:
        return f"DiracDelta({arg})" if order == 0 else f"DiracDelta({arg}, {order})"

    def step(self, body: str, delay) -> str:
        return f"({body})*Heaviside({self.tname} - {self.number(delay)})"

    def rate(self, p, tv: str) -> str:
        """p*tv inside an exponential or a cosine; for a shifted tv keeps the delay visible."""
        return self.scaled(p, tv)


class Display(Dialect):
    times = "*"
    power = "^"
    exact = False

    def __init__(self, digits: int = 6, tname: str = "t"):
        super().__init__(tname)
        self.digits = digits
        self.noise = NOISE

    def number(self, x) -> str:
        v = to_float(x)
        out = format(v, f".{self.digits}g")
        if "e" in out:
            mant, _, exp = out.partition("e")
            out = f"{mant}e{int(exp)}"
        return "0" if out in ("-0", "-0.0") else out

    def tpow(self, tv: str, k: int) -> str:
        if k == 0:
            return ""
        return f"{tv}^{k}/{factorial(k)}" if k > 1 else tv

    def delta(self, arg: str, order: int) -> str:
        mark = "'" * order if order <= 2 else f"^({order})"
        return f"δ{mark}({arg})"

    def step(self, body: str, delay) -> str:
        return f"({body})*u({self.tname} - {self.number(delay)})"


class Excel(Dialect):
    plus, minus = "+", "-"
    always_coefficient = True          # Excel's unary minus binds tighter than ^: never "-A2^2"
    times = "*"
    power = "^"
    exact = False

    def tvar(self, delay) -> str:
        return self.tname if delay == 0 else f"({self.tname}-{self.number(delay)})"

    def __init__(self, cell: str = "A1"):
        super().__init__(cell)

    def number(self, x) -> str:
        v = to_float(x)
        out = repr(v)                           # shortest text that reads back the same double
        if out in ("inf", "-inf", "nan"):
            from ..errors import UnsupportedExpressionError
            raise UnsupportedExpressionError(f"the number {out} has no spreadsheet form")
        if v.is_integer() and abs(v) < 1e15:
            return str(int(v))
        return out.upper().replace("E+", "E")

    def exp(self, arg: str) -> str:
        return f"EXP({arg})"

    def cos(self, arg: str) -> str:
        return f"COS({arg})"

    def sin(self, arg: str) -> str:
        return f"SIN({arg})"

    def tpow(self, tv: str, k: int) -> str:
        if k == 0:
            return ""
        return f"{tv}^{k}/{factorial(k)}" if k > 1 else tv

    def delta(self, arg: str, order: int) -> None:
        return None                              # impulses are reported apart, never sampled

    def step(self, body: str, delay) -> str:
        return f"IF({self.tname}>={self.number(delay)},{body},0)"


SYMPY = Dialect()


def _join(parts, d: Dialect = None) -> str:
    plus, minus = (d.plus, d.minus) if d is not None else (" + ", " - ")
    out = ""
    for p in parts:
        if not out:
            out = p
        elif p.startswith("-"):
            out += minus + p[1:]
        else:
            out += plus + p
    return out or "0"


def modal_text(m, d: Dialect, tv: str) -> str:
    """f of one modal decomposition, as a function of ``tv``."""
    parts = []
    arg = tv[1:-1] if tv.startswith("(") else tv
    big = 0.0
    if d.noise:
        big = max([abs(to_float(c)) for r in m.real for c in r.coeffs] +
                  [abs(to_float(x)) + abs(to_float(y)) for p in m.pairs for x, y in zip(p.xs, p.ys)] +
                  [0.0])

    def keep(c) -> bool:
        return bool(c) and (not d.noise or abs(to_float(c)) > d.noise * big)

    for i, c in enumerate(m.direct):
        if c:
            body = d.delta(arg, i)
            if body is not None:
                parts.append(d.scaled(c, body))
    for r in m.real:
        e = d.exp(d.rate(r.pole, tv)) if keep(r.pole) or (r.pole and not d.noise) else ""
        for k, c in enumerate(r.coeffs):
            if keep(c):
                body = d.times.join(x for x in (d.tpow(tv, k), e) if x) or "1"
                parts.append(d.scaled(c, body))
    for p in m.pairs:
        env = d.exp(d.rate(p.alpha, tv)) if p.alpha else ""
        wt = d.rate(p.omega, tv)
        for k, (x, y) in enumerate(zip(p.xs, p.ys)):
            osc = []
            if keep(x):
                osc.append(d.scaled(2 * x, d.cos(wt)))
            if keep(y):
                osc.append(d.scaled(-2 * y, d.sin(wt)))
            if not osc:
                continue
            inner = _join(osc, d)
            pre = d.times.join(f for f in (d.tpow(tv, k), env) if f)
            parts.append(f"{pre}{d.times}({inner})" if pre else inner)
    return _join(parts, d)


def time_text(pieces, d: Dialect = SYMPY) -> str:
    """f(t) of a list of delayed pieces (``modal.Piece``) in dialect ``d``."""
    out = []
    for p in pieces:
        body = modal_text(p.modal, d, d.tvar(p.delay))
        if body == "0":
            continue
        if p.delay == 0:
            out.append(f"-({body})" if p.sign < 0 else body)
        else:
            out.append(("-" if p.sign < 0 else "") + d.step(body, p.delay))
    return _join(out, d)
