"""Compare a workbook before and after ``fill``, part by part and cell by cell.

``python -m tests.faults.compare BEFORE AFTER`` prints every difference that is
not allowed and exits 1 if there is one.  Allowed after a successful fill:

* zip members: the same names in the same order; every member byte-identical
  except the worksheet parts and the workbook part;
* in those: every cell that is not one of our formula cells (a formula naming an
  ``SF_`` function) nor inside a recorded spill (hidden ``_sfspill`` names) keeps
  its value and formula text (cached values of native formulas may be added);
* workbook.xml: only ``fullCalcOnLoad`` and the ``_sfspill`` names may change.

``identical(a, b)`` is the check after a failure: the bytes are the same.
"""
from __future__ import annotations

import io
import sys
import zipfile
from pathlib import Path

import openpyxl

from sheetfuncs.errors import WorkbookError
from sheetfuncs.workbook import refs as _refs
from sheetfuncs.workbook.package import read_package


def identical(a, b) -> bool:
    return Path(a).read_bytes() == Path(b).read_bytes()


def _ours(value) -> bool:
    text = getattr(value, "text", value)
    return isinstance(text, str) and text.startswith("=") and "SF_" in text.upper()


def _spill_cells(wb) -> set:
    out = set()
    for name, dn in wb.defined_names.items():
        if not name.startswith(_refs.SPILL_NAME_PREFIX):
            continue
        ref = _refs.parse_reference(dn.attr_text.lstrip("="), "")
        out.update((ref.sheet, r, c) for r in range(ref.r1, ref.r2 + 1) for c in range(ref.c1, ref.c2 + 1))
    return out


def _bytes(x) -> io.BytesIO:
    return io.BytesIO(x if isinstance(x, (bytes, bytearray)) else Path(x).read_bytes())


def differences(before, after, *, also_allowed=()) -> list[str]:
    """Every difference a successful fill must not make (empty list: all kept).
    ``before``/``after``: paths (any name, e.g. a .bak) or bytes."""
    problems = []
    before, after = _bytes(before).getvalue(), _bytes(after).getvalue()
    with zipfile.ZipFile(_bytes(before)) as za, zipfile.ZipFile(_bytes(after)) as zb:
        names_a = [i.filename for i in za.infolist()]
        names_b = [i.filename for i in zb.infolist()]
        if names_a != names_b:
            problems.append(f"members differ: {names_a} vs {names_b}")
        pkg = read_package(before)
        may_change = {pkg.workbook_part}
        for title in pkg.sheet_names():
            try:
                may_change.add(pkg.sheet_xml_path(title))
            except WorkbookError:
                pass                    # chart sheets: must be byte-identical
        for name in names_a:
            if name in names_b and name not in may_change and za.read(name) != zb.read(name):
                problems.append(f"part {name} changed")
    wa = openpyxl.load_workbook(_bytes(before))
    wb = openpyxl.load_workbook(_bytes(after))
    spill = _spill_cells(wb) | _spill_cells(wa) | set(also_allowed)
    if wa.sheetnames != wb.sheetnames:
        problems.append(f"sheets differ: {wa.sheetnames} vs {wb.sheetnames}")
    for ws in wa.worksheets:
        other = wb[ws.title]
        keys = set(ws._cells) | set(other._cells)
        for pos in sorted(keys):
            a = ws._cells.get(pos)
            b = other._cells.get(pos)
            va = a.value if a is not None else None
            vb = b.value if b is not None else None
            if _ours(va) or (ws.title, *pos) in spill:
                if _ours(va) and getattr(va, "text", va) != getattr(vb, "text", vb):
                    problems.append(f"{ws.title}!{_refs.column_letters(pos[1])}{pos[0]}: our formula "
                                    f"changed {va!r} -> {vb!r}")
                continue
            if getattr(va, "text", va) != getattr(vb, "text", vb):
                problems.append(f"{ws.title}!{_refs.column_letters(pos[1])}{pos[0]}: {va!r} -> {vb!r}")
    names_a = {n: d.attr_text for n, d in wa.defined_names.items() if not n.startswith(_refs.SPILL_NAME_PREFIX)}
    names_b = {n: d.attr_text for n, d in wb.defined_names.items() if not n.startswith(_refs.SPILL_NAME_PREFIX)}
    if names_a != names_b:
        problems.append(f"defined names differ: {names_a} vs {names_b}")
    return problems


def main(argv=None) -> int:
    a, b = (argv or sys.argv[1:])[:2]
    problems = differences(a, b)
    for p in problems:
        print(p)
    return 1 if problems else 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
