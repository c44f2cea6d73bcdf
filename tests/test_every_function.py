"""Every cell function through a filled workbook opened in real LibreOffice
Calc, against the same function called directly from Python (whose numbers
are themselves checked against outside references in the other tests)."""
import math

import openpyxl
import pytest

from sheetfuncs import cellfuncs as cf
from sheetfuncs.fill import fill_workbook
from tests import lo

# (anchor cell, formula, python call)
CASES = [
    ("B2", '=SF_INVERSE("(s+3)/(s^2+2s+5)")', lambda: cf.inverse("(s+3)/(s^2+2s+5)")),
    ("B3", '=SF_INVERSE("1/(R C s + 1)", P2:Q3, "sympy")',
     lambda: cf.inverse("1/(R C s + 1)", [["R", 1000.0], ["C", 1e-6]], "sympy")),
    ("B4", '=SF_SHEETFORMULA("exp(-2s)/(s+1)", "A5")', lambda: cf.sheet_formula("exp(-2s)/(s+1)", "A5")),
    ("B5", '=SF_STABILITY("1/(s^2-s+4)")', lambda: cf.stability("1/(s^2-s+4)")),
    ("B6", '=SF_RESPONSE("4/(s^2+1.2s+4)", 1.5, "step")', lambda: cf.response("4/(s^2+1.2s+4)", 1.5, "step")),
    ("B7", '=SF_FIGURE("4/(s^2+1.2s+4)", "overshoot")', lambda: cf.figure("4/(s^2+1.2s+4)", "overshoot")),
    ("B8", '=SF_ODE(P5:P7, Q5:Q6, "1/s")', lambda: cf.ode([[1.0], [3.0], [2.0]], [[1.0], [0.0]], "1/s")),
    ("B9", '=SF_ODE_AT(P5:P7, Q5:Q6, 2, "1/s")',
     lambda: cf.ode_at([[1.0], [3.0], [2.0]], [[1.0], [0.0]], 2.0, "1/s")),
    ("B10", '=SF_TRANSFORM("exp(-t) sin(2t) + u(t-1)")', lambda: cf.transform("exp(-t) sin(2t) + u(t-1)")),
    ("B11", '=SF_SELFCHECK("1/(s^3+2s+5)")', lambda: cf.self_check("1/(s^3+2s+5)")),
    ("B12", '=SF_INVERSE("s.x")', lambda: cf.inverse("s.x")),
    ("D2", '=SF_PARTFRAC("(s+2)/((s+1)^2 (s^2+2s+5))")', lambda: cf.partfrac_table("(s+2)/((s+1)^2 (s^2+2s+5))")),
    ("D10", '=SF_POLES("(s+2)/(s^2+1.2s+4)")', lambda: cf.poles_table("(s+2)/(s^2+1.2s+4)")),
    ("D18", '=SF_FIGURES("4/(s^2+1.2s+4)")', lambda: cf.figures_block("4/(s^2+1.2s+4)")),
    ("I18", '=SF_RESPONSE_TABLE("1/(s+1)", 0, 2, 5, "step")',
     lambda: cf.response_table("1/(s+1)", 0.0, 2.0, 5.0, "step")),
    ("K18", '=SF_RESPONSE_TABLE("1/(s+1)", P10:P12)',
     lambda: cf.response_table("1/(s+1)", [[0.0], [0.5], [2.0]])),
    # frequency half
    ("B40", '=SF_GAIN_DB("4/(s^2+1.2s+4)", 1.5)', lambda: cf.gain_db("4/(s^2+1.2s+4)", 1.5)),
    ("B41", '=SF_PHASE_DEG("exp(-0.5s)/(s+1)", 3, "", "Hz")',
     lambda: cf.phase_deg("exp(-0.5s)/(s+1)", 3.0, "", "Hz")),
    ("B42", '=SF_FREQ_FIGURE("4/(s^2+1.2s+4)", "bandwidth")',
     lambda: cf.frequency_figure("4/(s^2+1.2s+4)", "bandwidth")),
    ("B43", '=SF_LOOP_FIGURE("2 exp(-s)/(3s+1)", "phase margin")',
     lambda: cf.loop_figure("2 exp(-s)/(3s+1)", "phase margin")),
    ("B44", '=SF_CLOSE_LOOP("2/(12s+1)", "0.5 (12 s + 1)/(12 s)", "", "closed")',
     lambda: cf.close_loop("2/(12s+1)", "0.5 (12 s + 1)/(12 s)", "", "closed")),
    ("B45", '=SF_SHAPE_FIGURE("4/(s^2+1.2s+4)", "extremum", "step")',
     lambda: cf.shape_figure("4/(s^2+1.2s+4)", "extremum", "step")),
    ("D40", '=SF_FREQ_TABLE("1/(s+1)", 0.1, 10, 3)', lambda: cf.frequency_table("1/(s+1)", 0.1, 10.0, 3.0)),
    ("J40", '=SF_FREQ_FIGURES("s/(s^2+0.2s+1)")', lambda: cf.frequency_figures("s/(s^2+0.2s+1)")),
    ("M40", '=SF_LOOP_FIGURES("3/(s(s+1)(s+2))")', lambda: cf.loop_figures("3/(s(s+1)(s+2))")),
    ("D50", '=SF_LOOP_WARNINGS("(1-2s)/((12s+1)(s+1))", "(12 s + 1)/(12 s)")',
     lambda: cf.loop_warnings("(1-2s)/((12s+1)(s+1))", "(12 s + 1)/(12 s)")),
    ("J55", '=SF_SHAPE_FIGURES("(0.225 s + 3)/(45 s^2 + 600 s + 180000)")',
     lambda: cf.shape_figures("(0.225 s + 3)/(45 s^2 + 600 s + 180000)")),
]


