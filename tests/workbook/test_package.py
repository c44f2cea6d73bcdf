"""Tests of sheetfuncs.workbook.package: in-place cached results in a zip package.

Checks are made against things outside the module: zipfile/lxml views of the
original package, openpyxl reading the result back, and the real LibreOffice
(CSV and PDF export) plus poppler for the chart picture.
"""
from __future__ import annotations

import math
import os
import random
import shutil
import zipfile
from pathlib import Path

import openpyxl
import pytest
from lxml import etree
from openpyxl.chart import LineChart, Reference
from openpyxl.comments import Comment
from openpyxl.styles import Font, PatternFill
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.worksheet.datavalidation import DataValidation

from sheetfuncs.errors import WorkbookError
from sheetfuncs.workbook.package import NONFINITE_TEXT, CellWrite, read_package, write_results
from tests.lo import (pdf_page_count, pdf_page_png, png_ink, png_is_blank, png_pixels,
                      require_soffice, require_tool, to_csv_all_sheets, to_pdf)

NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
TAU = 0.5
TIMES = [0.1 * k for k in range(10)]              # Results!A2:A11
LABEL = 'τ = 0.5 s <ok> & "quoted"'
SPILL = [0.25 * k - 1 for k in range(14)]          # Results!E2:E15 (E2 is the anchor)


def step(t: float) -> float:
    return 1.0 - math.exp(-t / TAU)


# ---------------------------------------------------------------- building blocks

def build_workbook(path: Path) -> None:
    """Three sheets with styles, names, validation, comment, merge, chart and our formulas."""
    wb = openpyxl.Workbook()
    inp = wb.active
    inp.title = "Inputs"
    inp["A1"], inp["B1"] = "Time constant", TAU
    inp["A2"], inp["B2"] = "Gain", 2.0
    inp["A1"].font = Font(bold=True, color="FF0000")
    inp["A1"].fill = PatternFill("solid", fgColor="FFFF00")
    inp["B1"].number_format = "0.000"
    inp["B1"].comment = Comment("seconds", "tester")
    inp.column_dimensions["A"].width = 24
    inp.merge_cells("A5:C5")
    inp["A5"] = "merged title"
    inp["A7"] = "=SUM(B1:B2)"
    dv = DataValidation(type="decimal", operator="between", formula1="0", formula2="10")
    inp.add_data_validation(dv)
    dv.add("B2")
    wb.defined_names["tau"] = DefinedName("tau", attr_text="Inputs!$B$1")

    res = wb.create_sheet("Results")
    res["A1"], res["B1"], res["C1"] = "t", "y", "2y"
    for i, t in enumerate(TIMES, start=2):
        res[f"A{i}"] = t
        res[f"B{i}"] = f"=SF_STEPAT(A{i}, tau)"
        res[f"B{i}"].number_format = "0.0000"
        res[f"C{i}"] = f"=B{i}*2"
        res[f"C{i}"].number_format = "0.000000"
    res["D2"] = "=SF_LABEL(Inputs!B1)"
    res["E2"] = "=SF_SPILL(A2:A4)"
    res["E2"].number_format = "0.00"
    res["F2"], res["F3"], res["F4"], res["F5"] = "=SF_BAD(A2)", "=SF_FLAG(A2)", "=SF_NONE(A2)", "=SF_EMPTY(A2)"
    res["J3"] = "right of the spill"
    res["A13"] = "note"
    res.column_dimensions["D"].width = 30
    res.column_dimensions["F"].width = 26

    plot = wb.create_sheet("Plot")
    chart = LineChart()
    chart.title = "step"
    chart.add_data(Reference(res, min_col=2, min_row=1, max_row=11), titles_from_data=True)
    chart.set_categories(Reference(res, min_col=1, min_row=2, max_row=11))
    chart.width, chart.height = 16, 8
    plot.add_chart(chart, "B2")
    for ws in wb.worksheets:                       # one printed page per sheet
        ws.sheet_properties.pageSetUpPr.fitToPage = True
        ws.page_setup.fitToWidth = ws.page_setup.fitToHeight = 1
    wb.save(path)


