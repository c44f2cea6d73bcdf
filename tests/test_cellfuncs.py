"""The cell functions with Excel-shaped arguments (floats, None, 2-D lists).
Numbers are checked against scipy/sympy computing the same thing."""
import math

import numpy as np
import pytest
import sympy as sp
from scipy import signal

from sheetfuncs import cellfuncs as cf
from sheetfuncs import cells
from sheetfuncs.errors import ParameterError

MARK = cf.ERROR_MARK


def test_inverse_forms():
    t = sp.Symbol("t", real=True)
    assert sp.simplify(sp.sympify(cf.inverse("(s+3)/(s^2+2s+5)", None, "sympy"), locals={"t": t})
                       - sp.exp(-t) * (sp.cos(2 * t) + sp.sin(2 * t))) == 0
    assert "\\sin" in cf.inverse("(s+3)/(s^2+2s+5)", None, "latex")
    assert cf.inverse("1/(s+1)", None, "bogus").startswith(MARK)


def test_params_range_and_units():
    # RC low-pass impulse response (1/RC) e^{-t/RC}
    txt = cf.inverse("1/(R C s + 1)", [["R [ohm]", 1000.0], ["C [F]", 1e-6], [None, None]], "sympy")
    t = sp.Symbol("t", real=True)
    assert sp.simplify(sp.sympify(txt, locals={"t": t}) - 1000 * sp.exp(-1000 * t)) == 0
    # the same network with prefixed units in the labels (SI brochure prefixes k, u)
    txt = cf.inverse("1/(R C s + 1)", [["R [kohm]", 1.0], ["C [uF]", 1.0]], "sympy")
    assert sp.simplify(sp.sympify(txt, locals={"t": t}) - 1000 * sp.exp(-1000 * t)) == 0


def test_params_units_convert_with_pint():
    import pint
    ureg = pint.UnitRegistry()
    rows = [["m [g]", 250.0], ["t0 [ms]", 5.0], ["k [kN/m]", 18.0], ["c [N s/m]", 3.0], ["L [mH]", 10.0],
            ["d [inch]", 2.0]]
    got = cf.params_of(rows)
    for (label, v), name in zip(rows, ("m", "t0", "k", "c", "L", "d")):
        unit = label.split("[")[1].rstrip("]")
        assert float(got[name]) == pytest.approx((v * ureg(unit)).to_base_units().magnitude, rel=1e-14)
    assert cf.params_of([["T [degC]", 20.0]])["T"] == 20      # read as a temperature change: 20 K
    for bad in ([["R [foo]", 1.0]], [["R (kohm)", 1.0]], [["R", 1.0], ["R", 2.0]], [["R [kohm]", "2*pi"]]):
        with pytest.raises(ParameterError):
            cf.params_of(bad)
    assert cf.inverse("1/(R s+1)", [["R [blorb]", 1.0]]).startswith(MARK)


def test_params_prefixed_values():
    # SI brochure (BIPM), SI prefixes: k 10^3, n 10^-9, u (micro) 10^-6
    f = cf.response("1/(R C s + 1)", 0.0, "impulse", [["R", "10k"], ["C", "22n"]])
    assert f == pytest.approx(1 / (10e3 * 22e-9), rel=1e-12)
    f = cf.response("1/(R C s + 1)", 0.0, "impulse", [["R [kohm]", "4.7"], ["C", "1.5u"]])
    assert f == pytest.approx(1 / (4.7e3 * 1.5e-6), rel=1e-12)
    assert cf.response("1/(R C s + 1)", 0.0, "impulse", [["R", "10K"], ["C", "22n"]]).startswith(MARK)


def test_params_header_row_and_sweeps():
    assert cf.params_of([["zeta", "wn"], [0.5, 2.0]]) == {"zeta": 0.5, "wn": 2.0}
    sweep = [["zeta", "wn [kHz]"], [0.1, 1.0], [0.2, 1.0], [0.7, 1.0]]     # a fill-down range $A$1:$B4
    got = cf.params_of(sweep)
    assert got["zeta"] == 0.7 and float(got["wn"]) == 1000.0
    assert cf.params_of([["name", "value"], ["R", 5.0]]) == {"R": 5.0}
    assert cf.params_of([["R", 5.0, "C", 2.0]]) == {"R": 5.0, "C": 2.0}
    with pytest.raises(ParameterError):
        cf.params_of([["zeta", "wn"], [None, None]])             # the values row is empty
    with pytest.raises(ParameterError):
        cf.params_of([["zeta", None], [0.5, 3.0]])               # a value with no name above it
    # overshoot of a damping sweep, each row passing its own row: 100 e^{-zeta pi/sqrt(1-zeta^2)}
    for z in (0.1, 0.3, 0.5):
        os_ = cf.figure("wn^2/(s^2 + 2 zeta wn s + wn^2)", "overshoot", "step", [["zeta", "wn"], [z, 3.0]])
        assert os_ == pytest.approx(100 * math.exp(-z * math.pi / math.sqrt(1 - z * z)), rel=1e-9)


