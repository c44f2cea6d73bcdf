"""sheetfuncs.engine.loops: the margins contract, Nyquist bookkeeping, loop algebra text,
checked against closed forms and numpy roots (named beside each check)."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
import sympy as sp

from sheetfuncs.engine import frequency, loops
from sheetfuncs.engine.parse import parse

def _cli(*args):
    """(exit status, stdout, stderr) of the sheetfuncs command, run in this process."""
    import contextlib
    import io

    from sheetfuncs import cli
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = cli.main(list(args))
    return rc, out.getvalue(), err.getvalue()


def test_margins_contract_json():
    # K/(s(s+1)(s+2)) with K = 2: Routh critical gain 6 at sqrt(2) rad/s (common practice)
    rc, out, err = _cli("margins", "K/(s(s+1)(s+2))", "--param", "K=2", "--json")
    assert rc == 0, err
    d = json.loads(out)
    for key in ("gain_crossover", "phase_margin_deg", "phase_crossover", "gain_margin_db", "delay_margin",
                "closed_loop_stable"):
        assert key in d
    assert d["phase_crossover"] == pytest.approx(math.sqrt(2), rel=1e-12)
    assert d["gain_margin_db"] == pytest.approx(20 * math.log10(3), abs=1e-10)
    assert d["closed_loop_stable"] is True
    # delay margin = PM (rad) / w_c (definition)
    assert d["delay_margin"] == pytest.approx(math.radians(d["phase_margin_deg"]) / d["gain_crossover"], rel=1e-12)


def test_margins_null_where_no_crossover():
    rc, out, _ = _cli("margins", "0.5/(s+1)", "--json")
    d = json.loads(out)
    assert d["gain_crossover"] is None and d["phase_margin_deg"] is None and d["delay_margin"] is None
    assert d["phase_crossover"] is None and d["gain_margin_db"] is None
    assert d["closed_loop_stable"] is True          # 1 + L = (s + 1.5)/(s + 1)


def test_unstable_open_loop_counted():
    # L = 4/(s-1): closed-loop pole at s = -3 (D + N = s + 3), P = 1, one counter-clockwise encirclement
    m = loops.margins("4/(s-1)")
    assert m.open_loop_rhp_poles == 1 and m.closed_loop_rhp_poles == 0 and m.encirclements == -1
    assert m.closed_loop_stable is True
    assert m.closed_loop_poles[0] == pytest.approx(-3.0)


def test_marginal_loop_is_not_stable():
    # K = 6 on K/(s(s+1)(s+2)): closed-loop poles +-j sqrt(2) (Routh, common practice)
    m = loops.margins("6/(s(s+1)(s+2))")
    assert m.closed_loop_stable is False
    assert any("imaginary axis" in n for n in m.notes)


def test_non_rational_loop_has_margins_but_no_stability_verdict():
    m = loops.margins("exp(-sqrt(s))/s")
    assert m.gain_crossover is not None and m.closed_loop_stable is None
    # |L(jw)| = exp(-sqrt(w/2))/w = 1 (closed form of sqrt(jw)) at the crossover
    wc = m.gain_crossover
    assert math.exp(-math.sqrt(wc / 2)) / wc == pytest.approx(1.0, rel=1e-10)


def test_peak_sensitivity_against_a_dense_grid():
    # reference: max of |1/(1+L)| on 2e6 points (numpy), the scalar search must not be lower
    m = loops.margins("2 exp(-s)/(3s+1)")
    w = np.linspace(1e-4, 20, 2_000_000)
    L = 2 * np.exp(-1j * w) / (3j * w + 1)
    ref = float(np.max(1 / np.abs(1 + L)))
    assert m.peak_sensitivity == pytest.approx(ref, rel=1e-7)
    assert m.peak_sensitivity >= ref * (1 - 1e-12)


def test_loop_text_reads_back_and_keeps_the_delay_in_the_numerator():
    a = loops.close_loop("2 exp(-3s)/(5s+1)", "Kp (1 + 1/(Ti s))")
    for part in loops.LOOP_PARTS:
        parse(a.part(part))                            # every output is valid input
    assert "exp(-3*s)" in a.closed and "exp(3*s)" not in a.closed
    assert a.cancellations == () and a.rhp_zeros == ()


def test_loop_command_text_and_json():
    rc, out, err = _cli("loop", "--plant", "2/(12s+1)", "--controller", "Kp (12 s + 1)/(12 s)", "--json")
    assert rc == 0, err
    d = json.loads(out)
    assert d["cancellations"] == ["the controller zero at s = -1/12 cancels a plant pole"]
    s, Kp = sp.Symbol("s"), sp.Symbol("Kp", positive=True)
    # T = L/(1+L) with L = Kp/(6 s) (direct algebra)
    assert sp.simplify(parse(d["closed_loop"]) - Kp / (6 * s + Kp)) == 0
    rc, out, err = _cli("loop", "--plant", "(1-2s)/((s+1)(5s+1))")
    assert rc == 0 and "right half-plane" in out and "1/2" in out


def test_margins_of_the_loop_text():
    # the loop text is accepted by margins: PI on a lag with Ti = tau leaves Kp K/(tau s): PM = 90 deg (integrator)
    a = loops.close_loop("2/(12s+1)", "0.5 (12 s + 1)/(12 s)")
    m = loops.margins(a.loop)
    assert m.gain_crossover == pytest.approx(1 / 12, rel=1e-12)
    assert m.phase_margin_deg == pytest.approx(90.0, abs=1e-9)
    assert m.gain_margin_db is None


def test_closed_loop_frequency_response_of_the_loop_text():
    # closed loop T with dead time, frequency response by direct evaluation of C G/(1 + C G) (definition)
    a = loops.close_loop("exp(-0.2s)/(s+1)", "3")
    w = np.geomspace(0.01, 10, 50)
    got = frequency.frequency_response(a.closed, w).value
    G = np.exp(-0.2j * w) / (1j * w + 1)
    assert np.allclose(got, 3 * G / (1 + 3 * G), rtol=1e-12)
