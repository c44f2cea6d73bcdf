"""Reading a workbook for ``fill``: A1 references, labels and the cell snapshot.

* A1 reference text -> ``Ref`` / ``Name``, and labels such as ``'My Sheet'!B5``;
* ``Book``: a read-only snapshot of cells, defined names and cached values;
  ``open_book`` makes one from a path or an openpyxl Workbook.

Formula trees live in ``formula.py``, dependencies in ``deps.py``; nothing here
evaluates.  Errors are ``WorkbookError`` without file or cell; callers add where
they happened.
"""
from __future__ import annotations

import datetime as _dt
import os
import re
import warnings
from typing import Any, Iterable, NamedTuple

from sheetfuncs.errors import WorkbookError

MAX_ROW = 1_048_576
MAX_COL = 16_384
#: workbook names fill writes to remember the extent of each spill (``'S'!$F$2:$F$201``);
#: the cells they cover, except the anchor, are emptied unless a new result covers them
SPILL_NAME_PREFIX = "_sfspill"
MAX_STALE = 4_000_000                   # cells of one recorded spill we look at

Pos = tuple[int, int]                   # (row, col), 1-based
Key = tuple[str, int, int]              # (sheet, row, col)
Rect = tuple[str, int, int, int, int]   # (sheet, r1, c1, r2, c2), inclusive


# --------------------------------------------------------------------------
# A1 references
# --------------------------------------------------------------------------

class Ref(NamedTuple):
    """A cell or rectangle on ``sheet`` (rows and columns 1-based, inclusive)."""
    sheet: str
    r1: int
    c1: int
    r2: int
    c2: int


class Name(NamedTuple):
    """A defined name; ``sheet`` is the qualifier written in front, if any."""
    sheet: str | None
    name: str


_SHEET = r"(?:(?P<sheet>'(?:[^']|'')+'|[^'!\[\]:]+)!)?"
_CELL_RE = re.compile(_SHEET + r"\$?(?P<c1>[A-Za-z]{1,3})\$?(?P<r1>[0-9]+)"
                      r"(?::\$?(?P<c2>[A-Za-z]{1,3})\$?(?P<r2>[0-9]+))?$")
_WHOLE_RE = re.compile(_SHEET + r"(?:\$?[A-Za-z]{1,3}:\$?[A-Za-z]{1,3}|\$?[0-9]+:\$?[0-9]+)$")
_NAME_RE = re.compile(_SHEET + r"(?P<name>[A-Za-z_\\][A-Za-z0-9_.\\?]*)$")


def column_index(letters: str) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + ord(ch) - 64
    return n


def column_letters(index: int) -> str:
    out = ""
    while index:
        index, rem = divmod(index - 1, 26)
        out = chr(65 + rem) + out
    return out


def _unquote(sheet: str | None) -> str | None:
    if sheet and sheet.startswith("'"):
        return sheet[1:-1].replace("''", "'")
    return sheet


def parse_reference(text: str, sheet: str) -> Ref | Name:
    """``Ref`` or ``Name`` for an operand such as ``'My Sheet'!$A$1:B5`` or ``gain``."""
    if "[" in text:
        raise WorkbookError(f"'{text}' refers to another workbook or a table; fill reads only "
                            "plain references inside this workbook")
    m = _CELL_RE.match(text)
    if m:
        c1, r1 = column_index(m["c1"]), int(m["r1"])
        c2, r2 = (column_index(m["c2"]), int(m["r2"])) if m["c2"] else (c1, r1)
        if all(1 <= c <= MAX_COL for c in (c1, c2)) and all(1 <= r <= MAX_ROW for r in (r1, r2)):
            return Ref(_unquote(m["sheet"]) or sheet,
                       min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2))
    if _WHOLE_RE.match(text):
        raise WorkbookError(f"whole rows or columns ('{text}') are not supported; "
                            "use a range such as A1:A100")
    m = _NAME_RE.match(text)
    if m:
        return Name(_unquote(m["sheet"]), m["name"])
    raise WorkbookError(f"'{text}' is neither a reference nor a name")


