"""Tests for sheetfuncs.printing.

Expected texts are written by hand from the printing rules.  Numeric checks
are independent: formulas are computed by the real LibreOffice Calc and
compared with SymPy/mpmath values of the same expression.
"""
from __future__ import annotations

import csv
import math
import os
import shutil
import subprocess

import pytest
import sympy as sp

from sheetfuncs._types import T as t, param_symbol
from sheetfuncs.errors import LimitError, ParameterError, UnsupportedExpressionError
from sheetfuncs.printing import (round_numbers, to_display, to_excel, to_latex,
                                 to_sympy_text)

H, D = sp.Heaviside, sp.DiracDelta
R = sp.Rational
tau, a, k = param_symbol("tau"), param_symbol("a"), param_symbol("k")


# ----------------------------------------------------------------- round_numbers

@pytest.mark.parametrize("expr, digits, expected", [
    (R(1, 3), 4, sp.Float("0.3333")),
    (sp.pi, 5, sp.Float("3.1416")),
    (sp.Float(123456.789), 6, sp.Float("123457")),
    (sp.Float(1.23456e-8), 3, sp.Float("1.23e-8")),
    (-R(2, 3), 3, sp.Float("-0.667")),
    (3 * sp.sqrt(2) * t, 6, sp.Float("4.24264") * t),     # combined, then rounded
    (sp.sqrt(t) / 3, 3, sp.Float("0.333") * sp.sqrt(t)),  # exponent 1/2 kept exact
    (2 * t + 7, 3, 2 * t + 7),                            # whole numbers kept
    (D(t, 2) / 3, 2, sp.Float("0.33") * D(t, 2)),         # derivative order kept
    (H(t - R(1, 3)), 3, H(t - sp.Float("0.333"))),
])
def test_round_numbers(expr, digits, expected):
    assert round_numbers(expr, digits) == expected


# ----------------------------------------------------------------- SymPy text

@pytest.mark.parametrize("expr, digits, expected", [
    (2 * sp.exp(-t) * sp.sin(3 * t), None, "2*exp(-t)*sin(3*t)"),
    (H(t - 2), None, "Heaviside(t - 2)"),
    (D(t), None, "DiracDelta(t)"),
    (D(t, 1), None, "DiracDelta(t, 1)"),
    (sp.exp(-t / 2) / 3, None, "exp(-t/2)/3"),
    (sp.Float(0.5) * t, None, "0.5*t"),
    (sp.Float(1.5e-7) * t, None, "1.5e-07*t"),
    (sp.Float(1 / 3) * t, None, "Float('0.3333333333333333', 15)*t"),
    (sp.exp(-t / 2) / 3, 4, "0.3333*exp(-0.5*t)"),
    (3 * sp.sqrt(2) * t + sp.pi, 4, "4.243*t + 3.142"),
    (t ** R(-1, 2), 4, "1/sqrt(t)"),
    (2 * t * H(t - 2), 3, "2*t*Heaviside(t - 2)"),
    (sp.Symbol("lambda", positive=True) * t, None, "Symbol('lambda', positive=True)*t"),
])
def test_sympy_text_table(expr, digits, expected):
    assert to_sympy_text(expr, digits) == expected


ROUND_TRIP = [
    2 * sp.exp(-t) * sp.sin(3 * t) - H(t - 2) / 2,
    sp.exp(-t / tau) * sp.cos(sp.sqrt(3) * t / 2) - sp.sqrt(3) / 3 * sp.sinh(t),
    3 * D(t) + D(t, 1) - 2 * D(t - a, 2),
    H(t - a) * (1 - sp.exp(-(t - a) / tau)),
    t ** R(-1, 2) / sp.sqrt(sp.pi) + sp.erfc(1 / (2 * sp.sqrt(t))) + sp.erf(k * t),
    sp.gamma(R(1, 3)) * t ** R(-2, 3) + sp.log(1 + t) + sp.tanh(t) + sp.cosh(t) * sp.E,
    sp.Float(0.1) * t + sp.Float(1 / 3) * sp.exp(-sp.Float(2.5e-9) * t),
    sp.Piecewise((t, t < 1), (2 - t, t < 2), (0, True)),
    sp.Symbol("lambda", positive=True) * sp.Symbol("beta", positive=True) * t
    + sp.Symbol("E", positive=True),
]


@pytest.mark.parametrize("expr", ROUND_TRIP)
def test_sympy_text_round_trip(expr):
    text = to_sympy_text(expr)
    symbols = {s.name: s for s in expr.free_symbols}
    assert sp.sympify(text, locals=symbols) == expr