def test_defined_names_context():
    with cf.name_values({"tau": 2.0, "R1": 5.0, "bad name": 1.0}):
        assert cf.response("1/(tau s + 1)", 0.0, "impulse") == 0.5
    assert "values for tau" in cf.response("1/(tau s + 1)", 0.0)


def test_response_scalar_matches_scipy_step():
    t = np.linspace(0, 6, 13)
    _, ref = signal.step(signal.lti([4.0], [1.0, 1.2, 4.0]), T=t)
    ours = [cf.response("4/(s^2+1.2s+4)", x, "step") for x in t]
    assert np.max(np.abs(np.array(ours) - ref)) < 1e-6


def test_response_table_shapes():
    rows = cf.response_table("1/(s+1)", 0.0, 2.0, 5.0, "step")
    assert rows[0] == ["t [s]", "y, step response"] and len(rows) == 6
    assert rows[-1][1] == pytest.approx(1 - math.exp(-2))              # 1 - e^-t (textbook pair)
    rows = cf.response_table("1/(s+1)", [[0.0], [1.0], [None], [3.0]])
    assert rows[0][1] == "y, impulse response"                          # says which input it answers
    assert [r[0] for r in rows[1:]] == [0.0, 1.0, 3.0]
    assert cf.response_table("1/(s+1)", 0.0, 1.0, 2.0, "5/s")[0][1] == "y, response to U(s) = 5/s"


def test_partfrac_table_matches_scipy_residue():
    num, den = [2, 0, 0, 1], [1, 4, 10, 12, 5]                    # (2s^3+1)/((s+1)^2 (s^2+2s+5))
    r, p, _k = signal.residue(num, den)
    rows = cf.partfrac_table("(2s^3+1)/((s+1)^2 (s^2+2s+5))")
    assert rows[0] == cf.PARTFRAC_HEADS
    assert [row[2] for row in rows[1:]] == ["real pole", "real pole", "complex pair"]   # one row per pair
    for row in rows[1:]:
        pole = row[3] if isinstance(row[3], float) else complex(row[3].replace("i", "j"))
        coef = row[5] if isinstance(row[5], float) else complex(row[5].replace("i", "j"))
        # scipy's residue lists a repeated pole once per power, in increasing power
        idx = [i for i, q in enumerate(p) if abs(q - pole) < 1e-6][row[4] - 1]
        assert coef == pytest.approx(complex(r[idx]), abs=1e-6), row
    assert isinstance(rows[1][3], float) and isinstance(rows[1][4], int) and isinstance(rows[1][5], float)
    assert rows[3][3] == "-1+2i"                                       # the spreadsheet's complex text
    # the pair's f(t) term is twice the real part of coefficient e^{pole t} (both conjugate terms)
    c = complex(rows[3][5].replace("i", "j"))
    f = sp.lambdify(sp.Symbol("t"), sp.sympify(rows[3][1].replace("^", "**")))
    assert f(0.7) == pytest.approx(2 * (c * np.exp((-1 + 2j) * 0.7)).real, rel=1e-5)


def test_partfrac_polynomial_part():
    rows = cf.partfrac_table("(s^2+3s+1)/(s+1)")                       # = s + 2 - 1/(s+1), by hand
    assert [r[2] for r in rows[1:]] == ["polynomial part", "polynomial part", "real pole"]
    assert [(r[4], r[5]) for r in rows[1:3]] == [(0, 2.0), (1, 1.0)] and rows[1][3] is None
    assert rows[3][5] == -1.0


def test_poles_table_one_row_per_mode():
    zeta, wn = 0.3, 2.0                                # s^2 + 2 zeta wn s + wn^2 = s^2 + 1.2 s + 4
    rows = cf.poles_table("(s+2)/((s^2+1.2s+4)(s+5))")
    assert rows[0] == cf.POLES_HEADS
    pair, real = rows[1], rows[2]                                       # slowest mode first
    wd = wn * math.sqrt(1 - zeta ** 2)                                  # textbook second-order relations
    assert pair[1] == "decaying oscillation" and pair[9] == 2
    assert pair[2] == pytest.approx(-zeta * wn) and pair[3] == pytest.approx(wd)
    assert pair[4] == pytest.approx(zeta) and pair[5] == pytest.approx(wn)
    assert pair[6] == pytest.approx(2 * math.pi / wd) and pair[7] == pytest.approx(1 / (zeta * wn))
    assert pair[8] == pytest.approx(math.log(50) / (zeta * wn))         # envelope to 2 %: tau ln 50
    assert real[1] == "decay" and real[2] == pytest.approx(-5) and real[6] is None and real[9] == 1
    assert rows[3][0] == "zero 1" and rows[3][2] == pytest.approx(-2) and rows[3][4] is None
    assert rows[-1][:3] == ["stability", "stable", "all poles in the open left half-plane"]
    assert all(v != "" and v != " " for row in rows for v in row)      # missing is None, never text


