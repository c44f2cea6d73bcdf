"""The command-line contract: JSON shapes, exit status 2 with one error line."""
import json
import subprocess
import sys

import numpy as np
import pytest
import sympy as sp
from scipy import signal

import sheetfuncs as sf
from sheetfuncs.cli import main


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_invert_json_equals_api(capsys):
    code, out, err = run(capsys, "invert", "(s+3)/(s^2+2s+5)", "--json")
    assert code == 0 and err == ""
    assert json.loads(out) == sf.invert("(s+3)/(s^2+2s+5)").to_dict()


def test_invert_params(capsys):
    code, out, _ = run(capsys, "invert", "1/(s(s+a))", "--param", "a=2", "--json")
    d = json.loads(out)
    assert code == 0
    t = sp.Symbol("t", real=True)
    f = sp.sympify(d["f_t"], locals={"t": t})
    assert abs(float(f.subs(t, 1.0)) - (1 - np.exp(-2)) / 2) < 1e-15


def test_sample_json_matches_scipy(capsys):
    code, out, _ = run(capsys, "sample", "1/(s^2+s+1)", "--from", "0", "--to", "5", "--n", "11",
                       "--input", "step", "--json")
    d = json.loads(out)
    _, ref = signal.step(signal.lti([1], [1, 1, 1]), T=np.array(d["t"]))
    assert code == 0 and np.max(np.abs(np.array(d["y"]) - ref)) < 1e-6


def test_sample_times(capsys):
    code, out, _ = run(capsys, "sample", "1/(s+1)", "--times", "0,1,2", "--json")
    assert json.loads(out)["y"] == pytest.approx([1, np.exp(-1), np.exp(-2)])


def test_figures_json_keys(capsys):
    code, out, _ = run(capsys, "figures", "4/(s^2+1.2s+4)", "--json")
    d = json.loads(out)
    for key in ["final_value", "initial_value", "dc_gain", "stable", "poles", "rise_time", "peak_time",
                "peak_value", "overshoot_percent", "settling_time"]:
        assert key in d
    wd = 2 * (1 - 0.3**2) ** 0.5          # damped frequency wn sqrt(1 - zeta^2)
    assert d["poles"] == [[pytest.approx(-0.6), pytest.approx(-wd)], [pytest.approx(-0.6), pytest.approx(wd)]]


def test_figures_impulse_has_no_step_keys(capsys):
    code, out, _ = run(capsys, "figures", "1/(s+1)", "--input", "impulse", "--json")
    d = json.loads(out)
    assert d["final_value"] == 0.0 and "overshoot_percent" not in d


def test_ode_json(capsys):
    code, out, _ = run(capsys, "ode", "--coeffs", "1,3,2", "--initial", "1,0", "--input", "1/s", "--json")
    d = json.loads(out)
    t = sp.Symbol("t", real=True)
    y = sp.sympify(d["f_t"], locals={"t": t})
    assert code == 0 and sp.simplify(sp.diff(y, t, 2) + 3 * sp.diff(y, t) + 2 * y - 1) == 0
    assert "Y_s" in d


def test_transform(capsys):
    code, out, _ = run(capsys, "transform", "exp(-t) sin(2t)", "--json")
    assert code == 0 and sp.simplify(sp.sympify(json.loads(out)["F_s"]) - 2 / ((sp.Symbol("s") + 1) ** 2 + 4)) == 0


@pytest.mark.parametrize("argv", [
    ["invert", "s.__class__"], ["invert", "(s+1"], ["invert", "1/(s+a)", "--param", "a"],
    ["invert", "s^99999"], ["sample", "1/(s+1)"], ["sample", "1/(s+1)", "--times", "a,b"],
    ["figures", "1/(s+1)", "--rise", "0.5"], ["frobnicate"], [], ["invert"], ["invert", "x", "--bogus"],
    ["ode", "--coeffs", ""], ["sample", "1/(s+a)", "--times", "1"],
])
def test_errors_one_line_exit_2(capsys, argv):
    code, out, err = run(capsys, *argv, "--json")
    assert code == 2
    assert err.startswith("error: ") and err.count("\n") == 1
    assert "error" in json.loads(out)
    code, out, err = run(capsys, *argv)
    assert code == 2 and err.startswith("error: ") and err.count("\n") == 1 and out == ""


def test_human_output_has_tables(capsys):
    code, out, _ = run(capsys, "invert", "1/((s+1)(s+2))")
    assert code == 0 and "pole" in out and "coefficient" in out
    code, out, _ = run(capsys, "figures", "1/(s+1)")
    assert "settling time" in out and "damping ratio" in out


def test_installed_command():
    proc = subprocess.run([sys.executable, "-m", "sheetfuncs.cli", "invert", "1/(s+1)", "--json"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and json.loads(proc.stdout)["f_t"] == "exp(-t)"


def test_human_output_on_a_console_that_cannot_encode_delta():
    # Windows with redirected output: an ASCII or cp1252 stdout must not crash the command
    env = dict(__import__("os").environ, PYTHONIOENCODING="ascii")
    proc = subprocess.run([sys.executable, "-m", "sheetfuncs.cli", "invert", "exp(-2s)/(s+1)+3"],
                          capture_output=True, text=True, timeout=120, env=env)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr and "f(t)" in proc.stdout
