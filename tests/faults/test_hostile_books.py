"""Hostile packages and odd paths: DOCTYPEs and entity bombs, zip bombs,
traversal member names, sheets outside xl/, FIFOs, -o DIR/, huge ranges and
books too big for memory.  Refusals write nothing and leave the input
byte-identical; successes change only our cells (tests/faults/compare.py)."""
from __future__ import annotations

import os
import time
import zipfile
from pathlib import Path

import openpyxl
import pytest

from sheetfuncs.errors import WorkbookError
from sheetfuncs.fill import fill_workbook
from sheetfuncs.benchmarks.fill import build_bomb, build_rows
from tests.faults.compare import differences
from tests.faults.conftest import build_book, run_cli, values


def rewrite(src: Path, out: Path, change) -> Path:
    """Copy a package member by member through ``change(name, data) -> [(name, data)]``."""
    with zipfile.ZipFile(src) as zi, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zo:
        for info in zi.infolist():
            for name, data in change(info.filename, zi.read(info)):
                zo.writestr(name, data)
    return out


def refused(book: Path, *words, cli=False):
    """Fill must refuse ``book`` with ``words`` in the message, writing nothing."""
    before = book.read_bytes()
    out = book.with_name("out_" + book.name)
    if cli:                                   # through the command: exit 2, the path once
        r = run_cli("fill", book, "-o", out, "--no-cache")
        assert r.returncode == 2, (r.stdout, r.stderr)
        message = r.stderr
        assert message.count(str(book)) == 1
    else:
        with pytest.raises(WorkbookError) as info:
            fill_workbook(book, out, use_cache=False)
        message = str(info.value)
    for w in words:
        assert w in message, message
    assert "internal error" not in message
    assert book.read_bytes() == before and not out.exists()
    assert not [p for p in book.parent.iterdir() if p.name.startswith(".~")]


LAUGHS = (b'<?xml version="1.0"?>\n<!DOCTYPE sst [<!ENTITY a "haha"><!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;">'
          b'<!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;"><!ENTITY d "&c;&c;&c;&c;&c;&c;&c;&c;">]>'
          b'<sst xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" count="1" uniqueCount="1">'
          b'<si><t>&d;</t></si></sst>')


@pytest.mark.parametrize("part", ["xl/workbook.xml", "xl/worksheets/sheet1.xml", "xl/_rels/workbook.xml.rels",
                                  "xl/styles.xml"])
def test_doctype_is_refused_in_any_part(tmp_path, part):
    src = build_book(tmp_path / "b.xlsx")

    def change(name, data):
        if name == part:
            doctype = b'<!DOCTYPE x [<!ENTITY e SYSTEM "file:///etc/passwd">]>\n'
            if data.startswith(b"<?xml"):
                end = data.index(b"?>") + 2
                data = data[:end] + b"\n" + doctype + data[end:]
            else:
                data = doctype + data
        return [(name, data)]
    refused(rewrite(src, tmp_path / "dt.xlsx", change), "document type declaration", part,
            cli=part == "xl/workbook.xml")


def test_entity_expansion_part_is_refused(tmp_path):
    src = build_book(tmp_path / "b.xlsx")

    def change(name, data):
        out = [(name, data)]
        if name == "[Content_Types].xml":
            out = [(name, data.replace(b"</Types>", b'<Override PartName="/xl/sharedStrings.xml" ContentType='
                                       b'"application/vnd.openxmlformats-officedocument.spreadsheetml.'
                                       b'sharedStrings+xml"/></Types>'))]
        if name == "xl/workbook.xml":
            out.append(("xl/sharedStrings.xml", LAUGHS))
        return out
    refused(rewrite(src, tmp_path / "laughs.xlsx", change), "document type declaration", "sharedStrings")


def test_zip_bomb_is_refused_before_inflating(tmp_path):
    bomb = build_bomb(tmp_path / "bomb.xlsx", 200 << 20)
    assert bomb.stat().st_size < 1_000_000
    t0 = time.perf_counter()
    with pytest.raises(WorkbookError, match="zip bomb"):
        fill_workbook(bomb, tmp_path / "bomb_out.xlsx", use_cache=False)
    assert time.perf_counter() - t0 < 5          # not a timing target: it must not inflate 200 MB
    refused(bomb, "like a zip bomb", "inflates")


