"""Spreadsheet formulas printed from the modal terms, recalculated by the real
LibreOffice Calc (headless, through a CSV export of a book openpyxl writes) and
compared with the engine's own error-controlled evaluator at the same times --
the spreadsheet program is the independent evaluator of the formula text."""
import numpy as np
import pytest

import sheetfuncs as sf
from sheetfuncs.printing import display_result
from tests import lo

CASES = ["(s+3)/((s+1)^2 (s^2+2s+5))", "exp(-0.5s)/(s(2s+1))", "1/(s^3 (s+1))",
         "5 exp(-4s)/(2(12 s+1))", "1/(s(s^2+620s+4000))", "(s+2)/(s^3+3s^2+4s+5)",
         "(1-exp(-2s))/(s(s+1))", "4/(s^2+1.2s+4)", "1/((s^2+1)^2)"]
TIMES = [0.0, 0.3, 1.0, 2.5, 4.0, 7.5]


def test_formulas_recalculated_by_libreoffice_match_the_evaluator(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    lo.require_soffice()
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "F"
    for r, t in enumerate(TIMES, 1):
        ws.cell(r, 1, t)
    for c, expr in enumerate(CASES, 2):
        res = sf.invert(expr)
        for r in range(1, len(TIMES) + 1):
            formula = sf.excel_formula(res, f"A{r}")
            assert formula.startswith("=IF(A")
            ws.cell(r, c, formula)
    path = tmp_path / "formulas.xlsx"
    wb.save(path)
    rows = lo.to_csv_all_sheets(path, tmp_path)["F"]
    for c, expr in enumerate(CASES, 1):
        got = np.array([float(rows[r][c]) for r in range(len(TIMES))])
        ref = sf.sample(expr, TIMES).y
        scale = max(1.0, float(np.max(np.abs(ref))))
        assert np.max(np.abs(got - ref)) <= 1e-9 * scale, expr


@pytest.mark.parametrize("expr, fragment", [
    ("5 exp(-4s)/(2(12 s+1))", "(t - 4)"),            # the delay stays visible
    ("1/(s^3 (s+1))", "t^2/2"),                       # ^ in human text
    ("(s^3+1)/(s^2+3s+2)", "δ'(t)"),
])
def test_display_text_from_terms(expr, fragment):
    assert fragment in display_result(sf.invert(expr))
