"""The frequency half against the outside world.

Sources, named beside each check:
* scipy.signal.freqs / scipy.signal.bode (reference library) for magnitude and phase;
* textbook second-order formulas (common practice): resonant peak 1/(2 z sqrt(1-z^2)) at
  wn sqrt(1-2z^2), -3 dB bandwidth wn sqrt(1-2z^2+sqrt(4z^4-4z^2+2));
* K/(s(s+1)(s+2)): phase crossover sqrt(2) rad/s and gain margin 20 log10(6/K) dB by the
  Routh criterion (common practice);
* integrator with dead time K e^{-theta s}/s: crossover K, phase margin 90 deg - theta K
  (in degrees), stable iff K theta < pi/2 (closed form, common practice);
* first order with dead time K e^{-theta s}/(tau s + 1): ultimate frequency from
  atan(w tau) + w theta = pi and ultimate gain sqrt(1 + (w tau)^2) (common practice), solved
  here with scipy's brentq;
* Nyquist stability against the closed-loop roots (numpy.roots of D + N, built from the
  loop's own polynomials by numpy.polyadd) on random loops (hypothesis);
* loop algebra against direct SymPy algebra (C G / (1 + C G H) ... evaluated at random points);
* diffusion e^{-sqrt(s)} at s = jw: sqrt(jw) = sqrt(w/2) (1 + j) (elementary complex algebra).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import signal
from scipy.optimize import brentq

from sheetfuncs.engine import frequency, loops

W = np.geomspace(1e-3, 1e3, 2001)


def _text(num, den) -> str:
    def poly(c):
        n = len(c) - 1
        return " + ".join(f"({float(a)!r})*s^{n - i}" for i, a in enumerate(c))
    return f"({poly(num)})/({poly(den)})"


RATIONAL = [
    ([1.0], [1.0, 1.0]),
    ([4.0], [1.0, 1.2, 4.0]),
    ([1.0, 3.0], [1.0, 4.0, 8.0, 5.0]),
    ([-1.0, 1.0], [1.0, 2.0, 1.0]),                   # right-half-plane zero
    ([2.0, 0.0, 1.0], [1.0, 0.5, 3.0, 0.7, 2.0]),
    ([1.0, 0.0], [1.0, 0.1, 1.0]),                    # band-pass, light damping
    ([5.0], [1.0, -1.0]),                              # unstable pole
    ([1.0, 2.0], np.polymul([1.0, 0.0], [1.0, 3.0]).tolist()),   # integrator
    ([1.0], np.poly(-np.arange(1, 9)).tolist()),      # degree 8, widely spread poles
]


@pytest.mark.parametrize("num,den", RATIONAL)
def test_magnitude_and_phase_match_scipy_freqs(num, den):
    # reference: scipy.signal.freqs (direct polynomial evaluation) and np.unwrap on a dense grid
    _, h = signal.freqs(num, den, worN=W)
    res = frequency.frequency_response(_text(num, den), W)
    assert np.allclose(res.magnitude, np.abs(h), rtol=1e-10, atol=0)
    ref_phase = np.unwrap(np.angle(h))
    # same continuous branch up to a whole number of turns fixed at the lowest frequency
    turns = np.round((np.radians(res.phase_deg[0]) - ref_phase[0]) / (2 * np.pi))
    assert np.allclose(np.radians(res.phase_deg), ref_phase + 2 * np.pi * turns, atol=1e-9)


@pytest.mark.parametrize("num,den", RATIONAL[:5])
def test_phase_and_magnitude_match_scipy_bode(num, den):
    # reference: scipy.signal.bode (dB and unwrapped degrees); its phase starts on its own branch
    _, mag, ph = signal.bode(signal.lti(num, den), w=W)
    res = frequency.frequency_response(_text(num, den), W)
    assert np.allclose(res.magnitude_db, mag, atol=1e-9)
    d = res.phase_deg - ph
    assert np.allclose(d, 360 * np.round(d[0] / 360), atol=1e-7)


@pytest.mark.parametrize("num,den", RATIONAL[:6])
def test_group_delay_against_the_derivative_of_scipy_phase(num, den):
    # reference: minus the numerical derivative of scipy's unwrapped phase (central differences)
    w = np.geomspace(0.01, 100, 20001)
    _, h = signal.freqs(num, den, worN=w)
    ref = -np.gradient(np.unwrap(np.angle(h)), w)
    got = frequency.frequency_response(_text(num, den), w).group_delay
    inner = np.ones(w.size, dtype=bool)
    inner[[0, -1]] = False
    for z in np.roots(num):                   # a zero on the axis: the phase jumps (a delta in the delay)
        if abs(z.real) < 1e-12:
            inner &= np.abs(w - abs(z.imag)) > 0.01
    scale = max(1.0, float(np.max(np.abs(ref[inner]))))
    assert np.max(np.abs(got[inner] - ref[inner])) / scale < 2e-4


def test_delay_phase_is_exact_and_keeps_turning():
    # e^{-jwT} (definition): a 0.5 s delay on 1/(s+1) adds exactly -w*0.5 rad; no wrap
    w = np.geomspace(0.01, 200, 500)
    _, h = signal.freqs([1.0], [1.0, 1.0], worN=w)
    res = frequency.frequency_response("exp(-0.5s)/(s+1)", w)
    assert np.allclose(res.magnitude, np.abs(h), rtol=1e-12)
    assert np.allclose(np.radians(res.phase_deg), np.unwrap(np.angle(h)) - 0.5 * w, atol=1e-9)
    assert res.phase_deg[-1] < -5000
    assert np.allclose(res.group_delay, 1 / (1 + w ** 2) + 0.5, rtol=1e-12)   # d/dw atan(w) + T


def test_diffusion_against_the_closed_form():
    # sqrt(jw) = sqrt(w/2)(1 + j): |F| = exp(-sqrt(w/2)), phase = -sqrt(w/2) rad, tau = 1/(2 sqrt(2w))
    w = np.geomspace(1e-3, 1e3, 301)
    res = frequency.frequency_response("exp(-sqrt(s))", w)
    a = np.sqrt(w / 2)
    assert np.allclose(res.magnitude, np.exp(-a), rtol=1e-12, atol=1e-300)
    assert np.allclose(np.radians(res.phase_deg), -a, atol=1e-9)
    assert np.allclose(res.group_delay, 1 / (2 * np.sqrt(2 * w)), rtol=1e-9)
    # -3 dB: sqrt(w/2) = ln(sqrt 2)  ->  w = 2 (ln 2 / 2)^2
    assert res.figures.bandwidth == pytest.approx(2 * (math.log(2) / 2) ** 2, rel=1e-10)


@pytest.mark.parametrize("zeta", [0.05, 0.1, 0.2, 0.3, 0.45, 0.6, 0.7])
@pytest.mark.parametrize("wn", [0.3, 2.0, 1500.0])
def test_second_order_figures_textbook(zeta, wn):
    # textbook second-order formulas (common practice)
    f = frequency.frequency_response(f"{wn}^2/(s^2 + 2*{zeta}*{wn} s + {wn}^2)", [1.0]).figures
    assert f.dc_gain == pytest.approx(1.0, rel=1e-14)
    assert f.peak == pytest.approx(1 / (2 * zeta * math.sqrt(1 - zeta ** 2)), rel=1e-10)
    assert f.peak_frequency == pytest.approx(wn * math.sqrt(1 - 2 * zeta ** 2), rel=1e-8)
    bw = wn * math.sqrt(1 - 2 * zeta ** 2 + math.sqrt(4 * zeta ** 4 - 4 * zeta ** 2 + 2))
    assert f.bandwidth == pytest.approx(bw, rel=1e-10)
    (sec,) = f.sections
    assert sec.natural_frequency == pytest.approx(wn, rel=1e-12)
    assert sec.damping_ratio == pytest.approx(zeta, rel=1e-10)
    assert sec.q == pytest.approx(1 / (2 * zeta), rel=1e-10)
    assert f.hf_rolloff_db_per_decade == -40.0


def test_no_peak_above_critical_damping():
    # common practice: no resonant peak for zeta >= 1/sqrt(2)
    f = frequency.frequency_response("1/(s^2 + 1.5 s + 1)", [1.0]).figures
    assert f.peak is None and f.peak_db is None


def test_band_pass_edges_textbook():
    # band-pass s (wn/Q)/(s^2 + s wn/Q + wn^2): centre wn, edges wn (sqrt(1 + 1/(4Q^2)) -+ 1/(2Q)) (common practice)
    wn, q = 1000.0, 5.0
    f = frequency.frequency_response(f"s*{wn / q}/(s^2 + s*{wn / q} + {wn}^2)", [1.0]).figures
    assert f.peak == pytest.approx(1.0, rel=1e-12)
    assert f.peak_frequency == pytest.approx(wn, rel=1e-10)
    k = math.sqrt(1 + 1 / (4 * q * q))
    assert f.band_edges[0] == pytest.approx(wn * (k - 1 / (2 * q)), rel=1e-10)
    assert f.band_edges[1] == pytest.approx(wn * (k + 1 / (2 * q)), rel=1e-10)


@pytest.mark.parametrize("K", [0.5, 2.0, 3.0, 5.0, 8.0])
def test_routh_third_order_loop(K):
    # K/(s(s+1)(s+2)): Routh gives the critical gain 6 at w = sqrt(2) (common practice)
    m = loops.margins(f"{K}/(s(s+1)(s+2))")
    assert m.phase_crossover == pytest.approx(math.sqrt(2), rel=1e-12)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(6 / K), abs=1e-10)
    assert m.closed_loop_stable is (K < 6)
    # the gain crossover solves |L| = 1: w^2 (w^2+1)(w^2+4) = K^2 (scipy brentq on that polynomial)
    wc = brentq(lambda w: w ** 2 * (w ** 2 + 1) * (w ** 2 + 4) - K ** 2, 1e-6, 10)
    assert m.gain_crossover == pytest.approx(wc, rel=1e-10)
    pm = 180 - 90 - math.degrees(math.atan(wc)) - math.degrees(math.atan(wc / 2))
    assert m.phase_margin_deg == pytest.approx(pm, abs=1e-8)


@pytest.mark.parametrize("K,theta", [(1.0, 0.5), (0.4, 2.0), (2.0, 0.1), (1.0, 1.2), (3.0, 0.6)])
def test_integrator_with_dead_time_closed_form(K, theta):
    # K e^{-theta s}/s: w_c = K, PM = 90 deg - theta K (rad->deg), delay margin (pi/2 - K theta)/K,
    # phase crossover pi/(2 theta), GM = 20 log10(pi/(2 K theta)); stable iff K theta < pi/2 (common practice)
    m = loops.margins(f"{K} exp(-{theta} s)/s")
    assert m.gain_crossover == pytest.approx(K, rel=1e-12)
    assert m.phase_margin_deg == pytest.approx(90 - math.degrees(theta * K), abs=1e-9)
    assert m.phase_crossover == pytest.approx(math.pi / (2 * theta), rel=1e-10)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(math.pi / (2 * K * theta)), abs=1e-9)
    stable = K * theta < math.pi / 2
    assert m.closed_loop_stable is stable
    if stable:
        assert m.delay_margin == pytest.approx((math.pi / 2 - K * theta) / K, rel=1e-9)
        assert m.closed_loop_rhp_poles == 0
    else:
        assert m.delay_margin is None and m.closed_loop_rhp_poles >= 2


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tau=st.floats(0.1, 20), theta=st.floats(0.05, 10), factor=st.sampled_from([0.9, 1.1]))
def test_first_order_dead_time_ultimate_gain(tau, theta, factor):
    # ultimate gain of K e^{-theta s}/(tau s+1): atan(w tau) + w theta = pi, Ku = sqrt(1+(w tau)^2) (common practice)
    wu = brentq(lambda w: math.atan(w * tau) + w * theta - math.pi, 1e-12, math.pi / theta)
    ku = math.sqrt(1 + (wu * tau) ** 2)
    K = factor * ku
    m = loops.margins(f"{K!r} exp(-{theta!r} s)/({tau!r} s + 1)")
    assert m.closed_loop_stable is (factor < 1)
    assert m.phase_crossover == pytest.approx(wu, rel=1e-9)
    assert m.gain_margin_db == pytest.approx(-20 * math.log10(factor), abs=1e-8)


roots_st = st.lists(st.tuples(st.floats(-5, 3), st.floats(0, 4)), min_size=1, max_size=3)


def _poly_of(roots):
    """Real polynomial with the roots a +- jb (b > 0.05) or the real a."""
    p = np.array([1.0])
    for a, b in roots:
        if abs(a) < 0.05:
            a = 0.05 if a >= 0 else -0.05
        p = np.polymul(p, [1.0, -2 * a, a * a + b * b] if b > 0.05 else [1.0, -a])
    return p


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(poles=roots_st, zeros=st.lists(st.tuples(st.floats(-4, 2), st.floats(0, 3)), max_size=2),
       gain=st.floats(0.05, 30), sign=st.sampled_from([1.0, -1.0]))
def test_nyquist_agrees_with_closed_loop_roots(poles, zeros, gain, sign):
    # reference: numpy.roots of D + N (the closed-loop characteristic polynomial)
    D = _poly_of(poles)
    N = sign * gain * _poly_of(zeros)
    if len(N) > len(D):
        D = np.polymul(D, _poly_of([(-7.0, 0.0)] * (len(N) - len(D))))
    rz, rp = np.roots(N), np.roots(D)
    if rz.size and np.min(np.abs(rz[:, None] - rp[None, :])) < 1e-3:
        return                                  # a common factor cancels: see the cancellation test
    char = np.trim_zeros(np.polyadd(D, N), "f")
    cl = np.roots(char)
    if cl.size == 0:
        return
    scale = max(1.0, float(np.max(np.abs(cl))))
    if len(char) < len(D) or np.min(np.abs(cl.real)) < 1e-6 * scale:
        return                                  # degenerate or marginal: not a fair comparison
    m = loops.margins(_text(N, D))
    z_ref = int(np.sum(cl.real > 0))
    assert m.closed_loop_rhp_poles == z_ref
    assert m.closed_loop_stable is (z_ref == 0)
    assert m.open_loop_rhp_poles == int(np.sum(np.roots(D).real > 0))
    assert m.encirclements == z_ref - m.open_loop_rhp_poles


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(poles=roots_st, gain=st.floats(0.05, 5), theta=st.floats(0.01, 3))
def test_nyquist_with_dead_time_against_scaled_gain_boundary(poles, gain, theta):
    # For L = g e^{-theta s} N/D the closed loop changes stability only where 1 + L(jw) = 0; scanning the gain
    # from 0 (where the closed-loop poles are the open-loop ones: numpy.roots of D) the count of right half-plane
    # poles must agree with P at small gain (argument principle, continuity of roots in the gain).
    D = _poly_of(poles)
    P = int(np.sum(np.roots(D).real > 0))
    small = 1e-4 / max(1.0, float(np.max(np.abs(D))))
    m = loops.margins(f"{small!r}*exp(-{theta!r} s)*{_text([1.0], D)}")
    assert m.closed_loop_rhp_poles == P
    assert m.closed_loop_stable is (P == 0)


def test_loop_algebra_against_sympy():
    # direct SymPy algebra of the block diagram (negative feedback), evaluated at random complex points
    s = sp.Symbol("s")
    C = 2 * (3 * s + 1) / (3 * s)
    G = sp.exp(-s / 2) * (1 - s) / ((s + 1) * (4 * s + 1))
    H = 1 / (sp.Rational(1, 10) * s + 1)
    a = loops.close_loop("exp(-0.5s) (1-s)/((s+1)(4s+1))", "2 (3s+1)/(3s)", "1/(0.1s+1)")
    L = C * G * H
    ref = {"loop": L, "closed": C * G / (1 + L), "sensitivity": 1 / (1 + L), "effort": C / (1 + L),
           "disturbance": G / (1 + L)}
    rng = np.random.default_rng(7)
    for part, expr in ref.items():
        got = frequency.to_expr(a.part(part))
        for z in rng.normal(size=4) + 1j * rng.normal(size=4):
            zz = sp.Float(z.real) + sp.I * sp.Float(z.imag)
            g, r = complex(got.subs(s, zz).evalf(30)), complex(expr.subs(s, zz).evalf(30))
            assert abs(g - r) <= 1e-12 * abs(r), part
    assert any("right half-plane" in z and "1" in z for z in a.rhp_zeros)


def test_pi_cancellation_reported():
    # common practice: a PI zero at -1/Ti cancels the lag pole at -1/tau when Ti = tau
    a = loops.close_loop("2/(12s+1)", "Kp (12 s + 1)/(12 s)")
    assert a.cancellations == ("the controller zero at s = -1/12 cancels a plant pole",)
    s = sp.Symbol("s")
    Kp = sp.Symbol("Kp", positive=True)
    assert sp.simplify(frequency.to_expr(a.loop) - Kp / (6 * s)) == 0


def test_unstable_cancellation_is_called_internal_instability():
    a = loops.close_loop("1/((s-2)(s+1))", "(s-2)/s")
    assert len(a.cancellations) == 1 and "internally unstable" in a.cancellations[0]


def test_hidden_right_half_plane_mode_is_not_called_stable():
    # (s - 1) cancels in L = (s^2-1)/((s-1)(s+2)^2): the closed loop keeps the pole s = 1 (internal stability)
    m = loops.margins("(s^2-1)/((s-1)(s+2)^2)")
    assert m.closed_loop_stable is False
    assert any("s = 1" in n for n in m.notes)
