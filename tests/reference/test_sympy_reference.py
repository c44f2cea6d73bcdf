"""sheetfuncs against SymPy's own Laplace routines (reference library).

``sympy.inverse_laplace_transform`` works by its own route (table and Meijer-G
lookups), so agreement at several t is an independent check of the engine's
partial fractions.  The round trip runs ``sympy.laplace_transform`` on the
engine's f(t) and must give back F(s).  Only small, cheap cases are used.
"""
from __future__ import annotations

import pytest
import sympy as sp

import sheetfuncs
from ._util import engine_f, s, scaled_error, t, values_at

TIMES = [0.0, 0.25, 0.6, 1.0, 1.8, 3.0, 5.0]

# F(s) in sheetfuncs's syntax, the same F(s) in SymPy syntax
INVERSE_CASES = [
    ("5/((s+1)(s+2))", "5/((s+1)*(s+2))"),
    ("(2s+1)/((s+1)(s+3))", "(2*s+1)/((s+1)*(s+3))"),
    ("1/(s^2+2s+5)", "1/(s**2+2*s+5)"),
    ("(s+1)/(s^2+4s+13)", "(s+1)/(s**2+4*s+13)"),
    ("1/((s+1)^2 (s+4))", "1/((s+1)**2*(s+4))"),
    ("3/(s^2 (s+1))", "3/(s**2*(s+1))"),
    ("(s^2+1)/(s(s+1)(s+2))", "(s**2+1)/(s*(s+1)*(s+2))"),
    ("(s+2)/(s+1)^3", "(s+2)/(s+1)**3"),
    ("(3s+7)/(s^2+2s+10)", "(3*s+7)/(s**2+2*s+10)"),
    ("1/(s^2-s-2)", "1/(s**2-s-2)"),
    ("0.4/(s^2+0.2s+1)", "Rational(2,5)/(s**2+Rational(1,5)*s+1)"),
]


def _sympy_F(text):
    return sp.sympify(text, locals={"s": s})


@pytest.mark.parametrize("ours, theirs", INVERSE_CASES, ids=[c[0] for c in INVERSE_CASES])
def test_inverse_matches_sympy(ours, theirs):
    ref = sp.inverse_laplace_transform(_sympy_F(theirs), s, t)
    ref = ref.xreplace({sp.Heaviside(t): 1})
    got = sheetfuncs.sample(ours, TIMES).y
    assert scaled_error(got, values_at(ref, TIMES)) < 1e-12


@pytest.mark.parametrize("ours, theirs", [
    ("(s^2+3s+3)/((s+1)(s+2))", "(s**2+3*s+3)/((s+1)*(s+2))"),
    ("(2s^3+s+5)/(s^2+3s+2)", "(2*s**3+s+5)/(s**2+3*s+2)"),
], ids=["proper+1", "doublet"])
def test_improper_fraction_impulses_match_sympy(ours, theirs):
    """Direct part -> impulses: SymPy writes them as DiracDelta terms too.
    (A plain time symbol: with t > 0 assumed SymPy drops the impulses.)"""
    tau = sp.Symbol("tau")
    ref = sp.inverse_laplace_transform(_sympy_F(theirs), s, tau)
    deltas = {}
    for d in ref.atoms(sp.DiracDelta):
        order = int(d.args[1]) if len(d.args) > 1 else 0
        deltas[order] = float(ref.coeff(d))
    smooth = ref.xreplace({d: 0 for d in ref.atoms(sp.DiracDelta)})
    smooth = smooth.xreplace({sp.Heaviside(tau): 1, tau: t})
    res = sheetfuncs.sample(ours, TIMES[1:])
    assert scaled_error(res.y, values_at(smooth, TIMES[1:])) < 1e-12
    got = {i.order: i.weight for i in res.impulses}
    assert all(i.time == 0.0 for i in res.impulses)
    assert got.keys() == deltas.keys()
    for order, weight in deltas.items():
        assert got[order] == pytest.approx(weight, rel=1e-14)


ROUND_TRIP = [
    "3/((s+2)^2+9)",
    "(s+3)/((s+1)(s+2)^2)",
    "(2s+5)/(s^2+2s+5)",
    "1/(s (s+1)^2)",
    "(s^2+2)/(s (s^2+4))",
]


@pytest.mark.parametrize("text", ROUND_TRIP)
def test_round_trip_through_sympy_laplace(text):
    res = sheetfuncs.invert(text)
    back = sp.laplace_transform(engine_f(res.f_t), t, s, noconds=True)
    F = sheetfuncs.parse(text)
    assert sp.simplify(back - F) == 0


def test_round_trip_with_delay():
    """Time-shift rule: sympy transforms f(t-1)u(t-1) back to exp(-s) R(s)."""
    res = sheetfuncs.invert("exp(-s)/(s+1)^2")
    back = sp.laplace_transform(engine_f(res.f_t), t, s, noconds=True)
    assert sp.simplify(back - sp.exp(-s) / (s + 1) ** 2) == 0


FORWARD = [
    ("exp(-2t) sin(3t)", "exp(-2*t)*sin(3*t)"),
    ("t exp(-t)", "t*exp(-t)"),
    ("1 - 0.5 exp(-t)", "1 - exp(-t)/2"),
    ("cos(2t) - sin(2t)/2", "cos(2*t) - sin(2*t)/2"),
    ("t^2 cosh(t)", "t**2*cosh(t)"),
]


@pytest.mark.parametrize("ours, theirs", FORWARD, ids=[c[0] for c in FORWARD])
def test_forward_transform_matches_sympy(ours, theirs):
    ref = sp.laplace_transform(sp.sympify(theirs, locals={"t": t}), t, s, noconds=True)
    assert sp.simplify(sheetfuncs.transform(ours) - ref) == 0


# parameters left as letters (sheetfuncs takes them as positive, so does the SymPy side)
SYMBOLIC = [
    ("1/(s+a)", "1/(s+a)"),
    ("1/(s (T s+1))", "1/(s*(T*s+1))"),
    ("s/((s+a)(s+b))", "s/((s+a)*(s+b))"),
    ("1/(s^2 (s+a))", "1/(s**2*(s+a))"),
    ("w/((s+a)^2+w^2)", "w/((s+a)**2+w**2)"),
]


@pytest.mark.parametrize("ours, theirs", SYMBOLIC, ids=[c[0] for c in SYMBOLIC])
def test_symbolic_parameters_match_sympy(ours, theirs):
    names = {n: sp.Symbol(n, positive=True) for n in ("a", "b", "T", "w")}
    ref = sp.inverse_laplace_transform(sp.sympify(theirs, locals=dict(names, s=s)), s, t)
    got = engine_f(sheetfuncs.invert(ours).f_t)
    assert got.free_symbols <= {t} | set(names.values())
    assert sp.simplify(got - ref) == 0
