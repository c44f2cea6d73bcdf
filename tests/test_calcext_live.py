"""The LibreOffice extension in the real program (headless LibreOffice through python3-uno).

One LibreOffice for the module, on a fresh profile that ``sheetfuncs libreoffice install
--profile DIR`` fills; LibreOffice's Python cannot import sheetfuncs (the extension's worker
runs in this test's Python).  Every template, after ``fill``: opened, fully recalculated —
every SF cell keeps the value fill computed (1e-9) and shows no error; one input edited — the
SF cells then equal what the engine (``fill`` of the book LibreOffice saved) gives for the new
input; saved as .xlsx — its formulas read SF_...; the function wizard lists every function with
its descriptions.  With CI=true a missing LibreOffice fails these tests.
"""
from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import time
from pathlib import Path

import openpyxl
import pytest

from sheetfuncs import cellfuncs
from tests import lo

ROOT = Path(__file__).resolve().parents[1]
BOOKS = {   # template -> (input name in column A of Calculation, new value)
    "rlc_step_response": ("R", 30.0),
    "mount_release": ("damp", 900.0),
    "dead_time_process": ("tau1 [s]", 120.0),
    "slab_heating": ("thick", 0.05),
}
TIMINGS: dict = {}


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    return env


def _cli(*args, timeout=600):
    return subprocess.run([sys.executable, "-m", "sheetfuncs.cli", *args], capture_output=True, text=True,
                          timeout=timeout, env=_env(), cwd=str(ROOT))


@pytest.fixture(scope="module")
def office(tmp_path_factory):
    lo.require_office_python()
    base = tmp_path_factory.mktemp("calcext")
    profile = base / "profile"
    t0 = time.perf_counter()
    res = _cli("libreoffice", "install", "--profile", str(profile))
    TIMINGS["install s"] = time.perf_counter() - t0
    assert res.returncode == 0, res.stderr
    assert "installed" in res.stdout
    session = lo.OfficeSession(profile, log=base / "calc.log")
    session.base = base
    yield session
    session.close()
    log = (base / "calc.log").read_text() if (base / "calc.log").is_file() else ""
    TIMINGS["worker start (log)"] = [line.split()[3] + " s" for line in log.splitlines() if "worker ready" in line]
    print("\nlive LibreOffice timings:", json.dumps(TIMINGS, indent=1))


def _sf_cells(path) -> dict:
    """(sheet, row0, col0) -> (formula, cached value) of every SF formula cell."""
    f = openpyxl.load_workbook(path)
    v = openpyxl.load_workbook(path, data_only=True)
    out = {}
    for ws in f.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str) and c.value.startswith("=") and cellfuncs.PREFIX in c.value.upper():
                    out[(ws.title, c.row - 1, c.column - 1)] = (c.value, v[ws.title].cell(c.row, c.column).value)
    return out


def _same(lo_cell, expected) -> bool:
    if isinstance(expected, (int, float)) and not isinstance(expected, bool):
        return lo_cell["result_type"] == 1 and math.isclose(lo_cell["value"], expected, rel_tol=1e-9, abs_tol=1e-12)
    if expected is None or expected == "":
        return lo_cell["string"] == ""
    return lo_cell["string"] == str(expected)


def _live(office) -> dict:
    return {(c["sheet"], c["row"], c["col"]): c for c in office.ask("cells", formulas_only=True)}


def test_libreoffice_python_cannot_import_sheetfuncs(office):
    from sheetfuncs.calcext.install import office_env
    res = subprocess.run([lo.require_office_python(), "-c", "import sheetfuncs"], capture_output=True,
                         text=True, env=office_env(), cwd="/")
    assert res.returncode != 0 and "sheetfuncs" in res.stderr