def test_sympy_text_digits_is_close_to_exact():
    """Rounded text read back agrees with the exact expression to the digits asked."""
    expr = ROUND_TRIP[1].subs(tau, R(7, 3)) + sp.pi * sp.exp(-t / 3)
    text = to_sympy_text(expr, 8)
    back = sp.sympify(text, locals={"t": t})
    for tv in (0.3, 1.7, 4.0):
        exact = sp.N(expr.subs(t, tv), 30)
        assert abs(float(back.subs(t, tv)) - float(exact)) <= 1e-7 * max(1.0, abs(float(exact)))


# ----------------------------------------------------------------- display

@pytest.mark.parametrize("expr, digits, expected", [
    (2 * sp.exp(-t) * sp.sin(3 * t) - H(t - 2) / 2, 6,
     "-0.5*u(t - 2) + 2*exp(-t)*sin(3*t)"),
    (D(t) + 2 * D(t, 1) + D(t, 2) + D(t, 3), 6, "δ(t) + 2*δ'(t) + δ''(t) + δ^(3)(t)"),
    (sp.exp(-t / 3) / 3, 3, "0.333*exp(-0.333*t)"),
    (sp.sqrt(2) * t ** 2, 6, "1.41421*t^2"),
    (t ** R(3, 2), 6, "t^(3/2)"),
    (1 / sp.sqrt(t), 6, "1/sqrt(t)"),
    (sp.Float(1.5e-7) * t + sp.Float(2.5e20), 6, "1.5e-7*t + 2.5e20"),
    (sp.Float(0.5) * t, 6, "0.5*t"),
    (sp.exp(-t / tau), 6, "exp(-t/tau)"),
])
def test_display_table(expr, digits, expected):
    assert to_display(expr, digits) == expected


# ----------------------------------------------------------------- LaTeX

@pytest.mark.parametrize("expr, digits, expected", [
    (H(t - 2), None, r"u\left(t - 2\right)"),
    (D(t), None, r"\delta\left(t\right)"),
    (D(t, 1), None, r"\delta'\left(t\right)"),
    (D(t, 3), None, r"\delta^{(3)}\left(t\right)"),
    (3 * H(t - 2), None, r"3 u\left(t - 2\right)"),
    (sp.exp(-t) / 3, 3, r"0.333 e^{- t}"),
    (sp.exp(-t / tau), None, r"e^{- \frac{t}{\tau}}"),
])
def test_latex_table(expr, digits, expected):
    assert to_latex(expr, digits) == expected


# ----------------------------------------------------------------- Excel text

@pytest.mark.parametrize("expr, kwargs, expected", [
    (2 * sp.exp(-t) * sp.sin(3 * t), {}, "=IF(A1<0,0,2*EXP(-A1)*SIN(3*A1))"),
    (sp.exp(-t), {"causal": False}, "=EXP(-A1)"),
    (-t ** 2 * sp.exp(-t), {"causal": False}, "=-(A1^2)*EXP(-A1)"),
    (1 - t ** 2, {"causal": False}, "=1-A1^2"),
    (-(t - 1) ** 2, {"causal": False}, "=-((A1-1)^2)"),
    (sp.exp(-t ** 2), {"causal": False}, "=EXP(-(A1^2))"),
    (sp.sqrt(t), {"cell": "$B$3"}, "=IF($B$3<0,0,SQRT($B$3))"),
    (t ** R(-1, 2), {"causal": False}, "=1/SQRT(A1)"),
    (t ** R(3, 2), {"causal": False}, "=SQRT(A1)^3"),
    (2 ** (-t), {"causal": False}, "=2^(-A1)"),
    (H(t - 2) * sp.exp(-(t - 2)), {"causal": False}, "=IF(A1>=2,EXP(2-A1),0)"),
    (H(t - 2), {"causal": False}, "=IF(A1>=2,1,0)"),
    (H(t), {}, "=IF(A1<0,0,1)"),
    (sp.exp(-t) - H(t - 2) / 2, {"causal": False}, "=EXP(-A1)-IF(A1>=2,0.5,0)"),
    (3 * D(t) + D(t, 1) + sp.exp(-t), {"causal": False}, "=EXP(-A1)"),
    (D(t), {}, "=0"),
    (sp.pi * t + sp.E, {"causal": False}, "=PI()*A1+EXP(1)"),
    (t / 4, {"causal": False}, "=0.25*A1"),
    (t / 3, {"causal": False, "digits": 6}, "=0.333333*A1"),
    (sp.Float(1.5e-7) * t, {"causal": False}, "=1.5E-07*A1"),
    (sp.exp(-t / tau), {"causal": False, "cell": "Sheet2!C5"}, "=EXP(-Sheet2!C5/tau)"),
    (sp.exp(-t / tau), {"causal": False, "names": {"tau": "$D$1"}}, "=EXP(-A1/$D$1)"),
    (sp.log(1 + t) / t, {"causal": False}, "=LN(A1+1)/A1"),
    (sp.Piecewise((t, t < 1), (0, True)), {"causal": False}, "=IF(A1<1,A1,0)"),
])
def test_excel_table(expr, kwargs, expected):
    assert to_excel(expr, **kwargs) == expected


