"""fill end to end: a user workbook with everything a real one holds, filled,
checked byte by byte, then opened in real LibreOffice Calc (via tests/lo.py).
Expected numbers come from the engine's independent paths checked elsewhere
against scipy (sample) and from LibreOffice computing the native formulas."""
import json
import math
import shutil
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from lxml import etree
from openpyxl.chart import LineChart, Reference
from openpyxl.comments import Comment
from openpyxl.styles import Font, PatternFill
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.worksheet.datavalidation import DataValidation
from scipy import signal

import sheetfuncs as sf
from sheetfuncs.cli import main
from sheetfuncs.errors import WorkbookError
from sheetfuncs.fill import fill_workbook
from tests import lo

N = 40
TIMES = [0.25 * k for k in range(N)]


def build_user_book(path: Path, expr="4/(s^2+1.2s+4)", partfrac="(2s+1)/((s+1)^2 (s^2+2s+5))"):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Design"
    ws["A1"] = "Loop design"
    ws["A1"].font = Font(bold=True, size=14, color="1F4E79")
    ws["A2"], ws["B2"] = "G(s)", expr
    ws["A3"], ws["B3"], ws["C3"] = "gain", 2.5, "V/V"
    ws["B3"].number_format = "0.00"
    ws["B3"].fill = PatternFill("solid", fgColor="FFF2CC")
    ws["B3"].comment = Comment("edit me", "designer")
    wb.defined_names["gain"] = DefinedName("gain", attr_text="Design!$B$3")
    dv = DataValidation(type="decimal", operator="between", formula1="0", formula2="100")
    ws.add_data_validation(dv)
    dv.add("B3")
    ws["A4"], ws["B4"] = "f(t)", "=SF_INVERSE(B2)"
    ws["A5"], ws["B5"] = "overshoot %", '=SF_FIGURE(B2,"overshoot")'
    ws["A6"], ws["B6"] = "scaled final", '=SF_FIGURE("gain/(s+1)","final value")'
    ws["A7"], ws["B7"] = "twice overshoot", "=B5*2"              # native formula over ours
    ws["A8"], ws["B8"] = "native", "=SUM(B3,1)"
    ws["A9"], ws["B9"] = "bad cell", "=SF_INVERSE(\"s.__class__\")"
    ws["A10"], ws["B10"] = "native formula text", '=SF_SHEETFORMULA(B2,"A13")'
    ws["E2"] = f'=SF_PARTFRAC("{partfrac}")'
    ws["E12"] = "kept text"
    ws.merge_cells("A20:C20")
    ws["A20"] = "merged note"
    ws.column_dimensions["A"].width = 22
    ws.column_dimensions["E"].width = 18
    data = wb.create_sheet("Data")
    data["A1"], data["B1"], data["C1"] = "t", "y", "y native x2"
    for i, t in enumerate(TIMES, start=2):
        data[f"A{i}"] = t
        data[f"B{i}"] = f"=SF_RESPONSE(Design!$B$2,A{i},\"step\")"
        data[f"B{i}"].number_format = "0.0000"
        data[f"C{i}"] = f"=B{i}*2"
    chart = LineChart()
    chart.title = "step response"
    chart.add_data(Reference(data, min_col=2, min_row=1, max_row=N + 1), titles_from_data=True)
    chart.set_categories(Reference(data, min_col=1, min_row=2, max_row=N + 1))
    data.add_chart(chart, "E2")
    for s in wb.worksheets:
        s.sheet_properties.pageSetUpPr.fitToPage = True
        s.page_setup.fitToWidth = s.page_setup.fitToHeight = 1
    wb.save(path)
    return path


def add_member(path: Path, name: str, data: bytes, out: Path):
    with zipfile.ZipFile(path) as zin, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            zout.writestr(info, zin.read(info.filename))
        zout.writestr(name, data)
    return out


@pytest.fixture(scope="module")
def filled(tmp_path_factory):
    d = tmp_path_factory.mktemp("fill")
    src = build_user_book(d / "design.xlsx")
    report = fill_workbook(src, d / "design_out.xlsx", use_cache=False)
    return src, d / "design_out.xlsx", report


