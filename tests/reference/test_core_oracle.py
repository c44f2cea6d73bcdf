"""The fast core against independent references.

Oracle: mpmath at 50 digits summing the residues of Y(s) e^{st} at poles the
test itself places (residue of an order-m pole by mpmath's numerical
differentiation at high precision) -- independent of the engine's partial
fractions and evaluators.  Dead-time loops: the step response of
0.25 e^{-4s}/s in unity feedback by the geometric series worked out here by
hand (piecewise polynomial, peak exactly 1.5 at t = 12), and a PI loop on a
first-order-plus-dead-time process against scipy's solve_ivp integrating the
delay equation by the method of steps.
"""
from __future__ import annotations

import math
import threading
import time
from fractions import Fraction

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

import sheetfuncs as sf
from sheetfuncs.errors import LimitError

DPS = 50


def oracle(num_coeffs, poles, times, gain=1):
    """f(t) = sum of residues of gain*N(s)/prod(s-p)^m * e^{st}; poles: [(p, m)] (mpmath numbers)."""
    out = []
    with mpmath.workdps(DPS):
        N = [mpmath.mpf(Fraction(c).numerator) / Fraction(c).denominator for c in num_coeffs]

        def num(s):
            return mpmath.polyval(N[::-1], s)
        for t in times:
            tt = mpmath.mpf(t)
            total = mpmath.mpc(0)
            for p, m in poles:
                others = [(q, k) for q, k in poles if q != p]

                def g(s, p=p, others=others):
                    den = mpmath.mpf(1)
                    for q, k in others:
                        den *= (s - q) ** k
                    return gain * num(s) * mpmath.exp(s * tt) / den
                total += mpmath.diff(g, p, m - 1) / mpmath.factorial(m - 1)
            out.append(float(mpmath.re(total)))
    return np.array(out)


def poly_text(poles):
    return "".join(f"(s - ({mpmath.nstr(p, 30)}))^{m}" if m > 1 else f"(s - ({mpmath.nstr(p, 30)}))"
                   for p, m in poles)


def rel_err(a, b, scale):
    return np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-6 * scale))


@pytest.mark.parametrize("expr, poles, times", [
    # stiff overdamped RLC low-pass, step: poles (-1e3 +- sqrt(1e6 - 4e7)... real) -- irrational pair
    ("1/(s (1e-7 s^2 + 1e-3 s + 1))", None, [0.0, 1e-4, 1e-3, 0.2, 1.0, 10.0]),
    ("1/(s (s^2 + 620 s + 4000))", None, [0.0, 0.01, 0.2, 1.0, 5.0, 50.0]),
])
def test_irrational_real_pairs_stay_finite_at_large_t(expr, poles, times):
    # reference: exact roots of the quadratic by mpmath, residues summed at 50 digits
    with mpmath.workdps(DPS):
        if "1e-7" in expr:
            a, b, c = mpmath.mpf("1e-7"), mpmath.mpf("1e-3"), mpmath.mpf(1)
        else:
            a, b, c = mpmath.mpf(1), mpmath.mpf(620), mpmath.mpf(4000)
        r = mpmath.sqrt(b * b - 4 * a * c)
        p1, p2 = (-b + r) / (2 * a), (-b - r) / (2 * a)
    ref = oracle([1], [(mpmath.mpf(0), 1), (p1, 1), (p2, 1)], times, gain=1 / a)
    got = sf.sample(expr, times).y
    assert np.all(np.isfinite(got))
    assert rel_err(got, ref, np.max(np.abs(ref))) < 1e-9
    f = sf.figures("1/(" + expr[len("1/(s "):-1] + ")")        # the same system, step figures
    assert f.rise_time is not None and f.settling_time is not None