def _cell(ref):
    col = "".join(c for c in ref if c.isalpha())
    return int(ref[len(col):]) - 1, openpyxl.utils.column_index_from_string(col) - 1


def _same(shown: str, expected) -> bool:
    if expected in ("", None):
        return shown == ""
    if isinstance(expected, (int, float)) and not isinstance(expected, bool):
        return math.isclose(float(shown), expected, rel_tol=1e-13, abs_tol=1e-300)
    return shown == str(expected)


def test_every_function_in_a_filled_workbook(tmp_path):
    assert {f.split("(")[0][1:] for _, f, _ in CASES} == set(cf.FUNCTIONS)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "All"
    for ref, formula, _ in CASES:
        ws[ref] = formula
    ws["P2"], ws["Q2"], ws["P3"], ws["Q3"] = "R", 1000, "C", 1e-6
    for i, v in enumerate([1, 3, 2], start=5):
        ws[f"P{i}"] = v
    ws["Q5"], ws["Q6"] = 1, 0
    for i, v in enumerate([0, 0.5, 2], start=10):
        ws[f"P{i}"] = v
    wb.save(tmp_path / "all.xlsx")
    report = fill_workbook(tmp_path / "all.xlsx", tmp_path / "all_out.xlsx", use_cache=False)
    assert report.errors == 1                      # the deliberate B12
    lo.require_soffice()
    rows = lo.to_csv_all_sheets(tmp_path / "all_out.xlsx", tmp_path)["All"]
    grid = {(r, c): v for r, row in enumerate(rows) for c, v in enumerate(row)}
    for ref, formula, call in CASES:
        expected = call()
        r0, c0 = _cell(ref)
        block = expected if isinstance(expected, list) else [[expected]]
        for i, row in enumerate(block):
            for j, value in enumerate(row):
                shown = grid.get((r0 + i, c0 + j), "")
                assert _same(shown, value), f"{formula} at +{i},+{j}: LibreOffice shows {shown!r}, Python gives {value!r}"