def test_too_many_cells_for_memory_is_refused(tmp_path):
    book = build_rows(tmp_path / "rows.xlsx", 3000)
    before = book.read_bytes()
    r = run_cli("fill", book, "-o", tmp_path / "o.xlsx", "--no-cache", env={"SHEETFUNCS_FILL_MAX_CELLS": "5000"})
    assert r.returncode == 2 and "more than 5,000 cells" in r.stderr and "SHEETFUNCS_FILL_MAX_CELLS" in r.stderr
    assert book.read_bytes() == before and not (tmp_path / "o.xlsx").exists()


def test_traversal_member_names_are_copied_not_followed(tmp_path):
    src = build_book(tmp_path / "b.xlsx")
    inner = tmp_path / "inner"
    inner.mkdir()

    def change(name, data):
        out = [(name, data)]
        if name == "xl/workbook.xml":
            out += [("../../evil.txt", b"outside"), ("/abs/evil.txt", b"absolute")]
        return out
    book = rewrite(src, inner / "trav.xlsx", change)
    out = inner / "out.xlsx"
    report = fill_workbook(book, out, use_cache=False)
    assert report.errors == 0
    assert not (tmp_path / "evil.txt").exists() and not Path("/abs/evil.txt").exists()
    with zipfile.ZipFile(out) as z:
        assert z.read("../../evil.txt") == b"outside"
    assert differences(book, out) == []


def test_sheet_part_outside_xl_is_filled(tmp_path):
    src = build_book(tmp_path / "b.xlsx")

    def change(name, data):
        if name == "xl/worksheets/sheet1.xml":
            return [("elsewhere/loop.xml", data)]
        data = data.replace(b"/xl/worksheets/sheet1.xml", b"/elsewhere/loop.xml")
        return [(name, data)]
    book = rewrite(src, tmp_path / "moved.xlsx", change)
    out = tmp_path / "moved_out.xlsx"
    report = fill_workbook(book, out, use_cache=False)
    assert report.errors == 0 and report.cells == 3
    assert values(out)[("Loop", (2, 2))].replace(" ", "").startswith("1.5*exp(-t)")
    assert differences(book, out) == []


def test_fifo_and_folder_are_refused_with_the_right_words(tmp_path):
    fifo = tmp_path / "pipe.xlsx"
    os.mkfifo(fifo)
    r = run_cli("fill", fifo, "--no-cache", timeout=60)
    assert r.returncode == 2 and "named pipe (FIFO)" in r.stderr and "not found" not in r.stderr
    for kw in ({"dst": tmp_path / "o.xlsx"}, {"in_place": True}):
        with pytest.raises(WorkbookError, match=r"is a named pipe \(FIFO\), not a regular file"):
            fill_workbook(fifo, use_cache=False, **kw)
    book = build_book(tmp_path / "b.xlsx")
    out_fifo = tmp_path / "out.xlsx"
    os.mkfifo(out_fifo)
    with pytest.raises(WorkbookError, match=r"named pipe \(FIFO\)"):
        fill_workbook(book, out_fifo, use_cache=False)
    assert out_fifo.is_fifo()                          # not replaced by a file
    folder = tmp_path / "d.xlsx"
    folder.mkdir()
    with pytest.raises(WorkbookError, match="is a folder"):
        fill_workbook(folder, use_cache=False)


def test_output_into_a_new_folder(tmp_path):
    book = build_book(tmp_path / "b.xlsx")
    r = run_cli("fill", book, "-o", str(tmp_path / "newdir") + "/", "--no-cache")
    assert r.returncode == 0, r.stderr
    assert (tmp_path / "newdir" / "b.xlsx").is_file() and not (tmp_path / "newdir").is_file()


def test_huge_range_is_that_cells_error(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    wb.create_sheet("Other")["A1"] = 1
    ws["A1"] = "1/(s+1)"
    ws["B1"] = "=SF_INVERSE(A1, Other!A1:XFD1048576)"
    ws["B2"] = "=SF_INVERSE(A1)"
    wb.save(tmp_path / "h.xlsx")
    report = fill_workbook(tmp_path / "h.xlsx", tmp_path / "h_out.xlsx", use_cache=False)
    assert report.error_names == ("S!B1",) and "17,179,869,184 cells" in report.error_cells[0][1]
    assert differences(tmp_path / "h.xlsx", tmp_path / "h_out.xlsx") == []
