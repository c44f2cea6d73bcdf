"""Forward table, checked against sympy.laplace_transform (independent)."""
import pytest
import sympy as sp

import sheetfuncs as sf
from sheetfuncs._types import S

t = sp.Symbol("t", positive=True)


@pytest.mark.parametrize("text, sympy_form", [
    ("1", sp.Integer(1)), ("t", t), ("t^3", t**3), ("exp(-2t)", sp.exp(-2 * t)),
    ("sin(3t)", sp.sin(3 * t)), ("cos(3t)", sp.cos(3 * t)), ("exp(-t) sin(2t)", sp.exp(-t) * sp.sin(2 * t)),
    ("exp(-t) cos(2t)", sp.exp(-t) * sp.cos(2 * t)), ("t exp(-t)", t * sp.exp(-t)),
    ("sinh(2t)", sp.sinh(2 * t)), ("cosh(2t)", sp.cosh(2 * t)), ("t^2 exp(-3t) cos(t)", t**2 * sp.exp(-3 * t) * sp.cos(t)),
    ("u(t-2)", sp.Heaviside(t - 2)), ("(t-2) u(t-2)", (t - 2) * sp.Heaviside(t - 2)),
    ("u(t) - u(t-1.5)", sp.Heaviside(t) - sp.Heaviside(t - sp.Rational(3, 2))),
    ("sin(t-1) u(t-1)", sp.sin(t - 1) * sp.Heaviside(t - 1)), ("ramp(t-1)", (t - 1) * sp.Heaviside(t - 1)),
])
def test_against_sympy(text, sympy_form):
    ours = sf.transform(text)
    ref = sp.laplace_transform(sympy_form, t, S, noconds=True)
    for z in [0.7, 1.3 + 0.4j, 3.0]:
        assert abs(complex(sp.N(ours.subs(S, z))) - complex(sp.N(ref.subs(S, z)))) < 1e-12


def test_delta():
    assert sf.transform("delta(t)") == 1
    assert sf.transform("delta(t-1)") == sp.exp(-S)


@pytest.mark.parametrize("text", ["u(2-t)", "u(t+1)", "sin(t^2)", "log(t)", "t^0.5", "delta(t) delta(t-1)"])
def test_refused(text):
    with pytest.raises(sf.SheetfuncsError):
        sf.transform(text)
