"""Figures: FVT only where it holds; time figures by root finding.
References are the textbook closed forms, marked as common practice."""
import math

import numpy as np
import pytest

import sheetfuncs as sf


def test_second_order_step_common_practice():
    zeta, wn = 0.3, 2.0
    f = sf.figures(f"{wn**2}/(s^2 + {2*zeta*wn}s + {wn**2})")
    wd = wn * math.sqrt(1 - zeta**2)
    # common practice: overshoot = 100 exp(-zeta pi / sqrt(1 - zeta^2)) %, peak time = pi / wd
    assert f.overshoot_percent == pytest.approx(100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2)), rel=1e-9)
    assert f.peak_time == pytest.approx(math.pi / wd, rel=1e-9)
    assert f.peak_value == pytest.approx(1 + f.overshoot_percent / 100, rel=1e-9)
    # settling about 4/(zeta wn) at 2 % (an envelope estimate: only a bracket)
    assert 0.6 * 4 / (zeta * wn) < f.settling_time < 1.2 * 4 / (zeta * wn)
    assert f.final_value == 1.0 and f.dc_gain == 1.0 and f.stable
    for p in f.poles:
        assert p.damping_ratio == pytest.approx(zeta) and p.natural_frequency == pytest.approx(wn)


def test_first_order_lag_common_practice():
    # common practice: rise time 10-90 % = tau ln 9; 2 % settling = tau ln 50
    tau = 0.8
    f = sf.figures(f"3/({tau}s + 1)")
    assert f.rise_time == pytest.approx(tau * math.log(9), rel=1e-9)
    assert f.settling_time == pytest.approx(tau * math.log(50), rel=1e-9)
    assert f.final_value == pytest.approx(3.0) and f.overshoot_percent == 0.0
    assert f.poles[0].time_constant == pytest.approx(tau)


def test_dead_time_adds_to_times():
    tau, theta = 0.8, 1.25
    f = sf.figures(f"exp(-{theta}s)/({tau}s+1)")
    assert f.settling_time == pytest.approx(theta + tau * math.log(50), rel=1e-9)


def test_settling_band_option():
    f = sf.figures("1/(s+1)", band=0.05)
    assert f.settling_time == pytest.approx(math.log(20), rel=1e-9)


@pytest.mark.parametrize("expr, why", [("1/(s-1)", "right half-plane"), ("1/(s^2+4)", "imaginary axis"),
                                       ("1/s", "repeated pole at s = 0")])
def test_no_final_value_says_why(expr, why):
    f = sf.figures(expr)
    assert f.final_value is None and why in f.final_value_note


def test_impulse_final_value_integrator():
    # impulse response of 1/(s(s+1)) -> 1 - e^{-t} -> 1 (FVT holds: simple pole at 0 of Y)
    f = sf.figures("1/(s(s+1))", input="impulse")
    assert f.final_value == pytest.approx(1.0) and f.initial_value == 0.0
    assert "marginally" in f.stability


def test_initial_value_theorem():
    # IVT: f(0+) = lim s F(s); for (2s+1)/(s^2+3s+2) impulse response f(0+) = 2
    assert sf.figures("(2s+1)/(s^2+3s+2)", input="impulse").initial_value == pytest.approx(2.0)


def test_figures_accurate_against_dense_scan():
    # figures found by root finding agree with a brute-force dense scan to the scan's resolution
    expr = "10/(s^3 + 4s^2 + 6s + 4)"
    f = sf.figures(expr)
    t = np.linspace(0, 12, 1_000_000)
    y = sf.sample(expr, t, input="step").y
    assert f.peak_value == pytest.approx(y.max(), rel=1e-10)
    assert f.peak_time == pytest.approx(t[np.argmax(y)], abs=3e-5)
    outside = np.nonzero(np.abs(y / 2.5 - 1) > 0.02)[0][-1]
    assert f.settling_time == pytest.approx(t[outside], abs=3e-5)


def test_bad_bands():
    with pytest.raises(sf.SheetfuncsError):
        sf.figures("1/(s+1)", settle=2)
    with pytest.raises(sf.SheetfuncsError):
        sf.figures("1/(s+1)", rise=(0.9, 0.1))


def test_scaled_step_input_gets_step_figures():
    # a 5 V step typed as U(s) = V/s: same times and overshoot, final value scaled
    a = sf.figures("4/(s^2+1.2s+4)")
    b = sf.figures("4/(s^2+1.2s+4)", {"V": 5}, input="V/s")
    assert b.input == "step" and b.final_value == pytest.approx(5.0)
    assert b.overshoot_percent == pytest.approx(a.overshoot_percent, rel=1e-12)
    assert b.settling_time == pytest.approx(a.settling_time, rel=1e-12)


def test_non_rational_step_figures_against_mpmath():
    # far face of a slab with the near face stepped: 1/cosh(sqrt(s)) (time in units of L^2/alpha).
    # The times found must put mpmath's own de Hoog inversion of Y(s) = 1/(s cosh(sqrt(s)))
    # exactly on the 10 %, 90 % and 98 % levels.
    import mpmath
    f = sf.figures("1/cosh(sqrt(s))")
    assert f.final_value == pytest.approx(1.0) and f.stable is None and "not rational" in f.final_value_note
    Y = lambda p: 1 / (p * mpmath.cosh(mpmath.sqrt(p)))   # noqa: E731
    for t, level in [(f.settling_time, 0.98)]:
        assert float(mpmath.invertlaplace(Y, t, method="dehoog")) == pytest.approx(level, abs=1e-8)
    # rise time = t90 - t10: check both ends via the 90 % crossing found from the 10 % one
    lo = mpmath.findroot(lambda t: mpmath.invertlaplace(Y, t, method="dehoog") - 0.1, 0.1)
    hi = mpmath.findroot(lambda t: mpmath.invertlaplace(Y, t, method="dehoog") - 0.9, 1.0)
    assert f.rise_time == pytest.approx(float(hi - lo), rel=1e-7)
    assert f.overshoot_percent == 0.0


def test_non_rational_limits():
    # DC gain 1/cosh(0) = 1; impulse response of 1/(s cosh(sqrt s)) tends to 1 (FVT)
    f = sf.figures("1/(s cosh(sqrt(s)))", input="impulse")
    assert f.final_value == pytest.approx(1.0) and f.dc_gain is None and f.poles == ()
