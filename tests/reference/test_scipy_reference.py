"""sheetfuncs against SciPy (reference library): partial fractions by
``scipy.signal.residue``, impulse/step/ramp responses of ``scipy.signal.lti``
(state-space matrix exponential), and step-response figures of second- and
first-order systems against the formulas of common practice and a dense
brute-force scan of SciPy's step response."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

import sheetfuncs


def _poly(*factors):
    out = np.array([1.0])
    for f in factors:
        out = np.polymul(out, f)
    return out


# (F in sheetfuncs's syntax, numerator, denominator), coefficients highest power first
RATIONAL = [
    ("(s+4)/((s+1)(s+2)(s+3))", [1, 4], _poly([1, 1], [1, 2], [1, 3])),
    ("(s+3)/((s+1)(s+2)^2)", [1, 3], _poly([1, 1], [1, 2], [1, 2])),
    ("(2s^2+1)/((s+1)^3 (s+5))", [2, 0, 1], _poly([1, 1], [1, 1], [1, 1], [1, 5])),
    ("(s+1)/((s^2+2s+5)(s+3))", [1, 1], _poly([1, 2, 5], [1, 3])),
    ("(3s-2)/(s^2+2s+5)^2", [3, -2], _poly([1, 2, 5], [1, 2, 5])),
    ("(s^2+0.5s+3)/((s+0.5)(s^2+s+4)(s^2+0.4s+9))", [1, 0.5, 3],
     _poly([1, 0.5], [1, 1, 4], [1, 0.4, 9])),
    ("1/(s^3+2s^2+3s+1)", [1], [1, 2, 3, 1]),
    ("(2s^3+s+5)/(s^2+3s+2)", [2, 0, 1, 5], [1, 3, 2]),
    ("(s^2+1)/(s^2+3s+2)", [1, 0, 1], [1, 3, 2]),
    ("(s^4+2)/(s(s+1)(s^2+s+1))", [1, 0, 0, 0, 2], _poly([1, 0], [1, 1], [1, 1, 1])),
]
IDS = [c[0] for c in RATIONAL]


def _scipy_terms(num, den):
    """[(pole, power, residue)] from scipy.signal.residue, powers counted
    within each group of repeated poles (scipy lists them ascending)."""
    r, p, k = signal.residue(num, den)
    out, seen = [], []
    for ri, pi in zip(r, p):
        power = 1 + sum(1 for q in seen if abs(q - pi) < 1e-6 * max(1, abs(pi)))
        seen.append(pi)
        out.append((complex(pi), power, complex(ri)))
    return out, np.atleast_1d(k)


@pytest.mark.parametrize("text, num, den", RATIONAL, ids=IDS)
@pytest.mark.parametrize("form", ["terms", "to_dict"])
def test_partial_fractions_match_scipy_residue(text, num, den, form):
    res = sheetfuncs.invert(text)
    if form == "terms":
        ours = [(complex(term.pole), term.order, complex(term.coefficient)) for term in res.terms]
        direct = [float(c) for c in res.direct]
    else:       # the JSON contract: [re, im] pairs and a list of direct coefficients
        d = res.to_dict()
        ours = [(complex(*x["pole"]), x["order"], complex(*x["coefficient"])) for x in d["terms"]]
        direct = d["direct"]
    theirs, k = _scipy_terms(num, den)
    for pole, power, coeff in theirs:
        match = [c for p, o, c in ours if o == power and abs(p - pole) < 1e-8 * max(1, abs(pole))]
        assert len(match) <= 1
        got = match[0] if match else 0.0          # the engine leaves zero coefficients out
        assert abs(got - coeff) <= 1e-8 * max(1.0, abs(coeff)), (pole, power)
    # nothing extra on our side: every term of ours is one of scipy's
    for pole, order, coeff in ours:
        assert any(o == order and abs(p - pole) < 1e-8 * max(1, abs(pole))
                   for p, o, _ in theirs), (pole, order)
    # direct part: scipy gives k highest power first, we give ascending powers
    assert len(direct) == len(k)
    assert np.allclose(direct[::-1], k, rtol=1e-12, atol=1e-12)


PROPER = [c for c in RATIONAL if len(c[1]) < len(c[2])]


@pytest.mark.parametrize("text, num, den", PROPER, ids=[c[0] for c in PROPER])
@pytest.mark.parametrize("kind", ["impulse", "step", "ramp"])
def test_responses_match_scipy_lti(text, num, den, kind):
    times = np.linspace(0.0, 12.0, 121)
    system = signal.lti(num, den)
    if kind == "impulse":
        _, ref = system.impulse(T=times)
    elif kind == "step":
        _, ref = system.step(T=times)
    else:   # lsim interpolates the input linearly, which is exact for a ramp
        _, ref, _ = signal.lsim(system, U=times, T=times)
    got = sheetfuncs.sample(text, times, input=kind).y
    # scipy's matrix-exponential responses agree to ~4e-15 of the scale here
    scale = np.max(np.abs(ref))
    assert np.max(np.abs(got - ref)) / scale < 1e-10


# -- step-response figures -----------------------------------------------------
SECOND_ORDER = [(0.3, 2.0), (0.6, 5.0), (0.15, 1.0), (0.05, 3.0), (0.8, 0.5)]


def _second_order_text(zeta, wn):
    # 12 significant digits, as an engineer would type them (see the long-decimal test below)
    return f"{wn * wn:.12g}/(s^2 + {2 * zeta * wn:.12g}s + {wn * wn:.12g})"


def _scan(num, den, horizon, n=200_001):
    """Dense step response from scipy: (times, y)."""
    times = np.linspace(0.0, horizon, n)
    _, y = signal.lti(num, den).step(T=times)
    return times, y


def _crossing(times, y, level):
    i = int(np.nonzero(y >= level)[0][0])
    # linear interpolation between the two grid points around the crossing
    return times[i - 1] + (level - y[i - 1]) * (times[i] - times[i - 1]) / (y[i] - y[i - 1])


@pytest.mark.parametrize("zeta, wn", SECOND_ORDER, ids=[f"zeta={z},wn={w}" for z, w in SECOND_ORDER])
def test_second_order_step_figures(zeta, wn):
    fig = sheetfuncs.figures(_second_order_text(zeta, wn))
    root = math.sqrt(1 - zeta ** 2)
    # common practice (underdamped standard second-order system, no zeros):
    #   overshoot = 100 exp(-zeta pi / sqrt(1 - zeta^2)) %, peak time = pi / (wn sqrt(1 - zeta^2))
    assert fig.overshoot_percent == pytest.approx(100 * math.exp(-zeta * math.pi / root), rel=1e-9)
    assert fig.peak_time == pytest.approx(math.pi / (wn * root), rel=1e-9)
    assert fig.final_value == pytest.approx(1.0, rel=1e-12)
    assert fig.dc_gain == pytest.approx(1.0, rel=1e-12)
    assert fig.stable is True
    for p in fig.poles:
        assert p.damping_ratio == pytest.approx(zeta, rel=1e-9)
        assert p.natural_frequency == pytest.approx(wn, rel=1e-9)
        assert p.time_constant == pytest.approx(1 / (zeta * wn), rel=1e-9)
    # settling (2 %): 4/(zeta wn) is an envelope estimate (common practice), so only a
    # loose bracket; the envelope exp(-zeta wn t)/sqrt(1-zeta^2) gives a true upper bound
    envelope_bound = math.log(1 / (0.02 * root)) / (zeta * wn)
    assert 0.5 * 4 / (zeta * wn) < fig.settling_time <= envelope_bound * (1 + 1e-12)
    # brute force: last time scipy's dense step response is outside the 2 % band
    times, y = _scan([wn * wn], [1, 2 * zeta * wn, wn * wn], 1.5 * envelope_bound)
    j = int(np.nonzero(np.abs(y - 1) > 0.02)[0][-1])
    assert times[j] - 1e-9 <= fig.settling_time <= times[j + 1] + 1e-9      # within one step
    assert fig.peak_value == pytest.approx(float(np.max(y)), rel=1e-6)
    rise = _crossing(times, y, 0.9) - _crossing(times, y, 0.1)
    assert fig.rise_time == pytest.approx(rise, rel=1e-6)


@pytest.mark.parametrize("tau, gain", [(0.7, 3.0), (2.5, 1.0), (0.04, 0.5)])
def test_first_order_lag_figures(tau, gain):
    fig = sheetfuncs.figures(f"{gain!r}/({tau!r}s + 1)")
    # common practice: 10-90 % rise of a first-order lag = tau ln 9, 2 % settling = tau ln 50
    assert fig.rise_time == pytest.approx(tau * math.log(9), rel=1e-9)
    assert fig.settling_time == pytest.approx(tau * math.log(50), rel=1e-9)
    assert fig.final_value == pytest.approx(gain, rel=1e-12)
    assert fig.overshoot_percent == 0.0 and fig.peak_time is None
    assert fig.poles[0].time_constant == pytest.approx(tau, rel=1e-12)


def test_long_decimal_coefficients_sample_like_scipy():
    """A coefficient copied from a cell with all 16-17 digits (2*0.05*3 in floating point)."""
    times = np.linspace(0.0, 10.0, 51)
    _, ref = signal.lti([9.0], [1.0, 2 * 0.05 * 3.0, 9.0]).step(T=times)
    got = sheetfuncs.sample(f"9/(s^2 + {2 * 0.05 * 3.0!r}s + 9)", times, input="step").y
    assert np.max(np.abs(got - ref)) / np.max(np.abs(ref)) < 1e-10


# (F in sheetfuncs's syntax, numerator, denominator, delay): zeros, third order, a delay,
# a right-half-plane zero (undershoot)
GENERAL = [
    ("(s+2)/(s^2+2s+4)", [1, 2], [1, 2, 4], 0.0),
    ("6/((s+1)(s+2)(s+3))", [6], _poly([1, 1], [1, 2], [1, 3]), 0.0),
    ("exp(-0.5s) 4/(s^2+s+4)", [4], [1, 1, 4], 0.5),
    ("(1-0.5s)/((s+1)(0.2s+1))", [-0.5, 1], _poly([1, 1], [0.2, 1]), 0.0),
    ("(5s+1)/((s+1)(s^2+0.6s+1))", [5, 1], _poly([1, 1], [1, 0.6, 1]), 0.0),
]


@pytest.mark.parametrize("text, num, den, delay", GENERAL, ids=[c[0] for c in GENERAL])
def test_step_figures_match_dense_scipy_scan(text, num, den, delay):
    fig = sheetfuncs.figures(text)
    final = num[-1] / den[-1]                     # dc gain from the coefficients
    times, y = _scan(num, den, 40.0)
    times = times + delay
    z = y / final
    assert fig.final_value == pytest.approx(final, rel=1e-12)
    j = int(np.nonzero(np.abs(z - 1) > 0.02)[0][-1])
    assert times[j] - 1e-9 <= fig.settling_time <= times[j + 1] + 1e-9
    assert fig.rise_time == pytest.approx(_crossing(times, z, 0.9) - _crossing(times, z, 0.1),
                                          rel=1e-6)
    over = 100 * (np.max(z) - 1)
    if over > 1e-9:
        assert fig.overshoot_percent == pytest.approx(over, rel=1e-6)
        assert abs(fig.peak_time - times[int(np.argmax(z))]) <= times[1] - times[0]
    else:
        assert fig.overshoot_percent == 0.0 and fig.peak_time is None
