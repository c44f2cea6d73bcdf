"""The engine imports no spreadsheet library (the boundary of the layers)."""
import subprocess
import sys


def test_engine_does_not_import_spreadsheet_libraries():
    code = ("import sys, sheetfuncs, sheetfuncs.engine.invert, sheetfuncs.engine.figures, "
            "sheetfuncs.engine.sample, sheetfuncs.engine.ode, sheetfuncs.cli\n"
            "bad = [m for m in ('openpyxl', 'xlwings', 'lxml') if m in sys.modules]\n"
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == ""


def test_public_surface_is_pinned():
    import sheetfuncs
    assert sorted(sheetfuncs.__all__) == sorted([
        "__version__", "invert", "figures", "sample", "solve_ode", "transform", "self_check",
        "excel_formula", "latex", "parse", "SheetfuncsError", "ExpressionSyntaxError",
        "ParameterError", "LimitError", "UnsupportedExpressionError", "SamplingError", "WorkbookError"])
    for name in sheetfuncs.__all__:
        assert hasattr(sheetfuncs, name), name
