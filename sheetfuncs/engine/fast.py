"""The fast core: text -> exact Quasi -> modal terms -> results, without SymPy.

Covers every F(s) that is rational in s and ``e^{-sT}`` with rational
coefficients once the parameters have values -- transfer functions, delays
in the numerator (delayed pieces, the time-shift rule) and delays in the
denominator (loops closed around a dead time, by the exact series of
``deadtime.py``).  Everything else returns None and takes the general SymPy
route of ``invert.py``.

A :class:`FastResult` has the same public face as ``results.InversionResult``
(``to_dict``, ``f_t``, ``expr``, ``method``, ``terms`` ...); its SymPy views
(``f_t``, ``expr`` and the legacy tables) are built only when asked for.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

from . import limits
from . import qpoly as qp
from .modal import Modal, Piece, decompose
from .numbers import is_exact, text, to_float
from .quasi import NotQuasi, Quasi, read_quasi
from ..errors import UnsupportedExpressionError


def quasi_of(expr, params: Mapping | None = None) -> Quasi | None:
    """A Quasi for text (or a SymPy expression), or None when outside the fast class."""
    try:
        if isinstance(expr, str):
            return read_quasi(expr, params)
        if isinstance(expr, (int, float)) and not isinstance(expr, bool):
            return read_quasi(repr(expr), params)
        if type(expr).__module__.startswith("sympy"):
            return _quasi_from_sympy(expr, params)
    except NotQuasi:
        return None
    return None


def _quasi_from_sympy(F, params):
    import sympy as sp
    if params:
        from .parse import parse_params
        vals = parse_params(params)
        F = F.xreplace({sym: vals[sym.name] for sym in F.free_symbols if sym.name in vals})
    if F.has(sp.I):
        F = sp.cancel(sp.expand(F))
        if F.has(sp.I):
            raise UnsupportedExpressionError("F(s) has a complex coefficient (e.g. sqrt(-1) or 2j)",
                                             "a real system has real coefficients")
    if F.has(sp.Float):
        F = sp.nsimplify(F, rational=True)
    return read_quasi(sp.sstr(F))


# ------------------------------------------------------------------ results
@dataclass
class FastResult:
    quasi: Quasi
    method: str
    modal_pieces: tuple                 # evaluate.Piece (delay, modal, sign)
    series: object = None               # deadtime.Series for delays in the denominator
    derived: dict = field(default_factory=dict, repr=False)

    numerical = None

    @property
    def is_numerical(self) -> bool:
        return False

    @property
    def is_fast(self) -> bool:
        return True

    # SymPy views, built on demand -------------------------------------------
    @property
    def expr(self):
        if "expr" not in self.derived:
            self.derived["expr"] = quasi_to_sympy(self.quasi)
        return self.derived["expr"]

    @property
    def f_t(self):
        """f(t) as a SymPy expression (None for a dead-time series: no finite closed form)."""
        if self.series is not None:
            return None
        if "f_t" not in self.derived:
            self.derived["f_t"] = sympify_time(time_text(self.modal_pieces))
        return self.derived["f_t"]

    def _legacy(self):
        if "legacy" not in self.derived:
            from .invert import invert_expr
            self.derived["legacy"] = invert_expr(self.expr, numeric=False, fast=False)
        return self.derived["legacy"]

    @property
    def terms(self):
        return self._legacy().terms if self.series is None else ()

    @property
    def direct(self):
        return self._legacy().direct if self.series is None else ()

    @property
    def real_terms(self):
        return self._legacy().real_terms if self.series is None else ()

    @property
    def pieces(self):
        """The legacy (SymPy) delayed pieces, for the tables that still print from them."""
        return self._legacy().pieces if self.series is None else ()

    # evaluation ---------------------------------------------------------------
    def evaluator(self, horizon: float | None = None):
        if self.series is not None:
            return self.series.evaluator(horizon)
        ev = self.derived.get("evaluator")
        if ev is None:
            from .evaluate import Evaluator
            ev = self.derived["evaluator"] = Evaluator(self.modal_pieces)
        return ev

    def impulses(self) -> tuple:
        from .sample import Impulse
        out = []
        pieces = self.modal_pieces if self.series is None else self.series.pieces_upto(None)
        for p in pieces:
            for i, c in enumerate(p.modal.direct):
                if c:
                    out.append(Impulse(float(p.delay), i, p.sign * float(c)))
        return tuple(sorted(out, key=lambda i: (i.time, i.order)))

    # the JSON contract ---------------------------------------------------------
    def to_dict(self, digits: int | None = None) -> dict:
        single = self.series is None and len(self.modal_pieces) == 1 and self.modal_pieces[0].delay == 0
        modal = self.modal_pieces[0].modal if single else None
        f_t = None
        if self.series is None:
            f_t = time_text(self.modal_pieces)
            if digits is not None:
                from ..printing import to_sympy_text
                f_t = to_sympy_text(self.f_t, digits=digits)
        out = {
            "f_t": f_t,
            "method": self.method,
            "terms": terms_list(modal) if modal else [],
            "direct": [float(c) for c in modal.direct] if modal else [],
            "real_terms": real_terms_list(modal) if modal else [],
            "delays": [to_float(p.delay) for p in self.modal_pieces if p.delay != 0]
            if self.series is None else self.series.delays(),
        }
        return out


def terms_list(m: Modal) -> list:
    out = []
    for r in m.real:
        for k, c in enumerate(r.coeffs, 1):
            if c:
                out.append({"pole": [to_float(r.pole), 0.0], "order": k, "coefficient": [to_float(c), 0.0]})
    for p in m.pairs:
        a, w = to_float(p.alpha), to_float(p.omega)
        for k, (x, y) in enumerate(zip(p.xs, p.ys), 1):
            if x or y:
                xf, yf = to_float(x), to_float(y)
                out.append({"pole": [a, w], "order": k, "coefficient": [xf, yf]})
                out.append({"pole": [a, -w], "order": k, "coefficient": [xf, -yf]})
    return out


def real_terms_list(m: Modal) -> list:
    out = [{"numerator": [to_float(c) for c in g.numerator], "base": [to_float(c) for c in g.base],
            "power": g.power} for g in m.groups]
    out += [{"numerator": [float(c) for c in num], "base": [float(c) for c in base], "power": k}
            for num, base, k in m.numeric_groups]
    return out


# ------------------------------------------------------------------ printing
from .termtext import time_text  # noqa: E402  (the dialect walker)


def sympify_time(txt: str):
    import sympy as sp
    from .._types import T
    return sp.sympify(txt, locals={"t": T, "Heaviside": sp.Heaviside, "DiracDelta": sp.DiracDelta})


def quasi_to_sympy(q: Quasi):
    import sympy as sp
    from .._types import S

    def side(m):
        return sp.Add(*[_poly_sym(p, S) * (sp.exp(-sp.Rational(int(d.numerator), int(d.denominator)) * S)
                                            if d else 1) for d, p in sorted(m.items())])
    return side(q.num) / side(q.den)


def _poly_sym(p, S):
    import sympy as sp
    return sp.Add(*[sp.Rational(int(c.numerator), int(c.denominator)) * S ** i
                    for i, c in enumerate(qp.coeffs(p))])


# ------------------------------------------------------------------ entry point
def fast_invert(expr, params: Mapping | None = None) -> FastResult | None:
    """The fast route for ``expr``; None when it does not apply."""
    q = quasi_of(expr, params)
    if q is None:
        return None
    return invert_quasi(q)


def invert_quasi(q: Quasi) -> FastResult:
    if not q.delay_free_den:
        from .deadtime import Series
        series = Series.build(q)
        return FastResult(q, series.method, (), series)
    D = q.den[next(iter(q.den))]
    if any(d < 0 for d in q.num):
        d = min(q.num)
        raise UnsupportedExpressionError(
            f"exp({text(-d)}*s) is a time advance (output before input), not a causal system",
            "delays are written exp(-T*s) with T >= 0")
    factors = qp.factor(D) if qp.degree(D) > 0 else []
    pieces = []
    exact = True
    for delay in sorted(q.num):
        limits.check()
        N = q.num[delay]
        g = qp.gcd(N, D) if qp.degree(D) > 0 else qp.ONE
        if qp.degree(g) > 0:
            modal = decompose(qp.divmod_(N, g)[0], qp.divmod_(D, g)[0])
        else:
            modal = decompose(N, D, factors)
        exact = exact and modal.exact
        pieces.append(Piece(delay, modal))
    if not pieces:
        pieces = [Piece(qp.Q(0), Modal((), (), (), (), True))]
    if len(pieces) == 1 and pieces[0].delay == 0:
        method = "partial fractions"
    else:
        method = "partial fractions + time shift"
    if not exact:
        method += " (numeric roots)"
    return FastResult(q, method, tuple(pieces))


__all__ = ["FastResult", "fast_invert", "invert_quasi", "quasi_of", "is_exact"]
