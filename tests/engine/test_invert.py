"""Inverse transforms: the rules of the trade as facts, checked on the
engine's closed forms.  Expected values come from the rule itself, from
SymPy's own calculus (integrate, diff) or from scipy/mpmath."""
import mpmath
import numpy as np
import pytest
import sympy as sp

import sheetfuncs as sf
from sheetfuncs._types import S, T, param_symbol
from sheetfuncs.engine.sample import evaluate
from sheetfuncs.errors import ParameterError, UnsupportedExpressionError

TIMES = [0.05, 0.3, 1.0, 2.5, 6.0]


def values(expr_t, times=TIMES):
    return np.array([float(sp.N(expr_t.subs(T, x), 20)) for x in times])


def test_fact_symbolic_parameter_pair():
    # fact of the trade: L^-1{1/(s(s-a))} = (e^{at} - 1)/a
    a = param_symbol("a")
    f = sf.invert("1/(s(s-a))").f_t
    assert sp.simplify(f - (sp.exp(a * T) - 1) / a) == 0


def test_real_form_has_no_imaginary_unit():
    for text in ["(s+3)/(s^2+2s+5)", "1/(s^2+2s+5)^2", "1/(s^3+2s+5)", "1/((s^2+1)(s^2+4)(s+1))"]:
        f = sf.invert(text).f_t
        assert not f.has(sp.I), text


def test_decimal_critical_damping_stays_repeated():
    # s^2 + 0.4 s + 0.04 = (s + 0.2)^2  ->  t e^{-0.2 t} (table pair t^n e^{at})
    f = sf.invert("1/(s^2 + 0.4s + 0.04)").f_t
    assert sp.simplify(f - T * sp.exp(-T / 5)) == 0


def test_improper_fraction_gives_impulses():
    # (s^2 + 1)/(s + 1) = s - 1 + 2/(s + 1)
    res = sf.invert("(s^2+1)/(s+1)")
    assert sp.simplify(res.f_t - (sp.DiracDelta(T, 1) - sp.DiracDelta(T) + 2 * sp.exp(-T))) == 0
    assert [float(c) for c in res.direct] == [-1.0, 1.0]


def test_time_shift_rule_pulse():
    # (1 - e^{-sT})/s  <->  u(t) - u(t - T)  (rectangular pulse of width T)
    res = sf.invert("(1 - exp(-2s))/s")
    y = evaluate(res, np.array([0.5, 1.9, 2.0, 2.1, 5.0]))
    assert list(y) == [1.0, 1.0, 0.0, 0.0, 0.0]


def test_time_shift_rule_general():
    # e^{-sT} F(s) <-> f(t - T) u(t - T)
    base = sf.invert("(s+3)/(s^2+2s+5)").f_t
    res = sf.invert("exp(-1.5s)(s+3)/(s^2+2s+5)")
    ts = np.array([0.5, 1.4, 1.6, 3.0, 7.0])
    expected = [0.0 if x < 1.5 else float(base.subs(T, x - 1.5)) for x in ts]
    assert np.allclose(evaluate(res, ts), expected, rtol=1e-13, atol=1e-15)


def test_first_shift_rule():
    # F(s - a) <-> e^{at} f(t)
    f = sf.invert("1/(s^2+9)").f_t
    g = sf.invert("1/((s+2)^2+9)").f_t
    assert sp.simplify(g - sp.exp(-2 * T) * f) == 0


def test_integral_rule():
    # F(s)/s <-> int_0^t f(tau) dtau  (SymPy integrates independently)
    f = sf.invert("(s+3)/(s^2+2s+5)").f_t
    g = sf.invert("(s+3)/(s(s^2+2s+5))").f_t
    tau = sp.Symbol("tau", positive=True)
    integral = sp.integrate(f.subs(T, tau), (tau, 0, T))
    assert np.allclose(values(g), values(integral), rtol=1e-12)