def main_writes() -> list[CellWrite]:
    w = [CellWrite("Results", f"B{i}", step(t)) for i, t in enumerate(TIMES, start=2)]
    w.append(CellWrite("Results", "D2", LABEL))
    w.append(CellWrite("Results", "E2", SPILL[0]))
    w += [CellWrite("Results", f"E{i}", v, constant=True) for i, v in enumerate(SPILL[1:], start=3)]
    w += [CellWrite("Results", "F2", float("nan")), CellWrite("Results", "F3", True),
          CellWrite("Results", "F4", None), CellWrite("Results", "F5", "")]
    return w


def sheet_root(zf: zipfile.ZipFile, member: str):
    return etree.fromstring(zf.read(member))


def cells_by_ref(root) -> dict:
    return {c.get("r"): c for c in root.iter(f"{{{NS}}}c")}


def c14n(el) -> bytes:
    return etree.tostring(el, method="c14n")


def replace_member(src: Path, dst: Path, member: str, data: bytes) -> None:
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            zout.writestr(info, data if info.filename == member else zin.read(info))


@pytest.fixture(scope="module")
def filled(tmp_path_factory):
    d = tmp_path_factory.mktemp("filled")
    src, dst = d / "model.xlsx", d / "model-filled.xlsx"
    build_workbook(src)
    counts = write_results(src, dst, main_writes())
    return src, dst, counts


@pytest.fixture(scope="module")
def lo_csv(filled, tmp_path_factory):
    require_soffice()
    return to_csv_all_sheets(filled[1], tmp_path_factory.mktemp("csv"))


# ---------------------------------------------------------------- package structure

def test_sheet_names_and_paths(filled):
    src, _, _ = filled
    pkg = read_package(src)
    assert pkg.sheet_names() == openpyxl.load_workbook(src).sheetnames
    with zipfile.ZipFile(src) as zf:
        for name in pkg.sheet_names():
            root = sheet_root(zf, pkg.sheet_xml_path(name))
            assert etree.QName(root).localname == "worksheet"
    assert read_package(src.read_bytes()).sheet_names() == pkg.sheet_names()
    assert pkg.sheet_xml_path("results") == pkg.sheet_xml_path("Results")   # case-insensitive like Excel


def test_other_members_byte_identical(filled):
    src, dst, counts = filled
    pkg = read_package(src)
    patched = {pkg.sheet_xml_path("Results"), "xl/workbook.xml"}
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst) as b:
        ia, ib = a.infolist(), b.infolist()
        assert [i.filename for i in ia] == [i.filename for i in ib]
        assert [i.compress_type for i in ia] == [i.compress_type for i in ib]
        assert [i.date_time for i in ia] == [i.date_time for i in ib]
        for info in ia:
            if info.filename not in patched:
                assert a.read(info.filename) == b.read(info.filename), info.filename
        assert any(n.startswith("xl/charts/") for n in a.namelist())
    assert counts["sheets_patched"] == 1 and counts["members"] == len(ia)