def sheet_prefix(sheet: str) -> str:
    if re.fullmatch(r"[^\W\d][\w.]*", sheet) and not _CELL_RE.match(sheet):
        return sheet + "!"
    return "'" + sheet.replace("'", "''") + "'!"


def cell_label(sheet: str, row: int, col: int) -> str:
    """``Data!B5`` / ``'My Sheet'!B5``, as Excel writes it."""
    return f"{sheet_prefix(sheet)}{column_letters(col)}{row}"


def ref_label(ref: Ref) -> str:
    first = f"{column_letters(ref.c1)}{ref.r1}"
    if (ref.r1, ref.c1) == (ref.r2, ref.c2):
        return sheet_prefix(ref.sheet) + first
    return f"{sheet_prefix(ref.sheet)}{first}:{column_letters(ref.c2)}{ref.r2}"


# --------------------------------------------------------------------------
# workbook snapshot
# --------------------------------------------------------------------------

class Formula(NamedTuple):
    """A formula cell: its text and, for an array formula, the range it covers."""
    text: str | None
    spill: tuple[int, int, int, int] | None


class ErrorValue(NamedTuple):
    code: str


NOTHING = object()   # "no cached value"


def _plain(value: Any, data_type: str) -> Any:
    """A stored cell value as xlwings would hand it over (numbers as float)."""
    if data_type == "e":
        return ErrorValue(str(value))
    if value is None or isinstance(value, (bool, str, float)):
        return value
    if isinstance(value, int):
        return float(value)
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time, _dt.timedelta)):
        from openpyxl.utils.datetime import to_excel
        return float(to_excel(value))
    return str(value)


def _cells_of(ws: Any) -> Iterable[tuple[Pos, Any]]:
    # Worksheet._cells holds only the stored cells; iter_rows() would create
    # every cell of the bounding box, which is slow for sparse sheets.
    cells = getattr(ws, "_cells", None)
    if isinstance(cells, dict):
        return cells.items()
    return (((c.row, c.column), c) for row in ws.iter_rows() for c in row
            if getattr(c, "value", None) is not None)


class Book:
    """Cells and defined names of one workbook, read once.

    ``cells[sheet][(row, col)]`` holds a plain value, an ``ErrorValue`` or a
    ``Formula``.  Cached results of formulas come from a second, data-only
    reading of the file, done on first use (none for a Workbook object).
    """

    def __init__(self, wb: Any, path: str | None):
        self.path = path
        self.label = path if path is not None else "workbook"
        self.sheets: list[str] = []
        self.cells: dict[str, dict[tuple[int, int], Any]] = {}
        self._sheet_key: dict[str, str] = {}
        self.book_names: dict[str, str] = {}          # lower-case name -> text
        self.book_name_case: dict[str, str] = {}      # lower-case name -> name as written
        self.sheet_names: dict[str, dict[str, str]] = {}
        self._cached: dict[str, dict[tuple[int, int], Any]] | None = None
        for name, dn in wb.defined_names.items():
            self.book_names[name.lower()] = dn.attr_text
            self.book_name_case[name.lower()] = name
        for ws in wb.worksheets:
            self.sheets.append(ws.title)
            self._sheet_key[ws.title.lower()] = ws.title
            self.sheet_names[ws.title] = {n.lower(): dn.attr_text
                                          for n, dn in getattr(ws, "defined_names", {}).items()}
            grid: dict[tuple[int, int], Any] = {}
            for pos, cell in _cells_of(ws):
                value = cell.value
                if value is None:
                    continue
                if cell.data_type == "f":
                    grid[pos] = _formula(value)
                else:
                    grid[pos] = _plain(value, cell.data_type)
            self.cells[ws.title] = grid

    def stale_spill_cells(self) -> set[Key]:
        """Constant cells inside the spills a previous fill recorded (anchors excluded)."""
        out: set[Key] = set()
        for key, text in self.book_names.items():
            if not key.startswith(SPILL_NAME_PREFIX):
                continue
            try:
                ref = parse_reference(text.lstrip("="), "")
                sheet = self.sheet(ref.sheet) if isinstance(ref, Ref) else ""
            except WorkbookError:
                continue                # a damaged bookkeeping name is ignored
            if not isinstance(ref, Ref) or (ref.r2 - ref.r1 + 1) * (ref.c2 - ref.c1 + 1) > MAX_STALE:
                continue
            grid = self.cells[sheet]
            out.update((sheet, r, c) for r in range(ref.r1, ref.r2 + 1) for c in range(ref.c1, ref.c2 + 1)
                       if (r, c) != (ref.r1, ref.c1) and (r, c) in grid
                       and not isinstance(grid[(r, c)], Formula))
        return out

    def sheet(self, name: str) -> str:
        """The sheet's real name (sheet names are case-insensitive)."""
        try:
            return self._sheet_key[name.lower()]
        except KeyError:
            raise WorkbookError(f"there is no sheet named '{name}'") from None

    def name_text(self, name: Name, sheet: str) -> tuple[str, str]:
        """(text, sheet to read it on) of a defined name used on ``sheet``;
        a sheet's own names come before the workbook's."""
        scope = self.sheet(name.sheet) if name.sheet else sheet
        key = name.name.lower()
        text = self.sheet_names.get(scope, {}).get(key)
        if text is None:
            text = self.book_names.get(key)
        if text is None:
            shown = (sheet_prefix(name.sheet) if name.sheet else "") + name.name
            raise WorkbookError(f"unknown name '{shown}' (not a reference and not a defined name)")
        return text, scope

    def cached(self, sheet: str, pos: tuple[int, int]) -> Any:
        """Value Excel (or LibreOffice) stored for a formula cell, or NOTHING."""
        if self._cached is None:
            self._cached = self._read_cached()
        value = self._cached.get(sheet, {}).get(pos, NOTHING)
        return NOTHING if value is None else value

    def _read_cached(self) -> dict[str, dict[tuple[int, int], Any]]:
        out: dict[str, dict[tuple[int, int], Any]] = {}
        if self.path is None:
            return out
        try:
            wb = _load(self.path, data_only=True)
        except WorkbookError:
            return out
        for ws in wb.worksheets:
            formulas = [p for p, v in self.cells.get(ws.title, {}).items() if isinstance(v, Formula)]
            cells = getattr(ws, "_cells", {})
            out[ws.title] = {p: _plain(cells[p].value, cells[p].data_type)
                             for p in formulas if p in cells and cells[p].value is not None}
        return out