def test_poles_table_integrator_and_repeated():
    rows = cf.poles_table("1/(s (s+1)^2)")
    assert rows[1][1] == "integrator (pole at 0)" and rows[1][7] is None
    assert rows[2][1] == "decay (repeated x2)" and rows[2][9] == 2


def test_figures_single_and_block():
    zeta = 0.3
    os_ = 100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2))     # common practice formula
    assert cf.figure("4/(s^2+1.2s+4)", "overshoot") == pytest.approx(os_, rel=1e-9)
    block = cf.figures_block("4/(s^2+1.2s+4)")
    assert block[0] == ["step response", "value", "unit", "note"]
    labels = [r[0] for r in block]
    assert "settling time (2% band)" in labels and all(len(r) == 4 for r in block)
    over = next(r for r in block if r[0] == "overshoot")
    assert over[1] == pytest.approx(os_, rel=1e-9) and over[2] == "%"
    assert cf.figure("1/(s-1)", "final value").startswith(MARK)
    assert cf.figure("1/(s+1)", "nonsense").startswith(MARK)


def test_missing_figures_are_empty_with_a_reason():
    block = cf.figures_block("1/((s+1)(s+3))")                          # overdamped: no peak
    peak = next(r for r in block if r[0] == "peak time")
    assert peak[1] is None and "no peak" in peak[3]
    assert cf.figure("1/((s+1)(s+3))", "peak time").startswith("none: no peak")
    imp = cf.figures_block("1/(s+1)", "impulse")
    assert imp[0][0] == "impulse response" and "settling" not in " ".join(r[0] for r in imp)
    assert all(v != "" and v != " " for row in block + imp for v in row)


def test_figure_output_units():
    # first-order settling to 2 %: tau ln 50 (common practice), tau = R C from labelled inputs
    p = [["R [kohm]", 10.0], ["C [nF]", 22.0]]
    tau = 10e3 * 22e-9
    assert cf.figure("1/(R C s + 1)", "settling time", "step", p) == pytest.approx(tau * math.log(50), rel=1e-9)
    assert cf.figure("1/(R C s + 1)", "settling time [ms]", "step", p) == pytest.approx(0.8606, abs=1e-4)
    assert cf.figure("1/(R C s + 1)", "settling time [us]", "step", p) == pytest.approx(860.645, rel=1e-5)
    assert cf.figure("4/(s^2+1.2s+4)", "overshoot [%]") == pytest.approx(cf.figure("4/(s^2+1.2s+4)", "overshoot"))
    assert cf.figure("2/(s+1)", "final value [mV]") == pytest.approx(2000.0)
    # slowest mode of a mount m x'' + c x' + k x: wn = sqrt(k/m), zeta = c/(2 sqrt(k m)) (textbook),
    # f = wn/(2 pi) in Hz
    m, c, k = 45.0, 600.0, 180000.0
    H, P = "1/(m s^2 + c s + k)", [["m", m], ["c", c], ["k [kN/m]", k / 1000]]
    wn = math.sqrt(k / m)
    assert cf.figure(H, "natural frequency", None, P) == pytest.approx(wn, rel=1e-12)
    assert cf.figure(H, "natural frequency [Hz]", None, P) == pytest.approx(wn / (2 * math.pi), rel=1e-12)
    assert cf.figure(H, "damping ratio", None, P) == pytest.approx(c / (2 * math.sqrt(k * m)), rel=1e-12)
    assert cf.figure(H, "time constant [ms]", None, P) == pytest.approx(1e3 * 2 * m / c, rel=1e-12)
    assert cf.figure("1/(s (s+1))", "time constant").startswith("none: the slowest mode")
    assert cf.figure("1/(s+1)", "settling time [kg]").startswith(MARK)
    assert cf.figure("1/(s+1)", "stability [s]").startswith(MARK)
    assert cf.figure("1/(s+1)", "settling time [blorb]").startswith(MARK)


def test_ode_functions():
    # x'' + 0.4x' + 25x = 0, x(0) = 0.01: compare with scipy's integrator
    from scipy.integrate import solve_ivp
    ref = solve_ivp(lambda t, y: [y[1], -0.4 * y[1] - 25 * y[0]], (0, 2), [0.01, 0],
                    t_eval=[2.0], rtol=1e-11, atol=1e-14).y[0][0]
    assert cf.ode_at([[1.0], [0.4], [25.0]], [[0.01], [0.0]], 2.0) == pytest.approx(ref, abs=1e-10)
    assert "exp" in cf.ode([[1.0], [0.4], [25.0]], [[0.01], [0.0]])
    assert "s" in cf.ode([[1.0, 0.4, 25.0]], [[0.01, 0.0]], None, None, "Y(s)")


