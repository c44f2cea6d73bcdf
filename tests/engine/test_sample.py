"""Sampling: grids, delays, impulses reported apart, numpy speed path.
References: scipy.signal.impulse/step (independent ODE integration)."""
import numpy as np
import pytest
from scipy import signal

import sheetfuncs as sf
from sheetfuncs.errors import ParameterError, SamplingError


def test_step_matches_scipy():
    num, den = [4.0], [1.0, 1.2, 4.0]
    t = np.linspace(0, 10, 401)
    _, ref = signal.step(signal.lti(num, den), T=t)
    ours = sf.sample("4/(s^2+1.2s+4)", t, input="step").y
    assert np.max(np.abs(ours - ref)) < 1e-6


def test_ramp_is_integral_of_step():
    # ramp response = integral of the step response (integral rule), by trapezoid rule
    t = np.linspace(0, 8, 20001)
    step = sf.sample("1/(s^2+s+1)", t, input="step").y
    ramp = sf.sample("1/(s^2+s+1)", t, input="ramp").y
    trap = np.concatenate([[0], np.cumsum((step[1:] + step[:-1]) / 2 * np.diff(t))])
    assert np.max(np.abs(ramp - trap)) < 1e-7


def test_impulses_reported_not_sampled():
    # (s^2+1)/(s+1) = s - 1 + 2/(s+1) by polynomial division (checked against scipy.signal.residue
    # in tests/reference): impulses delta'(t) - delta(t), samples 2 e^{-t}
    res = sf.sample("(s^2+1)/(s+1)", [0.0, 1.0])
    assert np.allclose(res.y, [2.0, 2 * np.exp(-1)])
    assert {(i.time, i.order, i.weight) for i in res.impulses} == {(0.0, 0, -1.0), (0.0, 1, 1.0)}


def test_delayed_impulse():
    # time-shift rule (fact of the trade): e^{-2s} <-> delta(t - 2)
    res = sf.sample("exp(-2s)", [1.0, 3.0])
    assert list(res.y) == [0.0, 0.0]
    assert [(i.time, i.order, i.weight) for i in res.impulses] == [(2.0, 0, 1.0)]


def test_unstable_delayed_term_does_not_overflow_before_start():
    # time-shift rule: e^{-50 s}/(s - 20) <-> e^{20 (t - 50)} u(t - 50): 0 before 50, 1 at 50
    res = sf.sample("exp(-50s)/(s-20)", [0.0, 10.0, 49.0, 50.0])
    assert list(res.y[:3]) == [0.0, 0.0, 0.0] and res.y[3] == 1.0


def test_negative_times_are_zero():
    # f(t) is taken for t >= 0 (one-sided transform): zero before
    assert list(sf.sample("1/(s+1)", [-1.0, -0.1]).y) == [0.0, 0.0]


def test_grid_and_input_expression():
    # table pair: 1/(s(s+1)) <-> 1 - e^{-t}
    res = sf.sample("1/(s+1)", start=0, stop=1, n=3, input="1/s")
    assert np.allclose(res.t, [0, 0.5, 1]) and np.allclose(res.y, 1 - np.exp(-res.t))


@pytest.mark.parametrize("kwargs", [dict(times=["a"]), dict(start=0, stop=1, n=0),
                                    dict(start=1, stop=0, n=5), dict(start=0, stop=float("inf"), n=5),
                                    dict(), dict(start=0, stop=1, n=10**8)])
def test_bad_grids(kwargs):
    with pytest.raises(SamplingError):
        sf.sample("1/(s+1)", **kwargs)


def test_symbolic_needs_values():
    with pytest.raises(ParameterError, match="values for a"):
        sf.sample("1/(s+a)", [1.0])
    assert sf.sample("1/(s+a)", [0.0], params={"a": 2}).y[0] == 1.0


def test_numerical_route_matches_series():
    # 1/(s cosh(sqrt s)): numerical only; compare with mpmath de Hoog independently
    import mpmath
    res = sf.sample("1/(s cosh(sqrt(s)))", [0.5, 2.0])
    assert res.numerical and 0 <= res.error_estimate < 1e-6
    f = lambda p: 1 / (p * mpmath.cosh(mpmath.sqrt(p)))  # noqa: E731
    for t, y in zip(res.t, res.y):
        assert abs(y - float(mpmath.invertlaplace(f, t, method="dehoog"))) < 1e-9