def test_only_target_cells_change(filled):
    src, dst, counts = filled
    member = read_package(src).sheet_xml_path("Results")
    targets = {w.ref for w in main_writes()}
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst) as b:
        old, new = sheet_root(a, member), sheet_root(b, member)
    oc, nc = cells_by_ref(old), cells_by_ref(new)
    for ref, c in oc.items():
        if ref not in targets:
            assert c14n(c) == c14n(nc[ref]), ref
    created = set(nc) - set(oc)
    assert created == {f"E{i}" for i in range(3, 16)}
    assert counts["cells_created"] == len(created) and counts["rows_created"] == 3   # rows 12, 14, 15
    # cell order inside every row and row order stay ascending
    for row in new.iter(f"{{{NS}}}row"):
        cols = [openpyxl.utils.cell.coordinate_from_string(c.get("r"))[0] for c in row]
        idx = [openpyxl.utils.column_index_from_string(x) for x in cols]
        assert idx == sorted(idx)
    rows = [int(r.get("r")) for r in new.iter(f"{{{NS}}}row")]
    assert rows == sorted(rows)
    # everything outside sheetData is unchanged except the used range
    for root in (old, new):
        root.remove(root.find(f"{{{NS}}}sheetData"))
    dim_old, dim_new = old.find(f"{{{NS}}}dimension"), new.find(f"{{{NS}}}dimension")
    assert dim_old.get("ref") == "A1:J13" and dim_new.get("ref") == "A1:J15"
    dim_new.set("ref", dim_old.get("ref"))
    assert c14n(old) == c14n(new)


def test_target_cells_xml(filled):
    src, dst, _ = filled
    member = read_package(src).sheet_xml_path("Results")
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst) as b:
        oc, nc = cells_by_ref(sheet_root(a, member)), cells_by_ref(sheet_root(b, member))
    f, v = f"{{{NS}}}f", f"{{{NS}}}v"
    for i, t in enumerate(TIMES, start=2):
        c = nc[f"B{i}"]
        assert c14n(c.find(f)) == c14n(oc[f"B{i}"].find(f))          # formula untouched
        assert c.get("t") is None and float(c.find(v).text) == step(t)
        assert c.get("s") == oc[f"B{i}"].get("s")                       # style kept
    assert nc["D2"].get("t") == "str" and nc["D2"].find(v).text == LABEL
    assert nc["F2"].get("t") == "str" and nc["F2"].find(v).text == NONFINITE_TEXT
    assert nc["F3"].get("t") is None and nc["F3"].find(v).text == "1"
    assert nc["F4"].find(v) is None and nc["F4"].find(f).text == "SF_NONE(A2)"
    for i, x in enumerate(SPILL[1:], start=3):
        c = nc[f"E{i}"]
        assert c.find(f) is None and float(c.find(v).text) == x


def test_openpyxl_reads_result_back(filled):
    src, dst, _ = filled
    vals = openpyxl.load_workbook(dst, data_only=True)
    forms = openpyxl.load_workbook(dst)
    orig = openpyxl.load_workbook(src)
    r = vals["Results"]
    assert [r[f"B{i}"].value for i in range(2, 12)] == [step(t) for t in TIMES]
    assert r["D2"].value == LABEL and r["F2"].value == NONFINITE_TEXT and r["F3"].value == 1
    assert [r[f"E{i}"].value for i in range(2, 16)] == SPILL
    assert r["J3"].value == "right of the spill" and r["A13"].value == "note"
    fr, orr = forms["Results"], orig["Results"]
    for row_new, row_old in zip(fr.iter_rows(max_row=11), orr.iter_rows(max_row=11)):
        for a, b in zip(row_new, row_old):
            if isinstance(b.value, str) and b.value.startswith("="):
                assert a.value == b.value
            assert a.number_format == b.number_format
    i_new, i_old = forms["Inputs"], orig["Inputs"]
    assert i_new["A1"].font.b and i_new["A1"].fill.fgColor.rgb == i_old["A1"].fill.fgColor.rgb
    assert i_new.column_dimensions["A"].width == i_old.column_dimensions["A"].width
    assert [str(m) for m in i_new.merged_cells.ranges] == ["A5:C5"]
    assert i_new["B1"].comment.text == "seconds"
    assert [str(x.sqref) for x in i_new.data_validations.dataValidation] == ["B2"]
    assert forms.defined_names["tau"].attr_text == "Inputs!$B$1"