@pytest.mark.parametrize("expr, poles, t", [
    ("1/((s+1)^2 (s+1.00001))", [(-1, 2), (Fraction("-1.00001"), 1)], [0.1, 1.0, 3.0, 10.0]),
    ("1/(s (s+0.1)^6)", [(0, 1), (Fraction("-0.1"), 6)], [0.1, 0.5, 1.0, 20.0, 100.0]),
    ("1/(s (s+1e-4) (s+1))", [(0, 1), (Fraction("-1e-4"), 1), (-1, 1)], [1e-3, 0.1, 1.0, 1e4]),
    ("(s+2)/((s^2+2s+1.0000000001) s)", [(0, 1), (mpmath.mpc(-1, 1e-5), 1), (mpmath.mpc(-1, -1e-5), 1)],
     [0.01, 1.0, 5.0]),
])
def test_cancelling_partial_fractions_keep_their_digits(expr, poles, t):
    with mpmath.workdps(DPS):
        mp_poles = [(mpmath.mpf(Fraction(p).numerator) / Fraction(p).denominator
                     if not isinstance(p, mpmath.mpc) else p, m) for p, m in poles]
    num = [2, 1] if expr.startswith("(s+2)") else [1]
    ref = oracle(num, mp_poles, t)
    got = sf.sample(expr, t).y
    assert rel_err(got, ref, np.max(np.abs(ref))) < 1e-9


def test_nearly_repeated_roots_of_an_irreducible_cubic_are_polished_from_exact_coefficients():
    # (s+1)^3 + 1e-12: roots -1 - 1e-4 * (cube roots of unity); residues ~ 3e7 cancel
    expr = "1/(s^3 + 3 s^2 + 3 s + 1.000000000001)"
    with mpmath.workdps(DPS):
        roots = mpmath.polyroots([1, 3, 3, mpmath.mpf("1.000000000001")], maxsteps=200, extraprec=200)
        res = {complex(r): 1 / mpmath.polyval([3, 6, 3], r) for r in roots}     # 1/D'(p)
    d = sf.invert(expr).to_dict()
    for term in d["terms"]:
        p = complex(*term["pole"])
        ref = min(res.items(), key=lambda kv: abs(kv[0] - p))[1]
        c = complex(*term["coefficient"])
        assert abs(c - complex(ref)) <= 1e-9 * abs(complex(ref))
    t = [0.5, 2.0, 8.0]
    ref_t = oracle([1], [(r, 1) for r in roots], t)
    assert rel_err(sf.sample(expr, t).y, ref_t, 1.0) < 1e-9


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.integers(-40, -1), st.integers(0, 30)), min_size=1, max_size=5),
       st.lists(st.integers(-9, 9), min_size=1, max_size=3),
       st.floats(0.0, 6.0))
def test_random_stable_rational_functions_match_the_residue_oracle(pole_specs, num, t):
    # poles -a/10 +- j b/10 (a pair when b > 0), each placed once; numerator small integers
    poles, factors = [], []
    for a, b in sorted(set(pole_specs)):
        re_, im_ = Fraction(a, 10), Fraction(b, 10)
        if b == 0:
            poles.append((mpmath.mpf(re_.numerator) / re_.denominator, 1))
            factors.append(f"(s + {-float(re_)!r})")
        else:
            c = mpmath.mpc(float(re_), float(im_))
            poles += [(c, 1), (mpmath.conj(c), 1)]
            factors.append(f"(s^2 + {-2 * float(re_)!r} s + {float(re_ * re_ + im_ * im_)!r})")
    if len({complex(p) for p, _ in poles}) != len(poles):
        return
    num_text = " + ".join(f"({c}) s^{i}" for i, c in enumerate(num))
    expr = f"({num_text})/({' '.join(factors)})"
    if len(num) - 1 >= len(poles):
        return
    ref = oracle(num, poles, [t])
    got = sf.sample(expr, [t]).y
    scale = max(abs(float(ref[0])), 1e-12)
    assert abs(got[0] - ref[0]) <= 1e-9 * scale + 1e-13


# ---------------------------------------------------------------- dead-time loops
def integrator_loop_step(t, k=0.25, theta=4.0):
    """Unity feedback around k e^{-theta s}/s, step: the geometric series gives
    y(t) = sum_{n>=1} (-1)^(n+1) k^n (t - n theta)^n / n!  for t >= n theta."""
    total = 0.0
    n = 1
    while n * theta <= t:
        total += (-1) ** (n + 1) * k ** n * (t - n * theta) ** n / math.factorial(n)
        n += 1
    return total


