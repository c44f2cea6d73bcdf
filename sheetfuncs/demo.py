"""The demo: copy the example calculation workbooks to a folder, fill them
headlessly, and print what was made and the key figures read back from the
filled files."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from .fill import fill_workbook

CAUTION = ("Results support engineering judgement; safety-relevant designs follow local codes "
           "and licensed review.")


@dataclass(frozen=True)
class DemoResult:
    folder: str
    books: tuple        # dicts: file, title, cells, errors, seconds, figures [(label, value, unit)]

    def to_dict(self) -> dict:
        return {"folder": self.folder, "workbooks": list(self.books), "caution": CAUTION}

    def text(self) -> str:
        lines = [f"sheetfuncs demo: filled workbooks in {self.folder}", ""]
        for b in self.books:
            lines.append(f"{b['file']}  ({b['cells']} cells computed, {b['errors']} errors, "
                         f"{b['seconds']:.2f} s)")
            lines.append(f"  {b['title']}")
            width = max((len(f[0]) for f in b["figures"]), default=0)
            for label, value, unit in b["figures"]:
                if value is None:
                    lines.append(f"    {label.ljust(width)} : (a native formula: the spreadsheet "
                                 f"computes it on opening)")
                    continue
                shown = f"{value:.6g}" if isinstance(value, (int, float)) else str(value)
                lines.append(f"    {label.ljust(width)} : {shown} {unit}".rstrip())
            lines.append("")
        lines.append("Open them in LibreOffice Calc or Excel. To recompute live as you edit, run "
                     "'sheetfuncs libreoffice install' once (or set up the Excel add-in: docs/excel.md); "
                     "otherwise edit the inputs and run 'sheetfuncs fill BOOK.xlsx --in-place'.")
        lines.append(CAUTION)
        return "\n".join(lines)


def _new_folder(base: Path) -> Path:
    candidate, i = base, 2
    while candidate.exists():
        candidate = base.with_name(f"{base.name}-{i}")
        i += 1
    return candidate


def _build_only(tmp: Path) -> dict[str, Path]:
    from .templates import build_all
    return {p.stem: p for p in build_all(tmp)}


def _template_files(tmp: Path) -> dict[str, Path]:
    """The committed workbooks/ folder when running from a checkout, else freshly built ones."""
    from .templates import TEMPLATES
    repo = Path(__file__).resolve().parent.parent / "workbooks"
    names = list(TEMPLATES)
    if all((repo / f"{n}.xlsx").is_file() for n in names):
        return {n: repo / f"{n}.xlsx" for n in names}
    return _build_only(tmp)


def run_demo(folder: str | None = None) -> DemoResult:
    import tempfile

    import openpyxl

    from .templates import describe
    out = Path(folder) if folder else _new_folder(Path.cwd() / "sheetfuncs-demo")
    out.mkdir(parents=True, exist_ok=True)
    infos = {d["name"]: d for d in describe()}
    books = []
    with tempfile.TemporaryDirectory() as tmp:
        for name, src in _template_files(Path(tmp)).items():
            dst = out / f"{name}.xlsx"
            report = fill_workbook(src, dst)
            wb = openpyxl.load_workbook(dst, data_only=True, read_only=True)
            figures = []
            for f in infos[name]["figures"]:
                value = wb[f["sheet"]][f["cell"]].value
                figures.append((f["label"], value, f.get("unit", "")))
            wb.close()
            books.append({"file": str(dst), "title": infos[name]["title"], "cells": report.cells,
                          "errors": report.errors, "seconds": report.seconds, "figures": figures})
    return DemoResult(str(out), tuple(books))
