"""Tests of sheetfuncs.workbook.plan: finding our cells, resolving arguments, ordering.

Workbooks are built with openpyxl in tmp_path; the functions are small real
ones defined here, and every expected value is computed independently in the
test (Python's sum, math, datetime).  Cached values of native formulas come
from the real LibreOffice where a test says so.
"""
from __future__ import annotations

import datetime as dt
import math
import time

import numpy as np
import openpyxl
import pytest
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.worksheet.formula import ArrayFormula

from sheetfuncs.errors import ParameterError, WorkbookError
from sheetfuncs.workbook.plan import Job, Outcome, evaluate, scan, spill_targets
from sheetfuncs.workbook.refs import open_book

MARK = "#SF! "


def error_text(exc: Exception) -> str:
    return MARK + str(exc)


def _numbers(args):
    for a in args:
        if isinstance(a, list):
            for row in a:
                yield from (v for v in row if v is not None)
        elif a is not None:
            yield a


def SF_TESTSUM(*args):
    return sum(_numbers(args))


def SF_TESTCOLUMN(n, start=1.0, step=1.0):
    return [[start + k * step] for k in range(int(n))]


def SF_TESTPAIR(a=1.0, b=2.0):
    return [[a, b], [a * b, a + b]]


def SF_TESTFAIL(x):
    raise ValueError(f"cannot use {x}")


FUNCS = {"SF_TESTSUM": SF_TESTSUM, "SF_TESTCOLUMN": SF_TESTCOLUMN, "SF_TESTPAIR": SF_TESTPAIR,
         "SF_TESTFAIL": SF_TESTFAIL}


def new_book(title="Data"):
    wb = openpyxl.Workbook()
    wb.active.title = title
    return wb


def run(wb, tmp_path, funcs=FUNCS, name="book.xlsx"):
    path = tmp_path / name
    wb.save(path)
    return {(o.sheet, o.ref): o for o in evaluate(path, funcs, error_text=error_text)}


def recorder():
    seen = []

    def SF_TESTSEE(*args):
        seen.append(args)
        return len(args)
    return seen, SF_TESTSEE


# --------------------------------------------------------------------------- finding cells

