"""Cell functions of the frequency half: Excel-shaped values in and out, docstring contract
(one-line description + Args: per argument, no VBA reserved argument names), and values
against the engine and closed forms (named beside each check)."""
from __future__ import annotations

import inspect
import math

import numpy as np
import pytest
from scipy import signal

from sheetfuncs import cellfuncs as cf

MARK = cf.ERROR_MARK
OURS = ["SF_GAIN_DB", "SF_PHASE_DEG", "SF_FREQ_TABLE", "SF_FREQ_FIGURE", "SF_FREQ_FIGURES", "SF_LOOP_FIGURE",
        "SF_LOOP_FIGURES", "SF_CLOSE_LOOP", "SF_LOOP_WARNINGS", "SF_SHAPE_FIGURE", "SF_SHAPE_FIGURES"]
VBA_RESERVED = {"input", "stop", "end", "type", "name", "date", "string", "error", "step", "to", "for", "next",
                "if", "then", "else", "case", "select", "dim", "function", "sub", "call", "let", "set", "get",
                "open", "close", "print", "time", "len", "mod", "not", "and", "or", "xor", "is", "like", "me",
                "new", "on", "option", "private", "public", "static", "while", "with", "resume", "return"}


@pytest.mark.parametrize("name", OURS)
def test_docstring_and_argument_contract(name):
    fn = cf.FUNCTIONS[name]
    doc = inspect.getdoc(fn)
    lines = doc.splitlines()
    assert lines[0].strip() and "Args:" in lines
    args = list(inspect.signature(fn).parameters)
    block = lines[lines.index("Args:") + 1:]
    documented = [ln.strip().split(":")[0] for ln in block if ln.startswith("    ") and ":" in ln]
    assert documented == args
    assert not (set(a.lower() for a in args) & VBA_RESERVED)


def test_gain_and_phase_cells_against_scipy():
    # reference: scipy.signal.freqs
    _, h = signal.freqs([4.0], [1.0, 1.2, 4.0], worN=[1.5])
    assert cf.gain_db("4/(s^2+1.2s+4)", 1.5) == pytest.approx(20 * math.log10(abs(h[0])), abs=1e-12)
    assert cf.phase_deg("4/(s^2+1.2s+4)", 1.5) == pytest.approx(math.degrees(np.angle(h[0])), abs=1e-10)
    # Hz: 1 Hz = 2 pi rad/s; e^{-s} turns by -2 pi rad = -360 deg at 1 Hz (definition)
    assert cf.phase_deg("exp(-s)", 1.0, None, "Hz") == pytest.approx(-360.0, abs=1e-9)
    assert cf.gain_db("0*s+s", 0.0).startswith(MARK)


def test_frequency_table_shape_and_values():
    rows = cf.frequency_table("1/(s+1)", 0.1, 10.0, 3.0)
    assert rows[0] == ["w (rad/s)", "|F|", "|F| (dB)", "phase (deg)", "group delay (s)"]
    assert len(rows) == 4 and all(isinstance(x, float) for x in rows[2])
    # 1/(s+1) at 1 rad/s: |F| = 1/sqrt(2), -45 deg, group delay 1/2 (elementary)
    assert rows[2] == pytest.approx([1.0, 1 / math.sqrt(2), -10 * math.log10(2), -45.0, 0.5], rel=1e-12)
    hz = cf.frequency_table("1/(s+1)", [[1.0], [2.0]], None, None, None, "Hz")
    assert hz[0][0] == "f (Hz)" and hz[1][0] == 1.0
    assert cf.frequency_table("1/(s+1)", 0.1, 10.0, 3.0, None, "furlongs").startswith(MARK)


def test_frequency_figure_cells():
    # second-order formulas (common practice)
    z, wn = 0.2, 3.0
    e = f"{wn * wn}/(s^2+{2 * z * wn}s+{wn * wn})"
    assert cf.frequency_figure(e, "peak db") == pytest.approx(-20 * math.log10(2 * z * math.sqrt(1 - z * z)), abs=1e-9)
    assert cf.frequency_figure(e, "Q") == pytest.approx(1 / (2 * z), rel=1e-10)
    assert cf.frequency_figure(e, "bandwidth", None, "Hz") == pytest.approx(
        wn * math.sqrt(1 - 2 * z * z + math.sqrt(4 * z ** 4 - 4 * z * z + 2)) / (2 * math.pi), rel=1e-10)
    assert cf.frequency_figure(e, "band low") == ""
    assert cf.frequency_figure(e, "wobble").startswith(MARK)
    block = cf.frequency_figures(e)
    assert all(len(r) == 2 for r in block) and block[0] == ["DC gain", pytest.approx(1.0)]


def test_loop_cells():
    # Routh (common practice): K = 2 on K/(s(s+1)(s+2)) -> GM = 20 log10 3
    P = [["K", 2.0]]
    assert cf.loop_figure("K/(s(s+1)(s+2))", "gain margin", P) == pytest.approx(20 * math.log10(3), abs=1e-10)
    assert cf.loop_figure("K/(s(s+1)(s+2))", "stable", P) == 1
    assert cf.loop_figure("10/(s(s+1)(s+2))", "stable") == 0
    assert cf.loop_figure("0.5/(s+1)", "phase margin") == ""
    assert cf.loop_figure("exp(-sqrt(s))/s", "stable").startswith(MARK)
    rows = cf.loop_figures("K/(s(s+1)(s+2))", P)
    assert [r[0] for r in rows][:2] == ["gain crossover", "phase margin (deg)"]
    assert cf.close_loop("2/(12s+1)", "0.5 (12 s + 1)/(12 s)", None, "loop") == "1/(12*s)"
    assert cf.close_loop("2/(12s+1)", None, None, "bogus").startswith(MARK)
    warn = cf.loop_warnings("2/(12s+1)", "Kp (12 s + 1)/(12 s)")
    assert warn[0] == ["loop checks"] and "cancels a plant pole" in warn[1][0]
    assert cf.loop_warnings("1/(s+1)")[1] == ["no cancellation, no right-half-plane zero"]


def test_shape_cells():
    # released mass (textbook logarithmic decrement 2 pi zeta/sqrt(1 - zeta^2))
    e = "(45*0.005 s + 600*0.005)/(45 s^2 + 600 s + 180000)"
    z = 600 / (2 * math.sqrt(180000 * 45))
    assert cf.shape_figure(e, "decrement") == pytest.approx(2 * math.pi * z / math.sqrt(1 - z * z), rel=1e-12)
    assert cf.shape_figure(e, "extremum") == pytest.approx(0.005, rel=1e-12)
    assert cf.shape_figure("4/(s^2+1.2s+4)", "extremum time", "step") == pytest.approx(
        math.pi / math.sqrt(4 - 0.36), rel=1e-7)
    rows = cf.shape_figures(e)
    assert rows[0][0] == "extremum" and len(rows) == 10
    assert cf.shape_figure(e, "nope").startswith(MARK)