@pytest.mark.parametrize("expr, words", [
    (sp.exp(sp.I * t), "imaginary unit"),
    (sp.besselj(0, t), "besselj()"),
    (sp.Function("f")(t), "f()"),
    (sp.gamma(t), "gamma()"),
    (sp.oo * t, "oo"),
    (sp.Piecewise((t, t < 1)), "otherwise"),
    (param_symbol("R1") * t, "R1"),          # would read as cell R1
    (param_symbol("tau1") * t, "tau1"),      # column TAU, row 1
])
def test_excel_unsupported(expr, words):
    with pytest.raises(UnsupportedExpressionError) as info:
        to_excel(expr)
    assert words in str(info.value)


@pytest.mark.parametrize("kwargs", [
    {"cell": "A1+1"}, {"cell": "A0"}, {"cell": ""}, {"cell": "R1C1"}, {"digits": 0},
    {"digits": 18}, {"digits": True}, {"causal": "yes"}, {"names": {"tau": "1+1"}},
    {"names": {"t": "B1"}},
])
def test_excel_bad_settings(kwargs):
    with pytest.raises(ParameterError):
        to_excel(sp.exp(-t / tau), **kwargs)


def test_excel_time_symbol_without_assumptions_and_limits():
    plain_t = sp.Symbol("t")
    assert to_excel(sp.sin(plain_t), causal=False) == "=SIN(A1)"
    assert to_excel(H(2 - t), causal=False) == "=IF(A1<=2,1,0)"
    with pytest.raises(LimitError):
        to_excel(sp.Add(*[sp.exp(-n * t) for n in range(1, 1000)]))
    with pytest.raises(ParameterError):
        to_excel(t, names=["tau"])


def test_unknown_settings_rejected():
    with pytest.raises(TypeError):
        to_excel(t, colour="red")
    with pytest.raises(TypeError):
        to_display(t, precision=3)
    with pytest.raises(TypeError):
        to_excel("exp(-t)")                 # text is never parsed here
    with pytest.raises(ParameterError):
        to_display(t, digits=0)


# ----------------------------------------------------------------- LibreOffice check

# (expression, t values, to_excel keywords, parameter values, tolerance)
SAMPLES = [
    (2 * sp.exp(-t) * sp.sin(3 * t), [-1.0, 0.0, 0.37, 2.5], {}, {}, 1e-9),
    (sp.exp(-t / 2) * sp.cos(sp.sqrt(3) * t / 2) - sp.sqrt(3) / 3 * sp.exp(-t / 2)
     * sp.sin(sp.sqrt(3) * t / 2), [0.0, 1.1, 6.0], {}, {}, 1e-9),
    (-t ** 2 * sp.exp(-t), [-1.5, 0.8, 3.0], {"causal": False}, {}, 1e-9),
    (1 - t ** 2 - (t - 1) ** 3, [-2.0, 0.5, 4.0], {"causal": False}, {}, 1e-9),
    (sp.exp(-t ** 2) + 2 ** (-t), [-0.7, 1.3], {"causal": False}, {}, 1e-9),
    (1 - sp.exp(-t / tau), [0.0, 0.4, 5.0], {"names": {"tau": "C{row}"}}, {tau: 1.7}, 1e-9),
    (H(t - 2) * (1 - sp.exp(-(t - 2))) - H(t - 3) / 3, [1.0, 2.5, 3.5], {}, {}, 1e-9),
    (H(t - a) * sp.exp(-(t - a) / tau), [0.5, 1.6], {"names": {"tau": "C{row}"}},
     {tau: 0.9, a: 1.25}, 1e-9),                           # a is a defined name
    (3 * D(t) + D(t, 1) + sp.exp(-t), [0.0, 0.6], {}, {}, 1e-9),
    (sp.sqrt(t) + t ** R(3, 2) + 1 / sp.sqrt(sp.pi * t) - t ** R(-3, 2),
     [0.25, 2.0], {}, {}, 1e-9),
    (sp.erf(sp.sqrt(t)) + sp.erfc(1 / (2 * sp.sqrt(t))) + sp.erf(t - 2), [0.3, 1.0, 3.0],
     {}, {}, 1e-9),
    (sp.sinh(t) / 7 + sp.cosh(t / 3) - sp.tanh(2 * t) + sp.tan(t / 5), [0.0, 1.4],
     {}, {}, 1e-9),
    (sp.log(1 + t) / (t + 1) + sp.Abs(t - 1) + sp.Max(t, 2) - sp.Min(t, 1), [0.2, 1.5, 3.0],
     {}, {}, 1e-9),
    (sp.pi * t + sp.E - sp.gamma(R(1, 3)) * t ** 2, [0.5, 2.0], {}, {}, 1e-9),
    (sp.Float(1.5e-7) * t ** 3 + sp.Float(2.5e4) * sp.exp(-sp.Float(3e3) * t),
     [0.0001, 0.002], {}, {}, 1e-9),
    (sp.Piecewise((t, t < 1), (2 - t, t < 2), (0, True)), [0.5, 1.5, 2.5], {}, {}, 1e-9),
    (sp.exp(-t / 3) / 3, [0.0, 2.0], {"digits": 6}, {}, 1e-5),
    (t * sp.exp(-t), [0.5, 1.5], {"cell": "$A${row}"}, {}, 1e-9),
    (sp.cos(t) ** 2, [0.5, 1.5], {"cell": "Sheet2!B{row}"}, {}, 1e-9),
]


