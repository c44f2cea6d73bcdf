"""The command-line tables of sheetfuncs.report: modes, partial fractions in our own words,
labels that name the input.  Numbers checked against textbook second-order relations and
sympy's own partial fractions (sympy.apart)."""
import math

import pytest
import sympy as sp

from sheetfuncs import api, report
from sheetfuncs.cli import main


def test_modes_pair_conjugates_and_follow_the_textbook_relations():
    # s^2 + 2 zeta wn s + wn^2 with zeta = 0.3, wn = 2; a real pole at -5 (textbook second order)
    f = api.figures("1/((s^2+1.2s+4)(s+5))")
    ms = report.modes(f.poles)
    assert [m.poles for m in ms] == [2, 1]                     # the pair first: it decays slowest
    pair, real = ms
    zeta, wn = 0.3, 2.0
    wd = wn * math.sqrt(1 - zeta ** 2)
    assert pair.sigma == pytest.approx(-zeta * wn) and pair.omega_d == pytest.approx(wd)
    assert pair.damping_ratio == pytest.approx(zeta) and pair.natural_frequency == pytest.approx(wn)
    assert pair.period == pytest.approx(2 * math.pi / wd)
    assert pair.decay_time == pytest.approx(math.log(50) / (zeta * wn))   # envelope to 2 %
    assert real.behaviour == "decay" and real.period is None and real.time_constant == pytest.approx(0.2)


def test_mode_behaviours():
    kinds = [m.behaviour for m in report.modes(api.figures("1/(s (s^2+1) (s-2) (s^2-2s+5))").poles)]
    assert kinds == ["growth", "growing oscillation", "integrator (pole at 0)", "steady oscillation"]


def test_fraction_rows_sum_to_sympy_apart():
    F = "(2s^3+1)/((s+1)^2 (s^2+2s+5))"
    res = api.invert(F)
    piece = res.pieces[0]
    rows = report.fraction_rows(piece.decomposition, piece.gain)
    s = sp.Symbol("s")
    total = sum(r.s_term for r in rows)
    ref = sp.apart((2 * s**3 + 1) / ((s + 1)**2 * (s**2 + 2*s + 5)), s)
    assert sp.simplify(total.subs(sp.Symbol("s"), s) - ref) == 0
    assert [r.kind for r in rows] == ["real pole", "real pole", "complex pair"]


def test_cli_words(capsys):
    assert main(["invert", "(2s^3+1)/(3(s+1)(s+2))"]) == 0
    out = capsys.readouterr().out
    assert "polynomial part" in out and "direct" not in out
    assert main(["figures", "4/(s^2+1.2s+4)"]) == 0
    out = capsys.readouterr().out
    assert "figures of the step response" in out and "decaying oscillation" in out
    assert main(["figures", "1/(s+1)", "--input", "impulse"]) == 0
    out = capsys.readouterr().out
    assert "impulse response" in out and "a impulse" not in out
    assert main(["sample", "1/(s+1)", "--times", "0,1"]) == 0
    assert "y (impulse response)" in capsys.readouterr().out


def test_cell_numbers():
    assert report.cell_number([-1.0, 2.0]) == "-1+2i"
    assert report.cell_number([0.25, 0.0]) == 0.25 and isinstance(report.cell_number([3.0, 0.0]), float)
    assert report.cell_number([0.0, -1.0]) == "-i" and report.cell_number([-0.5, -0.125]) == "-0.5-0.125i"