def test_scan_finds_our_calls_and_nothing_else(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = 1
    ws["B1"] = "=SF_TESTSUM(A1)"
    ws["B2"] = "=_xludf.SF_TESTSUM(A1)"
    ws["B3"] = "=_xlfn._xludf.sf_testsum(A1, 2)"
    ws["B4"] = "=@SF_TESTSUM(A1)"
    ws["B5"] = "=2*SF_TESTPAIR(A1)"
    ws["C1"] = "=SUM(A1:A3)"                                # native
    ws["C2"] = '=CONCATENATE("SF_TESTSUM(", A1, ")")'       # only text mentions it
    ws["C3"] = "SF_TESTSUM(A1)"                             # plain text
    ws["C4"] = "=SF_TESTSUM(A1)"
    ws["C4"].data_type = "s"                                # text that looks like a formula
    ws["C5"] = "=SF_LIMIT*2"                                # a defined name, not a call
    ws["D1"] = ArrayFormula("D1:D3", "=SF_TESTCOLUMN(3)")
    other = wb.create_sheet("My Sheet")
    other["A1"] = "=SF_TESTSUM(Data!A1:A3, 'My Sheet'!B2, gain)"
    path = tmp_path / "b.xlsx"
    wb.save(path)

    jobs = scan(path)
    assert [(j.sheet, j.ref, j.function) for j in jobs] == [
        ("Data", "B1", "SF_TESTSUM"), ("Data", "D1", "SF_TESTCOLUMN"),
        ("Data", "B2", "SF_TESTSUM"), ("Data", "B3", "SF_TESTSUM"), ("Data", "B4", "SF_TESTSUM"),
        ("Data", "B5", "SF_TESTPAIR"), ("My Sheet", "A1", "SF_TESTSUM")]
    assert jobs[0] == Job("Data", "B1", "=SF_TESTSUM(A1)", "SF_TESTSUM", ("Data!A1",))
    assert jobs[-1].arg_refs == ("Data!A1:A3", "'My Sheet'!B2", "gain")
    # the same with a Workbook object, or the snapshot fill reads once, instead of a path
    assert scan(wb) == jobs
    assert scan(open_book(path)) == jobs
    assert scan(wb, prefix="sf_testc") == [jobs[1]]


def test_scan_rejects_unreadable_formulas_naming_file_and_cell(tmp_path):
    for bad in ("=SF_TESTSUM(A1))", '=SF_TESTSUM("abc)', "=SF_TESTSUM(A1", "=SF_TESTSUM(A1 2)"):
        wb = new_book()
        wb.active["A1"] = 1
        wb.active["C7"] = bad
        path = tmp_path / "bad.xlsx"
        wb.save(path)
        with pytest.raises(WorkbookError) as info:
            scan(path)
        assert info.value.file == str(path) and info.value.cell == "Data!C7"
        assert str(path) in str(info.value) and "Data!C7" in str(info.value)


def test_evaluate_reports_unreadable_formulas_per_cell(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = 4
    ws["B1"] = "=SF_TESTSUM(A1))"
    ws["B2"] = "=SF_TESTSUM(A1"
    ws["B3"] = "=SF_TESTSUM(A1, 1)"
    ws["B4"] = "=SF_TESTSUM(B1)"
    out = run(wb, tmp_path)
    assert out["Data", "B1"].error.startswith(MARK + "cannot read the formula")
    assert "not closed" in out["Data", "B2"].error
    assert out["Data", "B3"] == Outcome("Data", "B3", 5.0, None)
    assert out["Data", "B4"].error == MARK + "depends on Data!B1, which has an error"


def test_unreadable_file(tmp_path):
    path = tmp_path / "not.xlsx"
    path.write_text("hello")
    with pytest.raises(WorkbookError) as info:
        evaluate(path, FUNCS, error_text=error_text)
    assert info.value.file == str(path)
    with pytest.raises(WorkbookError, match="file not found"):
        scan(tmp_path / "missing.xlsx")


# --------------------------------------------------------------------------- arguments

def test_argument_shapes(tmp_path):
    seen, see = recorder()
    wb = new_book()
    ws = wb.active
    ws["A1"], ws["B1"] = 2, 3.5
    ws["A2"], ws["B2"] = "text", True
    ws["A3"] = dt.datetime(2024, 1, 1, 12, 0)
    # A4, B4 empty
    ws["D1"] = '=SF_TESTSEE(A1, A2, A4, B2, A1:B2, $A$1:$B$2, A1:A1, "a""b", -2.5, TRUE, , 1E-3)'
    ws["D2"] = "=SF_TESTSEE(A1:B4, A3)"
    run(wb, tmp_path, {"SF_TESTSEE": see})
    by_len = {len(a): a for a in seen}
    first = by_len[12]
    assert first == (2.0, "text", None, True, [[2.0, 3.5], ["text", True]],
                     [[2.0, 3.5], ["text", True]], 2.0, 'a"b', -2.5, True, None, 0.001)
    assert type(first[0]) is float and type(first[3]) is bool
    serial = (dt.datetime(2024, 1, 1, 12) - dt.datetime(1899, 12, 30)).total_seconds() / 86400
    rows, date = by_len[2]
    assert date == pytest.approx(serial)
    assert len(rows) == 4 and rows[3] == [None, None] and rows[2][1] is None


def test_other_sheets_and_quoted_names(tmp_path):
    seen, see = recorder()
    wb = new_book()
    wb.active["A1"] = 10
    my = wb.create_sheet("My Sheet")
    my["A1"], my["B1"], my["A2"], my["B2"] = 1, 2, 3, 4
    its = wb.create_sheet("It's")
    its["B3"] = 7
    wb.active["C1"] = "=SF_TESTSEE(Data!A1, 'My Sheet'!A1:B2, 'It''s'!B3, data!$A$1)"
    my["D1"] = "=SF_TESTSEE(A1, Data!A1)"
    wb.active["C2"] = "=SF_TESTSUM(Nowhere!A1)"
    out = run(wb, tmp_path, {"SF_TESTSEE": see, "SF_TESTSUM": SF_TESTSUM})
    assert sorted(seen, key=len) == [(1.0, 10.0), (10.0, [[1.0, 2.0], [3.0, 4.0]], 7.0, 10.0)]
    assert out["Data", "C2"].error == MARK + "there is no sheet named 'Nowhere'"


def test_defined_names_in_both_scopes(tmp_path):
    seen, see = recorder()
    wb = new_book()
    data = wb.active
    data["A1"], data["A2"], data["A3"] = 1.5, 2.5, 3.5
    my = wb.create_sheet("My Sheet")
    my["A1"] = 100
    wb.defined_names["gain"] = DefinedName("gain", attr_text="Data!$A$1")
    wb.defined_names["span"] = DefinedName("span", attr_text="Data!$A$1:$A$3")
    wb.defined_names["tau"] = DefinedName("tau", attr_text="0.25")
    wb.defined_names["twice"] = DefinedName("twice", attr_text="2*tau")
    my.defined_names["gain"] = DefinedName("gain", attr_text="'My Sheet'!$A$1")
    data["C1"] = "=SF_TESTSEE(gain, span, tau, twice, 'My Sheet'!gain, GAIN)"
    my["C1"] = "=SF_TESTSEE(gain, Data!gain)"
    data["C2"] = "=SF_TESTSEE(nosuchname)"
    out = run(wb, tmp_path, {"SF_TESTSEE": see})
    assert sorted(seen, key=len) == [(100.0, 1.5),
                                     (1.5, [[1.5], [2.5], [3.5]], 0.25, 0.5, 100.0, 1.5)]
    assert out["Data", "C2"].error == (MARK + "unknown name 'nosuchname' "
                                       "(not a reference and not a defined name)")


def test_nested_native_arithmetic(tmp_path):
    seen, see = recorder()
    wb = new_book()
    ws = wb.active
    ws["B1"], ws["B2"], ws["B3"] = 4, -3, 1e3
    ws["D1"] = ("=SF_TESTSEE(B1*2, 1/(2*PI()*B3), -B2, SQRT(B1)+EXP(1)-LN(B1)+ABS(B2), "
                "2^3^2, -2^2, 50%, B1:B2*10, (B1+B2)/B3)")
    ws["D2"] = "=SF_TESTSEE(1/(B1-4))"
    ws["D3"] = "=SF_TESTSEE(SUM(B1:B3))"
    ws["D4"] = "=SF_TESTSEE(SQRT(B2))"
    ws["D5"] = '=SF_TESTSEE(B1&"x")'
    out = run(wb, tmp_path, {"SF_TESTSEE": see})
    assert len(seen) == 3
    assert (1001.0,) in seen and ("4x",) in seen      # SUM over a range; & makes text
    got = list(next(x for x in seen if len(x) > 1))
    assert got[7] == [[40.0], [-30.0]]                # the range times 10, as a 2-D list
    del got[7]
    assert got == pytest.approx([8.0, 1 / (2 * math.pi * 1e3), 3.0,
                                 2.0 + math.e - math.log(4) + 3.0, 64.0, 4.0, 0.5, 1e-3], rel=1e-15)
    assert out["Data", "D2"].error == MARK + "division by zero"
    assert "SQRT" in out["Data", "D4"].error


def test_array_literal_and_implicit_intersection(tmp_path):
    seen, see = recorder()
    wb = new_book()
    wb.active["A1"] = "=SF_TESTSEE({1,-2;3,4}, @SF_TESTPAIR(5, 6), _xlfn.SINGLE(SF_TESTPAIR(7, 8)))"
    run(wb, tmp_path, {"SF_TESTSEE": see, "SF_TESTPAIR": SF_TESTPAIR})
    assert seen == [([[1.0, -2.0], [3.0, 4.0]], 5.0, 7.0)]


def test_valid_formulas_fill_does_not_compute_are_errors_of_their_cell(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = 2
    ws["A2"] = "#N/A"
    ws["A2"].data_type = "e"
    wb.defined_names["loop"] = DefinedName("loop", attr_text="loop+1")
    cells = {
        "B1": ("=SF_TESTSUM(A:A)", "whole rows or columns ('A:A') are not supported; "
                                   "use a range such as A1:A100"),
        "B2": ("=SF_TESTSUM([1]Other!A1)", "'[1]Other!A1' refers to another workbook or a table; "
                                           "fill reads only plain references inside this workbook"),
        "B3": ("=SF_TESTSUM(loop)", "the defined name 'loop' refers to itself"),
        "B4": ("=SF_TESTSUM(A2)", "Data!A2 holds the error #N/A"),
        "B5": ("=SF_TESTSUM(#DIV/0!)", "the formula contains the error value #DIV/0!"),
        "B6": ("=SF_TESTSUM(VLOOKUP(1,A1:A2,1))", "VLOOKUP cannot be computed by fill; compute it "
                                                  "in a cell of its own and refer to that cell"),
        "B7": ("=SF_TESTSUM(C1:C2 C1)", "the range intersection ' ' is not supported by fill"),
        "B8": ("=SF_TESTSUM(_xlfn.ANCHORARRAY(A1))", "Data!A1# refers to a cell that holds no array result"),
    }
    for ref, (formula, _) in cells.items():
        ws[ref] = formula
    out = run(wb, tmp_path)
    for ref, (_, message) in cells.items():
        assert out["Data", ref].error == MARK + message, ref
    assert {j.ref for j in scan(wb)} == set(cells)     # valid formulas: scan lists them
    ws["B9"] = "=SF_TESTSUM(" + "ABS(" * 450 + "A1" + ")" * 450 + ")"
    with pytest.raises(WorkbookError, match="too long or nested too deeply"):
        scan(wb)
    assert run(wb, tmp_path, name="long.xlsx")["Data", "B9"].error.endswith(
        "too long or nested too deeply")


# --------------------------------------------------------------------------- native formula cells

def test_native_formula_without_cached_value(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = 3
    ws["B1"] = "=A1*2+1"
    ws["B2"] = "=B1^2/A1"
    ws["B3"] = "=VLOOKUP(3,A1:A2,1)"
    ws["B4"] = "=SUM(A1:A2)+MAX(A1,10)"
    ws["C1"] = "=SF_TESTSUM(B2)"
    ws["C2"] = "=SF_TESTSUM(B3)"
    ws["C3"] = "=SF_TESTSUM(B1:B3)"
    ws["C4"] = "=SF_TESTSUM(B4)"
    out = run(wb, tmp_path)
    assert out["Data", "C1"].value == pytest.approx((3 * 2 + 1) ** 2 / 3)
    assert out["Data", "C4"].value == 3 + 10
    message = (MARK + "cell Data!B3 holds a formula that fill cannot compute (VLOOKUP is not among "
               "the functions fill computes); type its value or use a defined constant")
    assert out["Data", "C2"].error == message
    assert out["Data", "C3"].error == message


def test_native_formula_that_uses_our_results(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = "=SF_TESTSUM(4)"
    ws["B1"] = "=A1*A1-1"                  # computed again from the fresh A1
    ws["B2"] = "=VLOOKUP(A1,A1:A2,1)"      # cannot be computed, and its cache would be stale
    ws["B5"] = "=MAX(A1, 2)+IF(A1>3,10,20)"  # computed again from the fresh A1
    ws["B3"] = "=B4+1"
    ws["B4"] = "=B3+1"                     # a circle of native formulas
    ws["C1"] = "=SF_TESTSUM(B1)"
    ws["C2"] = "=SF_TESTSUM(B2)"
    ws["C3"] = "=SF_TESTSUM(B3)"
    ws["C5"] = "=SF_TESTSUM(B5)"
    out = run(wb, tmp_path)
    assert out["Data", "C1"].value == 4.0 * 4.0 - 1
    assert out["Data", "C5"].value == 4.0 + 10
    assert out["Data", "C2"].error == (MARK + "cell Data!B2 holds a formula that fill cannot "
                                       "compute and that uses results of this run (VLOOKUP is not "
                                       "among the functions fill computes); see docs/fill.md for "
                                       "the functions fill computes")
    assert out["Data", "C3"].error in (MARK + "Data!B3 is part of a circular reference",
                                       MARK + "Data!B4 is part of a circular reference")


def test_long_chain_of_native_formulas(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = 0.5
    for r in range(2, 3001):
        ws.cell(r, 1, f"=A{r - 1}+0.25")
    ws["B1"] = "=SF_TESTSUM(A3000, A1:A3000)"
    out = run(wb, tmp_path)
    column = [0.5 + 0.25 * k for k in range(3000)]
    assert out["Data", "B1"].value == pytest.approx(column[-1] + math.fsum(column))


def test_native_cached_values_come_from_libreoffice(tmp_path):
    from tests import lo
    lo.require_soffice()
    seen, see = recorder()
    wb = new_book()
    ws = wb.active
    ws["A1"], ws["A2"], ws["A3"] = 2, 5, 11
    ws["B1"] = "=SUM(A1:A3)*2"                     # not over our cells: LibreOffice's cache is used
    ws["B2"] = '=IF(A1>1, "big", "small")'
    ws["C1"] = "=SF_TESTSUM(A1:A3)"
    ws["D1"] = "=C1*3"                             # depends on our cell: computed again here
    ws["E1"] = "=SF_TESTSEE(B1, B2, D1)"
    src = tmp_path / "src.xlsx"
    wb.save(src)
    sub, _ = lo._convert(src, tmp_path / "lo", "xlsx", lo.TIMEOUT)
    converted = next(sub.glob("*.xlsx"))
    # LibreOffice stores the unknown names in lower case; they must still be found
    assert "sf_testsum" in openpyxl.load_workbook(converted)["Data"]["C1"].value
    outcomes = evaluate(converted, {"SF_TESTSUM": SF_TESTSUM, "SF_TESTSEE": see},
                        error_text=error_text)
    assert {o.ref: o.error for o in outcomes} == {"C1": None, "E1": None}
    cached = openpyxl.load_workbook(converted, data_only=True)["Data"]
    assert cached["B1"].value == (2 + 5 + 11) * 2          # what LibreOffice computed
    assert seen == [((2 + 5 + 11) * 2.0, "big", (2 + 5 + 11) * 3.0)]
    # the same workbook saved by LibreOffice as a macro-enabled .xlsm
    sub, _ = lo._convert(src, tmp_path / "lo", "xlsm:Calc MS Excel 2007 VBA XML", lo.TIMEOUT)
    outcomes_xlsm = evaluate(next(sub.glob("*.xlsm")), {"SF_TESTSUM": SF_TESTSUM, "SF_TESTSEE": see},
                             error_text=error_text)
    assert outcomes_xlsm == outcomes and seen[1] == seen[0]


# --------------------------------------------------------------------------- order and spills

def test_chain_runs_in_dependency_order_whatever_the_position(tmp_path):
    calls = []

    def SF_TESTSTEP(x, k):
        calls.append(k)
        return x + k

    wb = new_book()
    ws = wb.active
    ws["A1"] = 1
    ws["B1"] = "=SF_TESTSTEP(B3, 1)"
    ws["B2"] = "=SF_TESTSTEP(B4*2, 2)"
    ws["B3"] = "=SF_TESTSTEP(B2, 3)"
    ws["B4"] = "=SF_TESTSTEP(A1, 4)"
    other = wb.create_sheet("Later")
    other["A1"] = "=SF_TESTSTEP(Data!B1, 5)"
    ws["B5"] = "=SF_TESTSTEP(Later!A1, 6)"
    out = run(wb, tmp_path, {"SF_TESTSTEP": SF_TESTSTEP})
    b4 = 1 + 4
    b2 = b4 * 2 + 2
    b3 = b2 + 3
    b1 = b3 + 1
    assert [out["Data", r].value for r in ("B1", "B2", "B3", "B4")] == [b1, b2, b3, b4]
    assert out["Data", "B5"].value == b1 + 5 + 6
    assert calls == [4, 2, 3, 1, 5, 6]


def test_references_into_a_spilled_range(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = "=SF_TESTSUM(F50)"                          # one spilled cell, read before the anchor
    ws["G1"] = "=SF_TESTSUM(F2:F201)"
    ws["F2"] = "=SF_TESTCOLUMN(200, 0, 0.5)"
    ws["H5"] = "=SF_TESTSUM(_xlfn.ANCHORARRAY(F2))"
    ws["H6"] = "=SF_TESTSUM(F3:F5*2)"
    ws["H7"] = "=SF_TESTSUM(F2)"                           # the anchor alone: its first value
    out = run(wb, tmp_path)
    column = [0.5 * k for k in range(200)]
    assert out["Data", "F2"].value == [[v] for v in column]
    assert out["Data", "A1"].value == column[48]
    assert out["Data", "G1"].value == pytest.approx(math.fsum(column))
    assert out["Data", "H5"].value == pytest.approx(math.fsum(column))
    assert out["Data", "H6"].value == pytest.approx(2 * (column[1] + column[2] + column[3]))
    assert out["Data", "H7"].value == column[0]


def test_spill_targets_geometry():
    pair = Outcome("S", "C3", [[1, 2, 3], [4, 5, 6]], None)
    assert spill_targets(pair) == [("S", "D3", 2), ("S", "E3", 3),
                                   ("S", "C4", 4), ("S", "D4", 5), ("S", "E4", 6)]
    assert spill_targets(Outcome("S", "Z9", [[1], [2]], None)) == [("S", "Z10", 2)]
    assert spill_targets(Outcome("S", "A1", 3.0, None)) == []
    assert spill_targets(Outcome("S", "A1", [[7.0]], None)) == []
    assert spill_targets(Outcome("S", "A1", None, "#SF! x")) == []


def test_result_shapes(tmp_path):
    funcs = {"SF_TESTNP": lambda n: np.arange(int(n), dtype=float).reshape(-1, 1) * 2,
             "SF_TESTROW": lambda: [1, 2.5, "x"],
             "SF_TESTNPSCALAR": lambda: np.float64(1.25),
             "SF_TESTRAGGED": lambda: [[1, 2], [3]],
             "SF_TESTOBJECT": lambda: object(),
             "SF_TESTID": lambda x: x,
             "SF_TESTSUM": SF_TESTSUM}
    wb = new_book()
    ws = wb.active
    ws["A1"] = "=SF_TESTNP(3)"
    ws["C1"] = "=SF_TESTROW()"
    ws["C2"] = "=SF_TESTSUM(D1, C1)"
    ws["C6"] = "=SF_TESTID(E1)"
    ws["C3"] = "=SF_TESTNPSCALAR()"
    ws["C4"] = "=SF_TESTRAGGED()"
    ws["C5"] = "=SF_TESTOBJECT()"
    out = run(wb, tmp_path, funcs)
    assert out["Data", "A1"].value == [[0.0], [2.0], [4.0]]
    assert spill_targets(out["Data", "C1"]) == [("Data", "D1", 2.5), ("Data", "E1", "x")]
    assert out["Data", "C2"].value == 2.5 + 1
    assert out["Data", "C6"].value == "x"
    assert out["Data", "C3"].value == 1.25 and type(out["Data", "C3"].value) is float
    assert out["Data", "C4"].error == MARK + "SF_TESTRAGGED returned rows of different lengths"
    assert "type object" in out["Data", "C5"].error


def test_spills_never_overwrite_user_cells(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = "=SF_TESTCOLUMN(3, 10)"
    ws["A3"] = 99                      # the user's number in the way (the first blocker is A3)
    ws["B1"] = "=SF_TESTSUM(A3)"       # reads the user's value, which stays
    ws["D1"] = "=SF_TESTCOLUMN(3)"
    ws["D3"] = "=1+1"                  # a formula in the way
    ws["F1"] = "=SF_TESTPAIR()"
    ws["G2"] = "=SF_TESTSUM(1)"        # one of ours in the way
    ws["J1"] = "=SF_TESTCOLUMN(3)"
    ws["J2"] = "notes"                 # text in the way
    ws["L1"] = "=SF_TESTCOLUMN(3)"
    ws["L3"] = 5                       # inside the spill an earlier fill recorded: ours, replaced
    wb.defined_names["_sfspill1"] = DefinedName("_sfspill1", attr_text="Data!$L$1:$L$3")
    out = run(wb, tmp_path)
    assert out["Data", "A1"].error == (MARK + "the 3x1 result cannot spill: Data!A3 holds a "
                                       "value (99.0); clear it or move this formula")
    assert out["Data", "B1"].value == 99.0
    assert out["Data", "D1"].error == (MARK + "the 3x1 result cannot spill: Data!D3 holds a "
                                       "formula; clear it or move this formula")
    assert "Data!G2" in out["Data", "F1"].error
    assert "Data!J2 holds a value ('notes')" in out["Data", "J1"].error
    assert out["Data", "L1"].value == [[1.0], [2.0], [3.0]]


def test_cells_left_from_an_earlier_spill_read_as_empty(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["F2"] = "=SF_TESTCOLUMN(2)"                 # now 2 rows; an earlier run spilled 4
    ws["F3"], ws["F4"], ws["F5"], ws["F6"] = 90, 91, 92, 7
    wb.defined_names["_sfspill1"] = DefinedName("_sfspill1", attr_text="Data!$F$2:$F$5")
    ws["G1"] = "=SF_TESTSUM(F2:F6)"
    ws["G2"] = "=SF_TESTSUM(F5)"
    out = run(wb, tmp_path)
    assert out["Data", "F2"].value == [[1.0], [2.0]]
    assert out["Data", "G1"].value == 1.0 + 2.0 + 7      # F4 and F5 will be emptied
    assert out["Data", "G2"].value == 0


def test_order_is_repaired_when_a_result_spills_unexpectedly(tmp_path):
    # A1 reads C3, which B2's 2x2 result covers (B2:C3); B2 reads D1, which a
    # result in A1 could have covered.  Sheet order would compute A1 first.
    wb = new_book()
    ws = wb.active
    ws["A1"] = "=SF_TESTSUM(C3, 1)"
    ws["B2"] = "=SF_TESTPAIR(3, D1)"
    ws["D1"] = 4
    out = run(wb, tmp_path)
    assert out["Data", "B2"].value == [[3.0, 4.0], [12.0, 7.0]]
    assert out["Data", "A1"].value == 7.0 + 1


# --------------------------------------------------------------------------- errors per cell

def test_cycles_are_errors_on_the_cells_in_them(tmp_path):
    wb = new_book()
    ws = wb.active
    ws["A1"] = 1
    ws["C1"] = "=SF_TESTSUM(C1)"
    ws["C2"] = "=SF_TESTSUM(C3)"
    ws["C3"] = "=SF_TESTSUM(C2, A1)"
    ws["D1"] = "=SF_TESTSUM(D3)"
    ws["D2"] = "=D1*2"                 # native, between two of ours
    ws["D3"] = "=SF_TESTSUM(D2)"
    ws["E1"] = "=SF_TESTSUM(C2)"       # reads a cycle cell
    ws["F1"] = "=SF_TESTPAIR(G2+1)"    # its own result spills over G2
    ws["H1"] = "=SF_TESTSUM(A1, 2)"    # unrelated
    out = run(wb, tmp_path)
    assert out["Data", "C1"].error == MARK + "circular reference: Data!C1 refers to its own cell"
    assert out["Data", "C2"].error == MARK + "circular reference among Data!C2, Data!C3"
    assert out["Data", "C3"].error == out["Data", "C2"].error
    assert out["Data", "D1"].error == MARK + "circular reference among Data!D1, Data!D3"
    assert out["Data", "E1"].error == MARK + "depends on Data!C2, which has an error"
    assert out["Data", "F1"].error == (MARK + "circular reference: Data!F1 reads cells its own "
                                       "result spills into")
    assert out["Data", "H1"].value == 3.0


def test_unknown_functions_arity_and_raising_functions(tmp_path):
    raised = []

    def text(exc):
        raised.append(exc)
        return error_text(exc)

    wb = new_book()
    ws = wb.active
    ws["A1"] = "=SF_NOPE(1)"
    ws["A2"] = "=SF_TESTPAIR(1, 2, 3)"
    ws["A3"] = "=SF_TESTFAIL(5)"
    ws["A4"] = "=SF_TESTSUM(SF_TESTFAIL(6))"
    ws["A5"] = "=SF_TESTCOLUMN()"
    ws["A6"] = "=SF_TESTSUM(2, 3)"
    path = tmp_path / "e.xlsx"
    wb.save(path)
    out = {o.ref: o for o in evaluate(path, FUNCS, error_text=text)}
    assert out["A1"].error == MARK + "unknown function SF_NOPE"
    assert out["A2"].error == MARK + "SF_TESTPAIR takes 0 to 2 arguments, but 3 were given"
    assert out["A3"].error == MARK + "cannot use 5.0"
    assert out["A4"].error == MARK + "cannot use 6.0"
    assert out["A5"].error == MARK + "SF_TESTCOLUMN takes 1 to 3 arguments, but 0 were given"
    assert out["A6"] == Outcome("Data", "A6", 5.0, None)
    kinds = [type(e) for e in raised]
    assert kinds.count(ValueError) == 2 and kinds.count(ParameterError) == 2
    assert [type(e) for e in raised if type(e) not in (ValueError, ParameterError)] == [WorkbookError]


# --------------------------------------------------------------------------- speed

def test_two_hundred_cells_and_five_long_columns_are_fast(tmp_path):
    spent = [0.0]

    def timed(fn):
        def wrapper(*args):
            t = time.perf_counter()
            try:
                return fn(*args)
            finally:
                spent[0] += time.perf_counter() - t
        return wrapper

    wb = new_book()
    ws = wb.active
    for r in range(1, 1001):
        for c in range(1, 6):
            ws.cell(r, c, r * 0.001 * c)
    letters = "ABCDE"
    for k in range(5):                   # five spilled 1000-row columns
        ws.cell(1, 10 + k, f"=SF_TESTCOLUMN(1000, {k}, 0.5)")
    for i in range(195):                 # readers of the data and of the spills
        col = letters[i % 5]
        if i % 3:
            ws.cell(i + 1, 8, f"=SF_TESTSUM({col}1:{col}1000, {i})")
        else:
            ws.cell(i + 1, 8, f"=SF_TESTSUM(J1:N1000, {col}{i + 1}*2)")
    path = tmp_path / "big.xlsx"
    wb.save(path)
    funcs = {k: timed(v) for k, v in FUNCS.items()}
    t = time.perf_counter()
    outcomes = evaluate(path, funcs, error_text=error_text)
    total = time.perf_counter() - t
    assert len(outcomes) == 200 and all(o.error is None for o in outcomes)
    spills = sum(0.5 * r + k for k in range(5) for r in range(1000))
    h1 = next(o for o in outcomes if o.ref == "H1")
    assert h1.value == pytest.approx(spills + 2 * 0.001)
    print(f"\nplan+evaluate of 200 cells: {total - spent[0]:.3f} s (functions {spent[0]:.3f} s)")
    # speed lives in sheetfuncs.benchmarks.fill (no timing assertions in tests)


def test_long_flat_chains_are_computed(tmp_path):
    """A flat sum is one level deep however long (Excel allows 8,192 characters)."""
    wb = new_book()
    ws = wb.active
    ws["A1"] = 0.1
    ws["B1"] = "=SF_TESTSUM(" + "+".join(["A1"] * 2700) + ")"
    ws["B2"] = "=" + "*".join(["2"] * 1000) + "/2" * 999        # 2^1000 / 2^999, exact in binary
    ws["B3"] = "=SF_TESTSUM(B2)"
    out = run(wb, tmp_path)
    acc = 0.0
    for _ in range(2700):                  # left to right, as the spreadsheet adds
        acc += 0.1
    assert out["Data", "B1"].value == acc
    assert out["Data", "B3"].value == 2.0


def test_native_functions_fill_computes(tmp_path):
    """Each native function against Python's math module and the spreadsheet rules named
    beside it (from memory of the OpenFormula / Excel documentation)."""
    wb = new_book()
    ws = wb.active
    ws["A1"], ws["A2"], ws["A3"], ws["A4"] = 2.0, -3.0, 0.5, "s+1"
    cases = {
        "=IF(A1>1,A1*2,A2)": 4.0,
        "=IF(A1<0,1/0,7)": 7.0,                      # the branch not taken is not computed
        "=MAX(A1:A4)": 2.0,                          # text in a range is skipped
        "=MIN(A1:A3,7)": -3.0,
        "=SUM(A1:A4)": -0.5,
        "=AVERAGE(A1:A3)": pytest.approx(-0.5 / 3, rel=1e-15),
        "=COUNT(A1:A4)": 3.0,
        "=ATAN2(A1,A2)": math.atan2(-3.0, 2.0),      # ATAN2(x, y) is atan2(y, x)
        "=LOG10(1000)": pytest.approx(3.0, rel=1e-15),
        "=LOG(8,2)": pytest.approx(3.0, rel=1e-15),
        '="1/("&A4&")"': "1/(s+1)",
        '=A1&"x"&A3': "2x0.5",                       # numbers as their shortest text
        "=ROUND(2.675,2)": 2.68,                     # half away from zero on the decimal form
        "=ROUND(-2.5,0)": -3.0,
        "=INT(-2.5)": -3.0,                          # INT rounds down
        "=MOD(-7,3)": 2.0,                           # the sign of the divisor
        "=SIGN(A2)": -1.0,
        "=ERFC(0.5)": math.erfc(0.5),
        "=ERF(0,1)": math.erf(1.0),
        "=SUMPRODUCT(A1:A3,A1:A3)": 4.0 + 9.0 + 0.25,
        "=IFERROR(1/0,\"z\")": "z",
        "=CONCATENATE(\"a\",A1)": "a2",
        "=LEN(A4)": 3.0,
        "=IF(AND(A1>0,A2<0),1,0)": 1.0,
        "=IF(OR(A1<0,A2>0),1,0)": 0.0,
        "=IF(NOT(A1=2),1,0)": 0.0,
        '=IF("abc"="ABC",1,0)': 1.0,                 # text compares without case
        '=IF(1<"a",1,0)': 1.0,                       # numbers sort before text
        "=SQRT(A1)*ASIN(1)": math.sqrt(2.0) * math.pi / 2,
    }
    for i, formula in enumerate(cases, start=1):
        ws.cell(i, 2, formula)
        ws.cell(i, 3, f"=SF_TESTID(B{i})")
    out = run(wb, tmp_path, {"SF_TESTID": lambda x: x})
    for i, (formula, want) in enumerate(cases.items(), start=1):
        o = out["Data", f"C{i}"]
        assert o.error is None and o.value == want, (formula, o)