def _reference(expr, tv, params, causal):
    """SymPy value of the expression: impulses dropped, 0 before t = 0 if causal."""
    if causal and tv < 0:
        return 0.0
    smooth = expr.replace(lambda e: isinstance(e, sp.DiracDelta), lambda e: sp.S.Zero)
    return float(sp.N(smooth.subs(params).subs(t, sp.Float(tv, 30)), 30))


def _soffice():
    exe = shutil.which("soffice") or shutil.which("libreoffice")
    if exe is None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail("LibreOffice (soffice) is required when CI=true")
        pytest.skip("LibreOffice (soffice) is not installed")
    return exe


def test_excel_formulas_in_libreoffice(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    from openpyxl.workbook.defined_name import DefinedName
    exe = _soffice()

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Main"
    other = wb.create_sheet("Sheet2")
    ws["E1"] = 1.25                                       # value of defined name "a"
    wb.defined_names["a"] = DefinedName("a", attr_text="Main!$E$1")
    rows = []                                             # (row, expected, formula)
    row = 1
    for expr, times, kwargs, params, tol in SAMPLES:
        for tv in times:
            kw = {key: (val.format(row=row) if isinstance(val, str) else val)
                  for key, val in kwargs.items() if key != "names"}
            kw.setdefault("cell", f"A{row}")
            if "names" in kwargs:
                kw["names"] = {n: ref.format(row=row) for n, ref in kwargs["names"].items()}
            if "Sheet2" in kw["cell"]:
                other[kw["cell"].split("!")[1]] = tv
            ws[f"A{row}"] = tv
            for sym, val in params.items():
                if sym is tau:
                    ws[f"C{row}"] = val
            formula = to_excel(expr, **kw)
            ws[f"B{row}"] = formula
            expected = _reference(expr, tv, params, kw.get("causal", True))
            rows.append((row, expected, tol, formula, tv))
            row += 1
    book = tmp_path / "book.xlsx"
    wb.save(book)

    out = tmp_path / "out"
    proc = subprocess.run(
        [exe, "--headless", f"-env:UserInstallation=file://{tmp_path}/profile",
         "--convert-to", "csv", "--outdir", str(out), str(book)],
        capture_output=True, text=True, timeout=120)
    result = out / "book.csv"
    assert result.exists(), f"LibreOffice wrote no CSV: {proc.stdout} {proc.stderr}"
    with open(result, newline="") as fh:
        table = list(csv.reader(fh))

    bad = []
    for r, expected, tol, formula, tv in rows:
        text = table[r - 1][1]
        try:
            got = float(text)
        except ValueError:
            bad.append(f"row {r} t={tv}: {formula} -> {text!r}")
            continue
        if not math.isclose(got, expected, rel_tol=tol, abs_tol=1e-12):
            bad.append(f"row {r} t={tv}: {formula} -> {got}, SymPy {expected}")
    assert not bad, "\n".join(bad)
    assert len(rows) > 40