def _formula(value: Any) -> Formula:
    text = getattr(value, "text", value)        # ArrayFormula keeps its text in .text
    if not isinstance(text, str):
        return Formula(None, None)                # data tables and other exotic kinds
    spill = None
    ref = getattr(value, "ref", None)
    if isinstance(ref, str) and ":" in ref:
        r = parse_reference(ref, "")
        if isinstance(r, Ref):
            spill = (r.r1, r.c1, r.r2, r.c2)
    return Formula(text if text.startswith("=") else "=" + text, spill)


def _load(path: str, *, data_only: bool) -> Any:
    import openpyxl
    try:
        with warnings.catch_warnings():
            # openpyxl warns about parts it drops (validation, slicers ...); they
            # do not matter for reading values, and fill never saves with openpyxl.
            warnings.simplefilter("ignore")
            return openpyxl.load_workbook(path, data_only=data_only, keep_links=False)
    except FileNotFoundError:
        raise WorkbookError("file not found", file=path) from None
    except Exception as exc:
        raise WorkbookError(f"cannot be read as an .xlsx/.xlsm workbook ({_short(exc, '')})",
                            file=path) from exc


def open_book(book_or_path: Any) -> Book:
    """Book for a path to .xlsx/.xlsm, an openpyxl Workbook, or a Book (returned as is)."""
    if isinstance(book_or_path, Book):
        return book_or_path
    if hasattr(book_or_path, "worksheets") and hasattr(book_or_path, "defined_names"):
        return Book(book_or_path, None)
    try:
        path = os.fspath(book_or_path)
    except TypeError:
        raise WorkbookError(f"expected a path or an openpyxl Workbook, not "
                            f"{type(book_or_path).__name__}") from None
    return Book(_load(path, data_only=False), path)


def _short(exc: Exception, text: str) -> str:
    msg = str(exc) or type(exc).__name__
    if text:
        msg = msg.replace(f" in '{text}'", "").replace(f" in {text}", "")
    return msg