def test_full_calc_on_load(tmp_path, filled):
    src, dst, counts = filled
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst) as b:
        old, new = a.read("xl/workbook.xml"), b.read("xl/workbook.xml")
    old_root, new_root = etree.fromstring(old), etree.fromstring(new)
    assert old_root.find(f"{{{NS}}}calcPr").get("fullCalcOnLoad") == "1"
    assert new_root.find(f"{{{NS}}}calcPr").get("fullCalcOnLoad") is None
    assert counts["full_calc_on_load_removed"]
    del old_root.find(f"{{{NS}}}calcPr").attrib["fullCalcOnLoad"]
    assert c14n(old_root) == c14n(new_root)
    keep = tmp_path / "keep.xlsx"
    write_results(src, keep, [CellWrite("Results", "B2", 1.5)], calc_full_on_load_off=False)
    with zipfile.ZipFile(keep) as k:
        assert k.read("xl/workbook.xml") == old


# ---------------------------------------------------------------- real LibreOffice

def test_libreoffice_shows_cached_values(lo_csv):
    assert set(lo_csv) == {"Inputs", "Results", "Plot"}
    res = lo_csv["Results"]
    for i, t in enumerate(TIMES, start=1):                            # raw values, 15 digits
        assert float(res[i][1]) == pytest.approx(step(t), rel=1e-14, abs=1e-300)  # our cache
        assert float(res[i][2]) == pytest.approx(2 * step(t), rel=1e-14, abs=1e-300)  # =B*2 by LibreOffice
    assert res[1][3] == LABEL
    assert [float(res[i][4]) for i in range(1, 15)] == SPILL
    assert res[1][5] == NONFINITE_TEXT and res[2][5] == "1"
    assert res[2][9] == "right of the spill" and res[12][0] == "note"
    assert float(lo_csv["Inputs"][6][0]) == TAU + 2.0                  # native =SUM still computes
    flat = [x for row in res for x in row]
    assert not any(x.startswith("Err:") for x in flat)


def test_libreoffice_recomputes_empty_caches(lo_csv):
    """Measured limit: with no cached value (None) or empty text LibreOffice computes
    the formula itself, so our functions show #NAME? there."""
    res = lo_csv["Results"]
    assert res[3][5] == "#NAME?" and res[4][5] == "#NAME?"


def test_chart_page_not_blank(filled, tmp_path):
    require_soffice()
    require_tool("pdftoppm")
    require_tool("pdfinfo")
    src, dst, _ = filled
    ink = {}
    for name, path in (("before", src), ("after", dst)):
        pdf = to_pdf(path, tmp_path / name)
        assert pdf_page_count(pdf) == 3                                 # one page per sheet
        png = pdf_page_png(pdf, 3, tmp_path / name)
        assert not png_is_blank(png)
        ink[name] = png_ink(png)
    # before filling our cells are #NAME? and no curve is drawn; after, the rising curve is
    assert ink["after"]["color_rows"] > ink["before"]["color_rows"] + 20


def test_png_decoder_matches_pdftoppm_ppm(tmp_path):
    """The pillow-free PNG decoder of the harness against pdftoppm's raw PPM output."""
    require_tool("pdftoppm")
    pdf = tmp_path / "p.pdf"
    pdf.write_bytes(_tiny_pdf())
    png = pdf_page_png(pdf, 1, tmp_path, dpi=30)
    import subprocess

    import numpy as np
    subprocess.run(["pdftoppm", "-r", "30", "-singlefile", str(pdf), str(tmp_path / "ref")],
                   check=True, timeout=60)
    raw = (tmp_path / "ref.ppm").read_bytes()
    magic, dims, maxval, pixels = raw.split(b"\n", 3)
    w, h = map(int, dims.split())
    assert magic == b"P6" and maxval == b"255"
    ref = np.frombuffer(pixels, np.uint8).reshape(h, w, 3)
    got = png_pixels(png)
    assert got.shape == ref.shape and (got == ref).all()
    assert not png_is_blank(png) and png_ink(png)["color"] > 0.05