@pytest.mark.parametrize("book", list(BOOKS))
def test_template_live(office, book):
    base = office.base
    filled = base / f"{book}.xlsx"
    res = _cli("fill", str(ROOT / "workbooks" / f"{book}.xlsx"), "-o", str(filled))
    assert res.returncode == 0, res.stderr
    cached = _sf_cells(filled)
    assert cached

    t0 = time.perf_counter()
    office.ask("open", path=str(filled))
    TIMINGS[f"{book}: open + bind + first computation s"] = time.perf_counter() - t0
    TIMINGS[f"{book}: full recalculation s"] = office.ask("calc", full=True)["seconds"]
    live = _live(office)
    for key, (formula, value) in cached.items():
        cell = live[key]
        assert cell["local"].upper().startswith("=" + cellfuncs.PREFIX) or cellfuncs.PREFIX in cell["local"], key
        assert cell["error"] == 0, (key, formula, cell)
        assert not cell["string"].startswith(cellfuncs.ERROR_MARK), (key, cell["string"])
        assert _same(cell, value), (key, formula, value, cell)

    # edit one input: the dependent SF cells follow (dependency tracking, no full recalculation)
    name, new = BOOKS[book]
    row = next(r for (sh, r, c), cell in ((k, v) for k, v in _all_cells(office).items())
               if sh == "Calculation" and c == 0 and cell == name)
    office.ask("set", sheet="Calculation", row=row, col=1, value=new)
    TIMINGS[f"{book}: recalculation after editing {name} s"] = office.ask("calc")["seconds"]
    edited = _live(office)
    changed = [k for k in cached if not _same(edited[k], cached[k][1])]
    assert changed, "editing the input changed no SF cell"

    # save as .xlsx: formulas keep the SF_ names; fill accepts the book and computes the same values
    saved = base / f"{book}_saved.xlsx"
    office.ask("save", path=str(saved))
    office.ask("close")
    again = _sf_cells(saved)
    assert set(again) == set(cached)
    for key, (formula, _) in again.items():
        assert formula.upper().startswith("=" + cellfuncs.PREFIX) or f"({cellfuncs.PREFIX}" in formula.upper(), formula
        assert "ORG." not in formula.upper(), formula
    refilled = base / f"{book}_refilled.xlsx"
    res = _cli("fill", str(saved), "-o", str(refilled))
    assert res.returncode == 0, res.stderr
    engine = _sf_cells(refilled)
    for key in cached:
        assert _same(edited[key], engine[key][1]), (key, engine[key], edited[key])


def _all_cells(office) -> dict:
    return {(c["sheet"], c["row"], c["col"]): c["string"] for c in office.ask("cells")}


def test_function_wizard_metadata(office):
    shown = {f["name"]: f for f in office.ask("functions", prefix=cellfuncs.PREFIX)}
    assert set(shown) == set(cellfuncs.FUNCTIONS)
    for info in cellfuncs.catalogue():
        f = shown[info.name]
        assert f["description"] == info.summary
        assert [a["name"] for a in f["arguments"]] == [a.name for a in info.args]
        for a, arg in zip(f["arguments"], info.args):
            assert a["description"].startswith(arg.description) and arg.description


def test_worker_unavailable_is_said_in_the_cell(tmp_path):
    """An extension whose recorded Python is gone: the cell says why, LibreOffice goes on."""
    lo.require_office_python()
    from sheetfuncs.calcext import install
    profile = tmp_path / "profile"
    install.install(profile, python=str(tmp_path / "gone" / "python3"))
    office = lo.OfficeSession(profile)
    try:
        sheet = office.ask("new")["sheet"]
        office.ask("set", sheet=sheet, row=0, col=0, value='=SF_INVERSE("1/(s+1)")')
        office.ask("set", sheet=sheet, row=1, col=0, value="=1+1")
        office.ask("calc", full=True)
        cells = {(c["row"], c["col"]): c for c in office.ask("cells", formulas_only=True)}
        text = cells[(0, 0)]["string"]
        assert text.startswith(f"{cellfuncs.ERROR_MARK} sheetfuncs worker unavailable"), text
        assert "gone" in text and "sheetfuncs libreoffice install" in text
        assert cells[(1, 0)]["value"] == 2.0
    finally:
        office.close()
    # and the command takes it out again
    res = _cli("libreoffice", "remove", "--profile", str(profile))
    assert res.returncode == 0 and "removed" in res.stdout, res.stderr
    assert not install.installed(profile)
    res = _cli("libreoffice", "remove", "--profile", str(profile))
    assert res.returncode == 2 and "not installed" in res.stderr


def test_defined_names_are_parameters_as_in_fill(office):
    """Workbook-level names of one numeric cell are parameters; sheet-level ones are not (as fill)."""
    sheet = office.ask("new")["sheet"]
    office.ask("set", sheet=sheet, row=0, col=1, value=2.0)            # B1 = 2, named a (workbook)
    office.ask("define", name="a", sheet=sheet, row=0, col=1)
    office.ask("set", sheet=sheet, row=1, col=1, value=3.0)            # B2 = 3, named b (sheet-level)
    office.ask("define", name="b", sheet=sheet, row=1, col=1, local=True)
    office.ask("set", sheet=sheet, row=0, col=0, value='=SF_RESPONSE("1/(s+a)";0.5)')
    office.ask("set", sheet=sheet, row=1, col=0, value='=SF_RESPONSE("1/(s+b)";0.5)')
    office.ask("calc", full=True)
    cells = {(c["row"], c["col"]): c for c in office.ask("cells", formulas_only=True)}
    # 1/(s+a) <-> exp(-a t) (Laplace table): exp(-1) at t = 0.5 with a = 2
    assert cells[(0, 0)]["value"] == pytest.approx(math.exp(-1.0), rel=1e-12)
    assert cells[(1, 0)]["string"].startswith(cellfuncs.ERROR_MARK)     # b is no parameter
    office.ask("close")
