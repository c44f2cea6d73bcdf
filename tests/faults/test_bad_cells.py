"""One bad cell is one bad cell: blocked spills, huge cycles, formulas too
deep, arithmetic overflow and over-long results end as that cell's error text
(never "internal error", never longer than a cell holds) and the rest of the
book is filled.  After every fill the comparison script checks that every part
and every cell that is not ours is unchanged."""
from __future__ import annotations

import openpyxl

from sheetfuncs.fill import MAX_CELL_TEXT, fill_workbook
from tests.faults.compare import differences
from tests.faults.conftest import run_cli


def fill(wb, tmp_path, name="b.xlsx"):
    src = tmp_path / name
    wb.save(src)
    before = src.read_bytes()
    out = tmp_path / ("out_" + name)
    report = fill_workbook(src, out, use_cache=False)
    assert src.read_bytes() == before
    assert differences(src, out) == []
    return report, openpyxl.load_workbook(out, data_only=True), src, out


def test_blocked_table_leaves_blockers_untouched(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    ws["A1"] = "1/((s+1)(s+2))"
    ws["C1"] = "=SF_POLES(A1)"            # a 4x7 table from C1
    ws["E3"] = "my note"                 # in its way
    ws["D4"] = 42
    ws["A5"] = "=SF_INVERSE(A1)"         # an ordinary cell: still filled
    report, out, src, dst = fill(wb, tmp_path)
    s = out["S"]
    assert s["C1"].value.startswith("#SF!") and "S!E3" in s["C1"].value     # first blocker, row by row
    assert s["E3"].value == "my note" and s["D4"].value == 42
    assert s["D1"].value is None and s["C2"].value is None                  # nothing spilled
    assert not s["A5"].value.startswith("#SF!") and report.errors == 1
    r = run_cli("fill", src, "-o", tmp_path / "cli.xlsx", "--no-cache")
    assert r.returncode == 1 and "S!C1" in r.stdout and "S!E3" in r.stdout


def test_a_4000_cell_cycle_is_one_short_message_and_the_rest_filled(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    n = 4000
    for i in range(1, n + 1):
        ws[f"A{i}"] = f"=SF_INVERSE(A{i % n + 1})"
    ws["C1"] = "1/(s+4)"
    ws["C2"] = "=SF_INVERSE(C1)"
    report, out, _, _ = fill(wb, tmp_path)
    s = out["S"]
    msg = s["A1"].value
    assert msg.startswith("#SF! circular reference among S!A1, S!A2") and msg.endswith("and 3988 more cells")
    assert report.errors == n and "exp(-4" in s["C2"].value.replace(" ", "")


def test_huge_results_and_messages_fit_a_cell(tmp_path):
    """A result longer than a cell holds is that cell's error; a huge error message is cut."""
    def huge_text(_x):
        return "y" * 40_000

    def huge_error(_x):
        raise ValueError("z" * 100_000)

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    ws["A1"], ws["A2"], ws["A3"] = "=SF_HUGE(1)", "=SF_LOUD(1)", "=SF_FINE(2)"
    src = tmp_path / "h.xlsx"
    wb.save(src)
    report = fill_workbook(src, tmp_path / "h_out.xlsx", use_cache=False,
                           functions={"SF_HUGE": huge_text, "SF_LOUD": huge_error,
                                      "SF_FINE": lambda x: x * 2})
    s = openpyxl.load_workbook(tmp_path / "h_out.xlsx", data_only=True)["S"]
    assert s["A1"].value == "#SF! the result is 40,000 characters long, above the cell limit of 32,767"
    assert len(s["A2"].value) <= MAX_CELL_TEXT and s["A2"].value.endswith("more characters not shown)")
    assert s["A3"].value == 4 and report.errors == 2
    assert differences(src, tmp_path / "h_out.xlsx") == []


def test_flat_sum_of_401_terms_is_computed_and_too_deep_is_that_cells_error(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    ws["A1"] = 1.0
    ws["B1"] = "=SF_INVERSE(" + "+".join(["A1"] * 401) + "&\"/(s+1)\")"     # valid in Excel
    ws["B2"] = "=SF_INVERSE(" + "(" * 500 + "A1" + ")" * 500 + ")"
    ws["B3"] = "=SF_INVERSE(" + "ABS(" * 450 + "A1" + ")" * 450 + ")"
    ws["C1"] = "1/(s+2)"
    ws["C2"] = "=SF_INVERSE(C1)"
    report, out, _, _ = fill(wb, tmp_path)
    s = out["S"]
    assert s["B1"].value.replace(" ", "") == "401*exp(-t)"                 # 401/(s+1)
    for cell in ("B2", "B3"):
        assert s[cell].value.startswith("#SF!") and "too long or nested too deeply" in s[cell].value
        assert "internal error" not in s[cell].value
    assert "exp(-2" in s["C2"].value.replace(" ", "") and report.errors == 2


def test_overflow_and_underflow_are_ordinary_errors(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    cases = ["1e999/s", "1/(s+1e-320)", "1e308*1e308/(s+1)"]
    for i, expr in enumerate(cases, start=1):
        ws[f"A{i}"] = expr
        ws[f"B{i}"] = f'=SF_RESPONSE(A{i},1,"step")'
        ws[f"C{i}"] = f"=SF_INVERSE(A{i})"
        ws[f"D{i}"] = f'=SF_FIGURE(A{i},"final value")'
    report, out, _, _ = fill(wb, tmp_path)
    for row in out["S"].iter_rows(min_col=2, max_col=4):
        for c in row:
            assert "internal error" not in str(c.value), (c.coordinate, c.value)
            assert len(str(c.value)) <= MAX_CELL_TEXT