def test_report(filled):
    _, _, report = filled
    assert report.cells == 6 + N and report.errors == 1
    assert report.error_cells[0][0].endswith("B9") and "attribute" in report.error_cells[0][1]
    assert report.spilled > 0


def test_values_match_engine(filled):
    _, out, _ = filled
    wb = openpyxl.load_workbook(out, data_only=True)
    data = wb["Data"]
    ys = [data[f"B{i}"].value for i in range(2, N + 2)]
    _, ref = signal.step(signal.lti([4.0], [1.0, 1.2, 4.0]), T=np.array(TIMES))    # scipy reference
    assert np.max(np.abs(np.array(ys) - ref)) < 1e-6
    ws = wb["Design"]
    assert ws["B6"].value == pytest.approx(2.5)            # defined name 'gain' used as parameter
    assert ws["E2"].value == "term in s" and ws["H2"].value == "pole"     # spilled header row
    assert ws["E12"].value == "kept text"


def test_formulas_and_everything_else_kept(filled):
    src, out, _ = filled
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(out) as b:
        assert a.namelist() == b.namelist()
        changed = [n for n in a.namelist() if a.read(n) != b.read(n)]
    assert set(changed) <= {"xl/workbook.xml", "xl/worksheets/sheet1.xml", "xl/worksheets/sheet2.xml"}
    wa = openpyxl.load_workbook(src)
    wb = openpyxl.load_workbook(out)
    for name in wa.sheetnames:
        for row in wa[name].iter_rows():
            for c in row:
                if isinstance(c.value, str) and c.value.startswith("="):
                    assert wb[name][c.coordinate].value == c.value
                    assert wb[name][c.coordinate].number_format == c.number_format
    d = wb["Design"]
    assert d["B3"].comment.text == "edit me" and d["B3"].fill.fgColor.rgb.endswith("FFF2CC")
    assert d.column_dimensions["A"].width == 22 and "A20:C20" in {str(m) for m in d.merged_cells.ranges}
    assert len(d.data_validations.dataValidation) == 1
    assert "gain" in wb.defined_names
    assert len(wb["Data"]._charts) == 1
    assert b'fullCalcOnLoad="1"' not in zipfile.ZipFile(out).read("xl/workbook.xml")


def test_libreoffice_shows_results(filled, tmp_path):
    lo.require_soffice()
    _, out, _ = filled
    sheets = lo.to_csv_all_sheets(out, tmp_path)
    text = json.dumps(sheets)
    assert "#NAME?" not in text and "Err:" not in text and "#VALUE!" not in text
    data = sheets["Data"]
    y = [float(r[1]) for r in data[1:N + 1]]
    y2 = [float(r[2]) for r in data[1:N + 1]]
    ref = sf.sample("4/(s^2+1.2s+4)", TIMES, input="step").y
    assert np.allclose(y, ref, rtol=1e-12, atol=1e-14)
    assert np.allclose(y2, 2 * np.array(ref), rtol=1e-12)   # LibreOffice computed the native formulas
    design = {r[0]: r for r in sheets["Design"] if r}
    assert float(design["twice overshoot"][1]) == pytest.approx(2 * float(design["overshoot %"][1]))
    assert float(design["native"][1]) == pytest.approx(3.5)
    pdf = lo.to_pdf(out, tmp_path)
    assert not lo.png_is_blank(lo.pdf_page_png(pdf, page=2, outdir=tmp_path))


def test_refill_with_changed_input_clears_stale_spill(filled, tmp_path):
    src, out, _ = filled
    # the user edits the workbook (here with openpyxl): a smaller partial-fraction table
    edited = build_user_book(tmp_path / "edited.xlsx", partfrac="1/(s+1)")
    first = fill_workbook(src, tmp_path / "one.xlsx", use_cache=False)
    # carry the first fill's spill record over by filling the first output in place after editing it
    shutil.copy(tmp_path / "one.xlsx", tmp_path / "two.xlsx")
    wb = openpyxl.load_workbook(tmp_path / "two.xlsx")
    wb["Design"]["E2"] = '=SF_PARTFRAC("1/(s+1)")'
    wb.save(tmp_path / "two.xlsx")
    report = fill_workbook(tmp_path / "two.xlsx", in_place=True, use_cache=False)
    assert report.cleared > 0 and Path(report.backup).exists() and first.spilled > report.spilled
    ws = openpyxl.load_workbook(tmp_path / "two.xlsx", data_only=True)["Design"]
    assert ws["H3"].value == -1 and ws["E4"].value is None and ws["E6"].value is None
    assert ws["E12"].value == "kept text"
    assert edited.exists()


