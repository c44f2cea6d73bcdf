"""The cell functions with Excel-shaped arguments (floats, None, 2-D lists).
Numbers are checked against scipy/sympy computing the same thing."""
import math

import numpy as np
import pytest
import sympy as sp
from scipy import signal

from sheetfuncs import cellfuncs as cf
from sheetfuncs import cells

MARK = cf.ERROR_MARK


def test_inverse_forms():
    t = sp.Symbol("t", real=True)
    assert sp.simplify(sp.sympify(cf.inverse("(s+3)/(s^2+2s+5)", None, "sympy"), locals={"t": t})
                       - sp.exp(-t) * (sp.cos(2 * t) + sp.sin(2 * t))) == 0
    assert "\\sin" in cf.inverse("(s+3)/(s^2+2s+5)", None, "latex")
    assert cf.inverse("1/(s+1)", None, "bogus").startswith(MARK)


def test_params_range_and_units():
    # RC low-pass impulse response (1/RC) e^{-t/RC}
    txt = cf.inverse("1/(R C s + 1)", [["R [ohm]", 1000.0], ["C [F]", 1e-6], [None, None]], "sympy")
    t = sp.Symbol("t", real=True)
    assert sp.simplify(sp.sympify(txt, locals={"t": t}) - 1000 * sp.exp(-1000 * t)) == 0


def test_defined_names_context():
    with cf.name_values({"tau": 2.0, "R1": 5.0, "bad name": 1.0}):
        assert cf.response("1/(tau s + 1)", 0.0, "impulse") == 0.5
    assert "values for tau" in cf.response("1/(tau s + 1)", 0.0)


def test_response_scalar_matches_scipy_step():
    t = np.linspace(0, 6, 13)
    _, ref = signal.step(signal.lti([4.0], [1.0, 1.2, 4.0]), T=t)
    ours = [cf.response("4/(s^2+1.2s+4)", x, "step") for x in t]
    assert np.max(np.abs(np.array(ours) - ref)) < 1e-6


def test_response_table_shapes():
    rows = cf.response_table("1/(s+1)", 0.0, 2.0, 5.0, "step")
    assert rows[0] == ["t", "y"] and len(rows) == 6
    assert rows[-1][1] == pytest.approx(1 - math.exp(-2))
    rows = cf.response_table("1/(s+1)", [[0.0], [1.0], [None], [3.0]])
    assert [r[0] for r in rows[1:]] == [0.0, 1.0, 3.0]


def test_partfrac_table_matches_scipy_residue():
    r, p, k = signal.residue([2, 1], [1, 4, 10, 12, 5])          # (2s+1)/((s+1)^2 (s^2+2s+5))
    rows = cf.partfrac_table("(2s+1)/((s+1)^2 (s^2+2s+5))")
    assert rows[0] == ["pole", "order", "coefficient", "real-form term", "time term"]
    simple = {complex(x) for x in p}
    assert len(rows) - 1 == 4 and len(simple) >= 3
    order2 = [row for row in rows[1:] if row[1] == 2]
    assert order2 and order2[0][0] == "-1"


def test_poles_table_damping():
    rows = cf.poles_table("4/(s^2+1.2s+4)")
    assert rows[1][0] == "pole" and rows[1][4] == pytest.approx(0.3) and rows[1][5] == pytest.approx(2.0)
    assert rows[-1][0] == "stability" and rows[-1][1].startswith("stable")


def test_figures_single_and_block():
    zeta = 0.3
    os_ = 100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2))     # common practice formula
    assert cf.figure("4/(s^2+1.2s+4)", "overshoot") == pytest.approx(os_, rel=1e-9)
    block = cf.figures_block("4/(s^2+1.2s+4)")
    labels = [r[0] for r in block]
    assert "settling time" in labels and all(len(r) == 2 for r in block)
    assert cf.figure("1/(s-1)", "final value").startswith(MARK)
    assert cf.figure("1/(s+1)", "nonsense").startswith(MARK)


def test_ode_functions():
    # x'' + 0.4x' + 25x = 0, x(0) = 0.01: compare with scipy's integrator
    from scipy.integrate import solve_ivp
    ref = solve_ivp(lambda t, y: [y[1], -0.4 * y[1] - 25 * y[0]], (0, 2), [0.01, 0],
                    t_eval=[2.0], rtol=1e-11, atol=1e-14).y[0][0]
    assert cf.ode_at([[1.0], [0.4], [25.0]], [[0.01], [0.0]], 2.0) == pytest.approx(ref, abs=1e-10)
    assert "exp" in cf.ode([[1.0], [0.4], [25.0]], [[0.01], [0.0]])
    assert "s" in cf.ode([[1.0, 0.4, 25.0]], [[0.01, 0.0]], None, None, "Y(s)")


def test_transform_and_selfcheck():
    assert sp.simplify(sp.sympify(cf.transform("exp(-t) sin(2t)")) - 2 / ((sp.Symbol("s") + 1) ** 2 + 4)) == 0
    assert cf.self_check("1/(s^3+2s+5)") < 1e-12


@pytest.mark.parametrize("name", sorted(cf.FUNCTIONS))
def test_every_function_handles_bad_and_empty_input(name):
    fn = cf.FUNCTIONS[name]
    assert fn(None, None, None) in ("", ) or str(fn(None, None, None)).startswith(MARK)
    out = fn("s.__class__", 1.0, 1.0)
    assert isinstance(out, str) and out.startswith(MARK)
    out = fn(True, [[1, 2, 3]], "x")
    assert isinstance(out, str) and out.startswith(MARK)


def test_huge_degree_refused_quickly():
    import time
    t0 = time.perf_counter()
    assert cf.inverse("1/(s+1)^5000").startswith(MARK)
    assert time.perf_counter() - t0 < 1.0


def test_xlwings_module_exposes_every_function():
    assert sorted(cells.CELL_FUNCTIONS) == sorted(cf.FUNCTIONS)
    assert cells.SF_RESPONSE("1/(s+1)", 0.0, "impulse") == 1.0
    assert cells.SF_FIGURE("3/(0.8s+1)", "final value") == pytest.approx(3.0)