def _tiny_pdf() -> bytes:
    """A one-page PDF with a red filled square and a black diagonal line."""
    content = b"1 0 0 rg 50 50 100 100 re f 0 G 4 w 0 0 m 200 200 l S"
    objs = [b"<< /Type /Catalog /Pages 2 0 R >>",
            b"<< /Type /Pages /Kids [3 0 R] /Count 1 >>",
            b"<< /Type /Page /Parent 2 0 R /MediaBox [0 0 200 200] /Contents 4 0 R >>",
            b"<< /Length %d >>\nstream\n" % len(content) + content + b"\nendstream"]
    out, offsets = bytearray(b"%PDF-1.4\n"), []
    for i, body in enumerate(objs, start=1):
        offsets.append(len(out))
        out += b"%d 0 obj\n" % i + body + b"\nendobj\n"
    xref = len(out)
    out += b"xref\n0 %d\n0000000000 65535 f \n" % (len(objs) + 1)
    out += b"".join(b"%010d 00000 n \n" % o for o in offsets)
    out += b"trailer\n<< /Size %d /Root 1 0 R >>\nstartxref\n%d\n%%%%EOF\n" % (len(objs) + 1, xref)
    return bytes(out)


# ---------------------------------------------------------------- hand-made sheet XML

MC = "http://schemas.openxmlformats.org/markup-compatibility/2006"
X14AC = "http://schemas.microsoft.com/office/spreadsheetml/2009/9/ac"
HANDMADE = f"""<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<worksheet xmlns="{NS}" xmlns:mc="{MC}" xmlns:x14ac="{X14AC}" mc:Ignorable="x14ac">
<sheetFormatPr defaultRowHeight="15" x14ac:dyDescent="0.25"/>
<sheetData>
<row r="1" spans="1:3" x14ac:dyDescent="0.25"><c r="A1"><v>1</v></c><c r="B1" t="e"><f>SF_A(A1)</f><v>#NAME?</v></c><c r="C1" t="inlineStr"><f>SF_B(A1)</f><is><t>old</t></is></c></row>
<row r="2"><c r="A2"><v>2</v></c><c r="B2"><f t="shared" ref="B2:B3" si="0">SF_C(A2)</f><v>0</v></c></row>
<row r="3"><c r="A3"><v>3</v></c><c r="B3"><f t="shared" si="0"/><v>0</v></c></row>
<row><c><v>4</v></c><c><f>SF_D(A4)</f><v></v></c></row>
<row r="6"><c r="B6"><f t="array" ref="B6:B7">SF_E(A1)</f><v>0</v></c></row>
<row r="7"><c r="B7"><v>0</v></c></row>
</sheetData>
<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>
</worksheet>"""

HANDMADE_WRITES = [
    CellWrite("Hand", "B1", 0.75), CellWrite("Hand", "C1", "new text"),
    CellWrite("Hand", "B2", 11), CellWrite("Hand", "B3", 12),
    CellWrite("Hand", "B4", 5.5), CellWrite("Hand", "D4", 9, constant=True),
    CellWrite("Hand", "E5", "spill text", constant=True),
    CellWrite("Hand", "B6", 1), CellWrite("Hand", "B7", 2, constant=True),
    CellWrite("Hand", "F1", 42, formula="=SF_NEW(A1)"),
]


@pytest.fixture(scope="module")
def handmade(tmp_path_factory):
    d = tmp_path_factory.mktemp("hand")
    base, src, dst = d / "base.xlsx", d / "hand.xlsx", d / "hand-filled.xlsx"
    wb = openpyxl.Workbook()
    wb.active.title = "Hand"
    wb.save(base)
    replace_member(base, src, "xl/worksheets/sheet1.xml", HANDMADE.encode())
    counts = write_results(src, dst, HANDMADE_WRITES)
    return src, dst, counts