def test_second_fill_from_cache(tmp_path):
    from sheetfuncs.engine.cache import ResultStore
    src = build_user_book(tmp_path / "c.xlsx")
    store = ResultStore(tmp_path / "cache.sqlite3")
    a = fill_workbook(src, tmp_path / "c1.xlsx", store=store)
    b = fill_workbook(src, tmp_path / "c2.xlsx", store=store)
    assert a.cache_hits < b.cache_hits and b.cache_hits == b.cells - b.errors
    wa = openpyxl.load_workbook(tmp_path / "c1.xlsx", data_only=True)
    wb = openpyxl.load_workbook(tmp_path / "c2.xlsx", data_only=True)
    assert [c.value for c in wa["Data"]["B"]] == [c.value for c in wb["Data"]["B"]]


def test_xlsm_keeps_vba_project(tmp_path):
    src = build_user_book(tmp_path / "m.xlsx")
    blob = bytes(range(256)) * 40
    xlsm = add_member(src, "xl/vbaProject.bin", blob, tmp_path / "m.xlsm")
    fill_workbook(xlsm, tmp_path / "m_out.xlsm", use_cache=False)
    assert zipfile.ZipFile(tmp_path / "m_out.xlsm").read("xl/vbaProject.bin") == blob


def test_never_overwrites_input_without_in_place(tmp_path):
    src = build_user_book(tmp_path / "keep.xlsx")
    before = src.read_bytes()
    r = fill_workbook(src, use_cache=False)
    assert src.read_bytes() == before and r.output.endswith("keep_filled.xlsx")
    with pytest.raises(WorkbookError, match="overwrite"):
        fill_workbook(src, src)


@pytest.mark.parametrize("content, why", [(b"not a zip at all", "zip"), (b"", ""),
                                          (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 600, "")])
def test_bad_files_write_nothing(tmp_path, content, why):
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(content)
    with pytest.raises(WorkbookError) as info:
        fill_workbook(bad, tmp_path / "out.xlsx")
    assert "bad.xlsx" in str(info.value) and why in str(info.value).lower()
    assert not (tmp_path / "out.xlsx").exists()


def test_cli_fill_json_and_folder(tmp_path, capsys):
    build_user_book(tmp_path / "a.xlsx")
    build_user_book(tmp_path / "b.xlsx")
    (tmp_path / "c.xlsx").write_bytes(b"garbage")
    code = main(["fill", str(tmp_path), "-o", str(tmp_path / "out"), "--json", "--no-cache"])
    out, err = capsys.readouterr()
    d = json.loads(out)
    # exit 1: output written, but one book failed (and cells hold errors)
    assert code == 1 and len(d["filled"]) == 2 and len(d["failed"]) == 1 and err.startswith("error:")
    assert (tmp_path / "out" / "a.xlsx").exists()
    assert d["failed"][0]["error"].count(str(tmp_path / "c.xlsx")) == 1     # the path once
    code = main(["fill", str(tmp_path / "a.xlsx"), "-o", str(tmp_path / "a2.xlsx")])
    out, err = capsys.readouterr()
    assert code == 1 and "cells" in out and "Design!B9:" in out and "1 cell holds errors" in err
    code = main(["fill", str(tmp_path / "c.xlsx"), "-o", str(tmp_path / "c2.xlsx")])
    assert code == 2 and not (tmp_path / "c2.xlsx").exists()          # nothing written


def test_cli_fill_exit_0_when_every_cell_filled(tmp_path, capsys):
    wb = openpyxl.Workbook()
    wb.active["A1"], wb.active["B1"] = "1/(s+2)", "=SF_INVERSE(A1)"
    wb.save(tmp_path / "ok.xlsx")
    code = main(["fill", str(tmp_path / "ok.xlsx"), "-o", str(tmp_path / "new") + "/", "--no-cache"])
    out, err = capsys.readouterr()
    assert code == 0 and "0 with errors" in out and err == ""
    assert (tmp_path / "new" / "ok.xlsx").is_file()                     # -o DIR/ writes into DIR


