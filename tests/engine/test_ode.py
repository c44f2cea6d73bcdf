"""The ODE route, checked against scipy's numerical ODE integration and the
derivative rule's initial conditions."""
import numpy as np
import pytest
import sympy as sp
from scipy.integrate import solve_ivp

import sheetfuncs as sf
from sheetfuncs._types import T
from sheetfuncs.engine.sample import evaluate


def test_mass_spring_damper_release_against_solve_ivp():
    m, c, k, x0 = 2.0, 0.8, 50.0, 0.01
    sol = sf.solve_ode([m, c, k], [x0, 0])
    ts = np.linspace(0, 5, 11)
    ref = solve_ivp(lambda t, y: [y[1], -(c * y[1] + k * y[0]) / m], (0, 5), [x0, 0],
                    t_eval=ts, rtol=1e-11, atol=1e-14).y[0]
    assert np.max(np.abs(evaluate(sol.y, ts) - ref)) < 1e-9
    assert sol.forced.f_t == 0


def test_free_plus_forced_and_initial_conditions():
    sol = sf.solve_ode([1, 3, 2], [1, -2], "1/s")
    y = sol.y.f_t
    assert sp.simplify(y - sol.free.f_t - sol.forced.f_t) == 0
    assert y.subs(T, 0) == 1 and sp.diff(y, T).subs(T, 0) == -2
    # the equation itself: y'' + 3y' + 2y = 1 for t > 0
    assert sp.simplify(sp.diff(y, T, 2) + 3 * sp.diff(y, T) + 2 * y - 1) == 0


def test_time_signal_input():
    sol = sf.solve_ode([1, 1], [0], input_t="sin(2t)")
    y = sol.y.f_t
    assert sp.simplify(sp.diff(y, T) + y - sp.sin(2 * T)) == 0 and y.subs(T, 0) == 0


@pytest.mark.parametrize("coeffs, initial", [([], []), ([0, 0], []), ([1, 2], [1, 2, 3]), (["1", "2;"], []), ([5], []),
                                             (["s"], [])])
def test_bad_equations(coeffs, initial):
    with pytest.raises(sf.SheetfuncsError):
        sf.solve_ode(coeffs, initial)