def test_transform_and_selfcheck():
    assert sp.simplify(sp.sympify(cf.transform("exp(-t) sin(2t)")) - 2 / ((sp.Symbol("s") + 1) ** 2 + 4)) == 0
    assert cf.self_check("1/(s^3+2s+5)") < 1e-12


@pytest.mark.parametrize("name", sorted(cf.FUNCTIONS))
def test_every_function_handles_bad_and_empty_input(name):
    fn = cf.FUNCTIONS[name]
    assert fn(None, None, None) in ("", ) or str(fn(None, None, None)).startswith(MARK)
    out = fn("s.__class__", 1.0, 1.0)
    assert isinstance(out, str) and out.startswith(MARK)
    out = fn(True, [[1, 2, 3]], "x")
    assert isinstance(out, str) and out.startswith(MARK)


def test_huge_degree_refused_quickly():
    import time
    t0 = time.perf_counter()
    assert cf.inverse("1/(s+1)^5000").startswith(MARK)
    assert time.perf_counter() - t0 < 1.0


def test_xlwings_module_exposes_every_function():
    assert sorted(cells.CELL_FUNCTIONS) == sorted(cf.FUNCTIONS)
    assert cells.SF_RESPONSE("1/(s+1)", 0.0, "impulse") == 1.0
    assert cells.SF_FIGURE("3/(0.8s+1)", "final value") == pytest.approx(3.0)


def test_sweep_in_a_filled_workbook(tmp_path):
    """A damping sweep as an engineer lays it out: a header row of labels, one case per row, each
    row's formula passing the range from the header down to its own row ($A$3:$B4, $A$3:$B5 ...).
    Overshoot against the textbook 100 exp(-zeta pi / sqrt(1 - zeta^2))."""
    import openpyxl
    from sheetfuncs.fill import fill_workbook
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["A1"] = "wn^2/(s^2 + 2 zeta wn s + wn^2)"
    ws["A3"], ws["B3"], ws["C3"] = "zeta", "wn [krad/s]", "overshoot [%]"
    zetas = [0.1, 0.2, 0.4, 0.6, 0.8]
    for i, z in enumerate(zetas, start=4):
        ws[f"A{i}"], ws[f"B{i}"] = z, 1.5
        ws[f"C{i}"] = f'=SF_FIGURE($A$1,"overshoot","step",$A$3:$B{i})'
        ws[f"D{i}"] = f'=SF_FIGURE($A$1,"peak time [ms]","step",$A$3:$B{i})'
    wb.save(tmp_path / "sweep.xlsx")
    report = fill_workbook(tmp_path / "sweep.xlsx", tmp_path / "out.xlsx", use_cache=False)
    assert report.errors == 0, report.error_cells
    out = openpyxl.load_workbook(tmp_path / "out.xlsx", data_only=True).active
    for i, z in enumerate(zetas, start=4):
        assert out[f"C{i}"].value == pytest.approx(100 * math.exp(-z * math.pi / math.sqrt(1 - z * z)), rel=1e-9)
        wd = 1.5e3 * math.sqrt(1 - z * z)                       # wn = 1.5 krad/s
        assert out[f"D{i}"].value == pytest.approx(1e3 * math.pi / wd, rel=1e-9)   # peak time pi/omega_d


def test_complex_texts_are_read_by_the_spreadsheet(tmp_path):
    """The pole and coefficient texts of a complex pair, read back by LibreOffice's own IMREAL,
    IMAGINARY and IMABS (the spreadsheet's complex-number functions); the pole of
    (s+3)/(s^2+2s+5) is -1 + 2i (quadratic formula)."""
    import openpyxl
    from sheetfuncs.fill import fill_workbook
    from tests import lo
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["A1"] = '=SF_PARTFRAC("(s+3)/(s^2+2s+5)")'
    ws["A5"], ws["B5"], ws["C5"] = "=IMREAL(D2)", "=IMAGINARY(D2)", "=IMABS(D2)"
    wb.save(tmp_path / "c.xlsx")
    assert fill_workbook(tmp_path / "c.xlsx", tmp_path / "out.xlsx", use_cache=False).errors == 0
    lo.require_soffice()
    rows = lo.to_csv_all_sheets(tmp_path / "out.xlsx", tmp_path)
    row = next(iter(rows.values()))[4]
    assert float(row[0]) == pytest.approx(-1) and float(row[1]) == pytest.approx(2)
    assert float(row[2]) == pytest.approx(math.sqrt(5))