def test_integrator_with_dead_time_step_is_the_exact_series():
    expr = "0.25 exp(-4s)/s/(1 + 0.25 exp(-4s)/s)"
    times = [0.0, 3.9, 4.0, 6.0, 8.0, 10.5, 12.0, 16.0, 23.0, 40.0]
    got = sf.sample(expr, times, input="step").y
    ref = [integrator_loop_step(x) for x in times]
    assert np.max(np.abs(got - ref)) < 1e-10
    f = sf.figures(expr)
    assert f.stable is True and f.final_value == pytest.approx(1.0, abs=1e-12)
    assert f.peak_value == pytest.approx(1.5, abs=1e-9)          # exactly 1.5 at t = 12 by hand
    assert f.peak_time == pytest.approx(12.0, abs=1e-5)
    assert f.overshoot_percent == pytest.approx(50.0, abs=1e-7)


def pi_fopdt_reference(times, kc, ti, k, tau, theta):
    """PI on K e^{-theta s}/(tau s + 1), unit setpoint step, by solve_ivp on each
    interval of length theta (method of steps, the delayed input from the previous interval)."""
    from scipy.integrate import solve_ivp
    sols = []

    def delayed_u(t):
        td = t - theta
        if td <= 0:
            return 0.0
        for a, b, sol in sols:
            if a <= td <= b:
                y, z = sol.sol(td)
                return kc * (1 - y + z / ti)
        raise AssertionError("history missing")

    def rhs(t, x):
        y, z = x
        return [(-y + k * delayed_u(t)) / tau, 1 - y]

    x0 = [0.0, 0.0]
    t_end = max(times)
    a = 0.0
    while a < t_end:
        b = min(a + theta, t_end)
        sol = solve_ivp(rhs, (a, b), x0, dense_output=True, rtol=1e-11, atol=1e-13, method="DOP853")
        sols.append((a, b, sol))
        x0 = sol.y[:, -1]
        a = b
    out = []
    for t in times:
        for a, b, sol in sols:
            if a <= t <= b:
                out.append(float(sol.sol(t)[0]))
                break
    return np.array(out)


def test_pi_loop_on_a_dead_time_process_matches_a_delay_equation_integration():
    kc, ti, k, tau, theta = 0.8, 4.0, 1.5, 5.0, 2.0
    L = f"({kc} (1 + 1/({ti} s)) {k} exp(-{theta}s)/({tau} s + 1))"
    expr = f"{L}/(1 + {L})"
    times = [1.0, 2.5, 4.0, 7.3, 10.0, 15.0, 20.0]
    got = sf.sample(expr, times, input="step").y
    ref = pi_fopdt_reference(times, kc, ti, k, tau, theta)
    assert np.max(np.abs(got - ref)) < 1e-7


def test_unstable_dead_time_loop_is_flagged():
    # k e^{-s}/s is stable for k < pi/2 (common practice: phase crossover at pi/2 rad/s)
    f = sf.figures("2 exp(-s)/s/(1 + 2 exp(-s)/s)")
    assert f.stable is False and f.final_value is None


# ---------------------------------------------------------------- small facts
def test_pure_gain_has_its_dc_gain():
    assert sf.figures("2").dc_gain == 2.0
    assert sf.figures("K/(tau s + 1)", {"K": 2, "tau": 0}).dc_gain == 2.0


def test_time_bound_holds_in_a_worker_thread(monkeypatch):
    monkeypatch.setenv("SHEETFUNCS_TIMEOUT", "0.5")
    from sheetfuncs.engine.figures_fast import figures
    box = {}

    def work():
        t0 = time.perf_counter()
        try:
            figures("exp(-s)/(s+1)/(1 + 1.9 exp(-s)/(s+1))")
        except LimitError as exc:
            box["error"] = exc
        box["seconds"] = time.perf_counter() - t0
    th = threading.Thread(target=work)
    th.start()
    th.join(30)
    assert not th.is_alive()
    assert "error" in box and box["seconds"] < 5