def test_handmade_xml(handmade):
    src, dst, counts = handmade
    with zipfile.ZipFile(dst) as zf:
        raw = zf.read("xl/worksheets/sheet1.xml")
    root = etree.fromstring(raw)
    assert raw.startswith(b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>')
    assert root.nsmap["mc"] == MC and root.nsmap["x14ac"] == X14AC
    assert root.get(f"{{{MC}}}Ignorable") == "x14ac"
    assert root.find(f"{{{NS}}}dimension") is None                   # none before, none added
    rows = list(root.iter(f"{{{NS}}}row"))
    assert [r.get("r") for r in rows] == ["1", "2", "3", "4", "5", "6", "7"]
    assert rows[0].get("spans") == "1:6"
    assert rows[0].get(f"{{{X14AC}}}dyDescent") == "0.25"
    assert [c.get("r") for c in rows[3]] == ["A4", "B4", "D4"]
    c = cells_by_ref(root)
    old = cells_by_ref(etree.fromstring(HANDMADE.encode()))
    f, v = f"{{{NS}}}f", f"{{{NS}}}v"
    assert c["B1"].get("t") is None and c["B1"].find(v).text == "0.75"
    assert c["C1"].get("t") == "str" and c["C1"].find(f"{{{NS}}}is") is None
    assert [x.tag for x in c["C1"]] == [f, v]
    for ref in ("B2", "B3", "B6"):
        assert c14n(c[ref].find(f)) == c14n(old[ref].find(f)), ref
    assert c["F1"].find(f).text == "SF_NEW(A1)" and c["F1"].find(v).text == "42"
    assert c["E5"].get("t") == "inlineStr" and c["E5"].find(f"{{{NS}}}is/{{{NS}}}t").text == "spill text"
    assert counts["formulas"] == 1 and counts["constants"] == 3 and counts["rows_created"] == 1


def test_handmade_openpyxl_positions(handmade):
    """openpyxl (which reads rows/cells without r= by counting) agrees on every position."""
    src, dst, _ = handmade
    before = openpyxl.load_workbook(src, data_only=True)["Hand"]
    after = openpyxl.load_workbook(dst, data_only=True)["Hand"]
    forms = openpyxl.load_workbook(dst)["Hand"]
    assert before["A4"].value == 4 and after["A4"].value == 4
    assert after["B4"].value == 5.5 and after["D4"].value == 9 and after["E5"].value == "spill text"
    assert after["F1"].value == 42 and forms["F1"].value == "=SF_NEW(A1)"
    assert forms["B4"].value == "=SF_D(A4)" and forms["B3"].value == "=SF_C(A3)"


def test_handmade_in_libreoffice(handmade, tmp_path):
    require_soffice()
    src, dst, _ = handmade
    rows = to_csv_all_sheets(dst, tmp_path)["Hand"]
    assert rows[0][:3] == ["1", "0.75", "new text"] and rows[0][5] == "42"
    assert rows[3][:4] == ["4", "5.5", "", "9"] and rows[4][4] == "spill text"
    # measured limit: LibreOffice recomputes shared and array formulas on load
    assert rows[1][1] == rows[2][1] == rows[5][1] == "#NAME?"


def test_formula_over_shared_formula_refused(handmade, tmp_path):
    src, _, _ = handmade
    with pytest.raises(WorkbookError, match="shared formula") as e:
        write_results(src, tmp_path / "x.xlsx", [CellWrite("Hand", "B3", 1, formula="SF_Z(A3)")])
    assert e.value.cell == "'Hand'!B3"
    assert not (tmp_path / "x.xlsx").exists()


# ---------------------------------------------------------------- bad inputs

def _ole_file(path: Path, encrypted: bool) -> Path:
    body = bytearray(os.urandom(4096))
    if encrypted:
        name = "EncryptedPackage".encode("utf-16-le")
        body[1024:1024 + len(name)] = name
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(body))
    return path