def test_unreadable_formula_is_that_cells_error(tmp_path):
    src = build_user_book(tmp_path / "u.xlsx")
    wb = openpyxl.load_workbook(src)
    wb["Design"]["B11"] = "=SF_INVERSE((B2)"          # the tokenizer cannot read it
    wb.save(src)
    report = fill_workbook(src, tmp_path / "u_out.xlsx", use_cache=False)
    assert "Design!B11" in report.error_names
    out = openpyxl.load_workbook(tmp_path / "u_out.xlsx", data_only=True)["Design"]
    assert out["B11"].value.startswith("#SF!") and "read" in out["B11"].value
    assert out["B4"].value and not str(out["B4"].value).startswith("#SF!")   # the rest is filled


def _make_shared(path: Path, out: Path, sheet_member: str, first: int, last: int, col: str = "B"):
    """Rewrite a column of formulas as one shared formula group, as Excel saves a filled-down column."""
    with zipfile.ZipFile(path) as zin:
        root = etree.fromstring(zin.read(sheet_member))
        ns = {"m": root.nsmap[None]}
        for r in range(first, last + 1):
            c = root.find(f".//m:c[@r='{col}{r}']", ns)
            f = c.find("m:f", ns)
            f.set("t", "shared")
            f.set("si", "0")
            if r == first:
                f.set("ref", f"{col}{first}:{col}{last}")
            else:
                f.text = None
        data = etree.tostring(root, xml_declaration=True, encoding="UTF-8", standalone=True)
        with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zout:
            for info in zin.infolist():
                zout.writestr(info, data if info.filename == sheet_member else zin.read(info.filename))
    return out


def test_shared_formula_column_is_unshared_and_reads_in_libreoffice(tmp_path):
    src = build_user_book(tmp_path / "plain.xlsx")
    shared = _make_shared(src, tmp_path / "shared.xlsx", "xl/worksheets/sheet2.xml", 2, N + 1)
    assert openpyxl.load_workbook(shared)["Data"]["B5"].value == '=SF_RESPONSE(Design!$B$2,A5,"step")'
    fill_workbook(shared, tmp_path / "shared_out.xlsx", use_cache=False)
    xml = zipfile.ZipFile(tmp_path / "shared_out.xlsx").read("xl/worksheets/sheet2.xml")
    assert b't="shared"' not in xml
    lo.require_soffice()
    rows = lo.to_csv_all_sheets(tmp_path / "shared_out.xlsx", tmp_path)["Data"]
    y = [float(r[1]) for r in rows[1:N + 1]]
    assert np.allclose(y, sf.sample("4/(s^2+1.2s+4)", TIMES, input="step").y, rtol=1e-12, atol=1e-14)


def test_partly_unshared_group_is_refused(tmp_path):
    from sheetfuncs.workbook.package import CellWrite, write_results
    src = build_user_book(tmp_path / "plain.xlsx")
    shared = _make_shared(src, tmp_path / "shared.xlsx", "xl/worksheets/sheet2.xml", 2, 5)
    with pytest.raises(WorkbookError, match="shared formula group"):
        write_results(shared, tmp_path / "bad.xlsx",
                      [CellWrite("Data", "B2", 1.0, own_formula='SF_RESPONSE(Design!$B$2,A2,"step")')])
    assert not (tmp_path / "bad.xlsx").exists()


def test_native_formulas_get_cached_values_for_data_only_readers(filled):
    # a data-only reader (openpyxl data_only, like pandas) sees native results as well as ours
    _, out, _ = filled
    wb = openpyxl.load_workbook(out, data_only=True)
    design, data = wb["Design"], wb["Data"]
    assert design["B7"].value == pytest.approx(2 * design["B5"].value)       # =B5*2 over our cell
    assert design["B8"].value == 2.5 + 1   # =SUM(B3,1)
    for i in (2, 10, N + 1):
        assert data[f"C{i}"].value == pytest.approx(2 * data[f"B{i}"].value)