def test_multiplication_by_t_rule():
    # -dF/ds <-> t f(t)
    F = sp.Integer(2) / (S**2 + 2 * S + 5)
    f = sf.invert(F).f_t
    g = sf.invert(sp.cancel(-sp.diff(F, S))).f_t
    assert np.allclose(values(g), values(T * f), rtol=1e-12)


def test_derivative_rule_sign():
    # L{f'} = s F(s) - f(0): so s F(s) - f(0) inverts to f'(t)
    F = (S + 3) / (S**2 + 2 * S + 5)
    f = sf.invert(F).f_t
    f0 = f.subs(T, 0)
    g = sf.invert(sp.cancel(S * F - f0)).f_t
    assert np.allclose(values(g), values(sp.diff(f, T)), rtol=1e-12)


def test_irreducible_cubic_numeric_roots_are_accurate():
    res = sf.invert("1/(s^3 + 2s + 5)")
    assert "numeric" in res.method
    with mpmath.workdps(50):
        ref = mpmath.polyroots([1, 0, 2, 5], maxsteps=200, extraprec=200)
    poles = sorted((complex(sp.N(t.pole)) for t in res.terms), key=lambda z: (z.real, z.imag))
    ref = sorted((complex(z) for z in ref), key=lambda z: (z.real, z.imag))
    for p, r in zip(poles, ref):
        assert abs(p - r) <= 1e-13 * abs(r)
    # residues: 1/f'(p) for simple poles
    for term in res.terms:
        p = complex(sp.N(term.pole))
        assert abs(complex(sp.N(term.coefficient)) - 1 / (3 * p * p + 2)) <= 1e-12 / abs(3 * p * p + 2)


def test_terms_reassemble_F():
    F = sf.parse("(2s^3 + s + 7)/((s+1)^2 (s^2+2s+5) (s - 3))")
    res = sf.invert(F)
    rebuilt = sum(c * S**i for i, c in enumerate(res.direct)) + sum(
        t.coefficient / (S - t.pole) ** t.order for t in res.terms)
    for z in [0.3 + 0.7j, -2.2 + 1j, 5.0]:
        assert abs(complex(sp.N(rebuilt.subs(S, z))) - complex(sp.N(F.subs(S, z)))) < 1e-12


def test_real_terms_reassemble_F():
    F = sf.parse("(s^2 + 1)/((s+2)^3 (s^2 + s + 3)^2)")
    res = sf.invert(F)
    rebuilt = sum(r.numerator / r.base ** r.power for r in res.real_terms)
    assert sp.cancel(rebuilt - F) == 0


def test_symbolic_quadratic_asks_for_values():
    with pytest.raises(ParameterError) as info:
        sf.invert("1/(s^2 + 2 zeta wn s + wn^2)")
    assert "zeta" in str(info.value)
    res = sf.invert("1/(s^2 + 2 zeta wn s + wn^2)", {"zeta": 0.5, "wn": 2})
    assert not res.f_t.free_symbols - {T}


def test_time_advance_refused():
    with pytest.raises(UnsupportedExpressionError, match="time advance"):
        sf.invert("exp(2s)/(s+1)")


def test_numerical_fallback_flagged():
    res = sf.invert("1/(s cosh(sqrt(s)))")
    assert res.f_t is None and res.method.startswith("numerical")
    assert res.to_dict()["f_t"] is None


def test_to_dict_contract():
    d = sf.invert("(s+3)/(s^2+2s+5)").to_dict()
    assert set(["f_t", "method", "terms", "direct"]) <= set(d)
    assert sp.simplify(sp.sympify(d["f_t"], locals={"t": T}) - sf.invert("(s+3)/(s^2+2s+5)").f_t) == 0
    for term in d["terms"]:
        assert set(term) == {"pole", "order", "coefficient"}
        assert len(term["pole"]) == 2 and len(term["coefficient"]) == 2