def test_bad_files(tmp_path, filled):
    src = filled[0]
    rnd = random.Random(7)
    cases = {
        "random.xlsx": (bytes(rnd.randrange(256) for _ in range(3000)), "not a zip package"),
        "empty.xlsx": (b"", "empty"),
        "half.xlsx": (src.read_bytes()[: src.stat().st_size // 2], "damaged zip"),
    }
    for name, (data, msg) in cases.items():
        (tmp_path / name).write_bytes(data)
    files = {tmp_path / n: m for n, (_, m) in cases.items()}
    files[_ole_file(tmp_path / "locked.xlsx", True)] = "password-protected"
    files[_ole_file(tmp_path / "old.xls", False)] = r"\.xls"
    files[tmp_path / "missing.xlsx"] = "not found"
    (tmp_path / "folder.xlsx").mkdir()
    files[tmp_path / "folder.xlsx"] = "folder"
    with zipfile.ZipFile(tmp_path / "nowb.xlsx", "w") as zf:
        zf.writestr("hello.txt", "not a workbook")
    files[tmp_path / "nowb.xlsx"] = "no workbook part"
    for path, msg in files.items():
        with pytest.raises(WorkbookError, match=msg) as e:
            read_package(path)
        assert e.value.file == str(path)
        with pytest.raises(WorkbookError):
            write_results(path, tmp_path / "out.xlsx", [])
    assert not (tmp_path / "out.xlsx").exists()


def test_damaged_member_writes_nothing(tmp_path, filled):
    """A member whose bytes no longer match its CRC: error, destination untouched."""
    src = tmp_path / "stored.xlsx"
    with zipfile.ZipFile(filled[0]) as zin, zipfile.ZipFile(src, "w", zipfile.ZIP_STORED) as zout:
        for info in zin.infolist():
            zout.writestr(info.filename, zin.read(info))
    data = bytearray(src.read_bytes())
    i = data.index(b"<a:clrScheme")                 # inside xl/theme/theme1.xml (not parsed by us)
    data[i + 1] ^= 0x20
    src.write_bytes(bytes(data))
    dst = tmp_path / "dst.xlsx"
    dst.write_bytes(b"previous content")
    with pytest.raises(WorkbookError, match="damaged package") as e:
        write_results(src, dst, [CellWrite("Results", "B2", 1.0)])
    assert "theme1.xml" in str(e.value)
    assert dst.read_bytes() == b"previous content"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["dst.xlsx", "stored.xlsx"]


@pytest.fixture(scope="module")
def with_chartsheet(tmp_path_factory):
    path = tmp_path_factory.mktemp("cs") / "wb.xlsx"
    build_workbook(path)
    wb = openpyxl.load_workbook(path)
    wb.create_chartsheet("Charts")
    wb.save(path)
    return path


@pytest.mark.parametrize("write, msg, cell", [
    (CellWrite("Nope", "B2", 1), "no sheet named 'Nope'", None),
    (CellWrite("Results", "B0", 1), "outside the sheet", "'Results'!B0"),
    (CellWrite("Results", "XFE1", 1), "outside the sheet", "'Results'!XFE1"),
    (CellWrite("Results", "A1048577", 1), "outside the sheet", "'Results'!A1048577"),
    (CellWrite("Results", "7B", 1), "not a cell reference", "'Results'!7B"),
    (CellWrite("Results", "B2:B3", 1), "not a cell reference", "'Results'!B2:B3"),
    (CellWrite("Results", "", 1), "not a cell reference", "'Results'!"),
    (CellWrite("Results", "A2", 1), "no formula", "'Results'!A2"),
    (CellWrite("Results", "H20", 1), "no formula", "'Results'!H20"),
    (CellWrite("Results", "C2", 1, constant=True), "holds a formula", "'Results'!C2"),
    (CellWrite("Results", "E3", 1, formula="SF_X()", constant=True), "both", "'Results'!E3"),
    (CellWrite("Results", "B2", object()), "cannot store", "'Results'!B2"),
    (CellWrite("Results", "B2", "x" * 32768), "limit", "'Results'!B2"),
    (CellWrite("Results", "B2", "bell\x07"), "control characters", "'Results'!B2"),
    (CellWrite("Results", "H2", 1, formula="="), "empty", "'Results'!H2"),
    (CellWrite("Charts", "A1", 1), "chart sheet", None),
])
def test_bad_writes(tmp_path, with_chartsheet, write, msg, cell):
    src = tmp_path / "wb.xlsx"
    shutil.copy(with_chartsheet, src)
    dst = tmp_path / "dst.xlsx"
    good = CellWrite("Results", "B3", 0.5)                   # a valid write before the bad one
    with pytest.raises(WorkbookError, match=msg) as e:
        write_results(src, dst, [good, write])
    assert e.value.file == str(src) and e.value.cell == cell
    assert sorted(p.name for p in tmp_path.iterdir()) == ["wb.xlsx"]


def test_duplicate_write(tmp_path, filled):
    with pytest.raises(WorkbookError, match="twice"):
        write_results(filled[0], tmp_path / "d.xlsx",
                      [CellWrite("Results", "B2", 1), CellWrite("Results", "$b$2", 2)])
    assert not (tmp_path / "d.xlsx").exists()


def test_in_place_is_atomic(tmp_path, filled):
    path = tmp_path / "book.xlsx"
    shutil.copy(filled[0], path)
    os.chmod(path, 0o640)
    ino = path.stat().st_ino
    write_results(path, path, [CellWrite("Results", "B2", 0.125)])
    assert openpyxl.load_workbook(path, data_only=True)["Results"]["B2"].value == 0.125
    assert path.stat().st_ino != ino                       # replaced, not rewritten in place
    assert path.stat().st_mode & 0o777 == 0o640
    before = path.read_bytes()
    with pytest.raises(WorkbookError):
        write_results(path, path, [CellWrite("Results", "B2", 1.0), CellWrite("Results", "Q0", 1)])
    assert path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["book.xlsx"]


def test_unknown_members_copied_identically(tmp_path, filled):
    """An .xlsm-like package: vbaProject.bin (stored), customXml and a folder entry survive."""
    src, dst = tmp_path / "macro.xlsm", tmp_path / "macro-out.xlsm"
    blob = os.urandom(20000)
    with zipfile.ZipFile(filled[0]) as zin, zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            zout.writestr(info, zin.read(info))
        zout.writestr(zipfile.ZipInfo("customXml/"), b"")
        zout.writestr("xl/vbaProject.bin", blob, compress_type=zipfile.ZIP_STORED)
        zout.writestr("customXml/item1.xml", b"<root xmlns:q='urn:x' q:a='1'><q:b/></root>")
    write_results(src, dst, [CellWrite("Results", "B2", 0.25)])
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst) as b:
        assert [i.filename for i in a.infolist()] == [i.filename for i in b.infolist()]
        assert b.read("xl/vbaProject.bin") == blob
        assert b.getinfo("xl/vbaProject.bin").compress_type == zipfile.ZIP_STORED
        assert b.read("customXml/item1.xml") == a.read("customXml/item1.xml")
        assert b.getinfo("customXml/").is_dir()


def test_nonfinite_values(tmp_path, filled):
    dst = tmp_path / "nf.xlsx"
    counts = write_results(filled[0], dst, [CellWrite("Results", "B2", float("inf")),
                                            CellWrite("Results", "B3", -math.inf),
                                            CellWrite("Results", "B4", 3)])
    r = openpyxl.load_workbook(dst, data_only=True)["Results"]
    assert r["B2"].value == r["B3"].value == NONFINITE_TEXT and r["B4"].value == 3
    assert counts["nonfinite"] == 2
