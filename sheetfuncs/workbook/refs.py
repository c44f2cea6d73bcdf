"""Reading a workbook for ``fill``: formula trees, references, cells, names, reach.

* formula text -> a small tree of NamedTuples, over openpyxl's tokenizer;
* A1 reference text -> ``Ref`` / ``Name``, and labels such as ``'My Sheet'!B5``;
* ``Book``: a read-only snapshot of cells, defined names and cached values;
* ``Reach``: which cells a formula reads and which of our cells those depend on.

Nothing here evaluates; ordering and computing live in ``plan.py``.  Errors are
``WorkbookError`` without file or cell; callers add where they happened.
"""
from __future__ import annotations

from bisect import bisect_left, bisect_right

import datetime as _dt
import os
import re
import warnings
from typing import Any, Callable, Iterable, NamedTuple, Union

from openpyxl.formula.tokenizer import Token, Tokenizer

from sheetfuncs.errors import WorkbookError

MAX_ROW = 1_048_576
MAX_COL = 16_384
#: workbook names fill writes to remember the extent of each spill (``'S'!$F$2:$F$201``);
#: the cells they cover, except the anchor, are emptied unless a new result covers them
SPILL_NAME_PREFIX = "_sfspill"
MAX_STALE = 4_000_000                   # cells of one recorded spill we look at
MAX_NAME_DEPTH = 20                     # defined names inside defined names
MAX_TREE_DEPTH = 400                    # operators and calls inside one another

Pos = tuple[int, int]                   # (row, col), 1-based
Key = tuple[str, int, int]              # (sheet, row, col)
Rect = tuple[str, int, int, int, int]   # (sheet, r1, c1, r2, c2), inclusive


# --------------------------------------------------------------------------
# formula trees
# --------------------------------------------------------------------------

class Num(NamedTuple):
    value: float


class Text(NamedTuple):
    value: str


class Bool(NamedTuple):
    value: bool


class Missing(NamedTuple):
    """An argument left out, as in ``F(1,,3)``."""


class ErrorLit(NamedTuple):
    code: str


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


class Neg(NamedTuple):
    operand: Any


class Percent(NamedTuple):
    operand: Any


class BinOp(NamedTuple):
    op: str
    left: Any
    right: Any


class Call(NamedTuple):
    name: str          # canonical: upper case, without _xlfn./_xludf. prefixes
    ours: bool
    args: tuple[Any, ...]


class ArrayLit(NamedTuple):
    rows: tuple[tuple[Any, ...], ...]     # constants


class Unsupported(NamedTuple):
    """Valid formula text that fill does not compute (``A:A``, ``[1]Sheet!A1`` ...)."""
    reason: str


Node = Union[Num, Text, Bool, Missing, ErrorLit, Ref, Name, Neg, Percent, BinOp, Call, ArrayLit,
             Unsupported]

_XL_PREFIXES = ("_XLFN.", "_XLUDF.", "_XLWS.")


def canonical_function(raw: str) -> str:
    """``'_xlfn._xludf.sf_stepat'`` -> ``'SF_STEPAT'`` (``@`` is handled by the parser)."""
    name = raw.upper()
    stripped = True
    while stripped:
        stripped = False
        for p in _XL_PREFIXES:
            if name.startswith(p):
                name = name[len(p):]
                stripped = True
    return name


def tokenize(text: str) -> list[Token]:
    """Tokens of ``text``; WorkbookError if unreadable.  White space is dropped,
    except between two ranges, where it is Excel's intersection operator."""
    try:
        items = Tokenizer(text).items
    except IndexError:          # the tokenizer pops an empty stack on a stray ')'
        raise WorkbookError(f"cannot read the formula {_clip(text)}: a ')' has no matching '('") from None
    except Exception as exc:    # TokenizerError and the asserts inside the tokenizer
        raise WorkbookError(f"cannot read the formula {_clip(text)}: {_short(exc, text)}") from exc
    out: list[Token] = []
    for k, t in enumerate(items):
        if t.type != Token.WSPACE:
            out.append(t)
        elif (out and k + 1 < len(items) and _ends_operand(out[-1]) and _starts_operand(items[k + 1])):
            out.append(Token(" ", Token.OP_IN))     # a space between two ranges: intersection
    return out


def _ends_operand(t: Token) -> bool:
    return bool(t.subtype == Token.RANGE or (t.subtype == Token.CLOSE and t.type != Token.ARRAY))


def _starts_operand(t: Token) -> bool:
    return bool(t.subtype == Token.RANGE or (t.subtype == Token.OPEN and t.type != Token.ARRAY))


def parse_formula(text: str, sheet: str, prefix: str) -> Node:
    """Tree of formula ``text`` (with its ``=``) written on ``sheet``."""
    return parse_tokens(tokenize(text), text, sheet, prefix)


def parse_tokens(tokens: list[Token], text: str, sheet: str, prefix: str) -> Node:
    """Tree from the tokens ``tokenize(text)`` returned."""
    try:
        tree = _Parser(tokens, text, sheet, prefix.upper()).parse()
    except RecursionError:
        tree = None
    if tree is None or _depth(tree) > MAX_TREE_DEPTH:
        # the evaluator and the tree walks recurse; keep them far from Python's limit
        raise WorkbookError(f"cannot read the formula {_clip(text)}: "
                            "it is too long or nested too deeply")
    return tree


def _depth(tree: Node) -> int:
    deepest, todo = 0, [(tree, 1)]
    while todo:
        node, d = todo.pop()
        deepest = max(deepest, d)
        if isinstance(node, BinOp):
            todo += [(node.left, d + 1), (node.right, d + 1)]
        elif isinstance(node, (Neg, Percent)):
            todo.append((node.operand, d + 1))
        elif isinstance(node, Call):
            todo += [(a, d + 1) for a in node.args]
    return deepest


def parse_name_text(text: str, sheet: str, prefix: str) -> Node:
    """Tree of a defined name's text (stored without ``=``)."""
    return parse_formula(text if text.startswith("=") else "=" + text, sheet, prefix)


class _Parser:
    """Recursive descent with Excel's precedence:
    ``-x`` > ``%`` > ``^`` > ``* /`` > ``+ -`` > ``&`` > comparisons.

    Excel negates before it raises to a power (``=-2^2`` is 4) and ``^`` groups
    from the left (``=2^3^2`` is 64); both are kept.
    """

    def __init__(self, tokens: list[Token], text: str, sheet: str, prefix: str):
        self.toks, self.text, self.sheet, self.prefix = tokens, text, sheet, prefix
        self.pos = 0

    def fail(self, reason: str) -> WorkbookError:
        return WorkbookError(f"cannot read the formula {_clip(self.text)}: {reason}")

    def peek(self) -> Token | None:
        return self.toks[self.pos] if self.pos < len(self.toks) else None

    def parse(self) -> Node:
        if not self.toks:
            raise self.fail("it is empty")
        if self.toks[0].type == Token.LITERAL:
            raise self.fail("it does not start with '='")
        node = self.expr()
        tok = self.peek()
        if tok is not None:
            raise self.fail(f"unexpected '{tok.value}'")
        return node

    def expr(self) -> Node:
        # comparisons, '&' and the range union ',' are kept in the tree; the
        # evaluator refuses them, so such a cell gets an error, not the whole file
        return self._binary(("=", "<", ">", "<=", ">=", "<>", ",", " "), self.concat)

    def concat(self) -> Node:
        return self._binary(("&",), self.additive)

    def _binary(self, ops: tuple[str, ...], sub: Callable[[], Node]) -> Node:
        node = sub()
        while True:
            tok = self.peek()
            if tok is None or tok.type != Token.OP_IN or tok.value not in ops:
                return node
            self.pos += 1
            node = BinOp(tok.value, node, sub())

    def additive(self) -> Node:
        return self._binary(("+", "-"), self.multiplicative)

    def multiplicative(self) -> Node:
        return self._binary(("*", "/"), self.power)

    def power(self) -> Node:
        return self._binary(("^",), self.unary)

    def unary(self) -> Node:
        tok = self.peek()
        if tok is not None and tok.type == Token.OP_PRE:
            self.pos += 1
            inner = self.unary()
            return Neg(inner) if tok.value == "-" else inner
        node = self.primary()
        while (tok := self.peek()) is not None and tok.type == Token.OP_POST:
            self.pos += 1
            node = Percent(node)
        return node

    def primary(self) -> Node:
        tok = self.peek()
        if tok is None:
            raise self.fail("it ends too early")
        self.pos += 1
        if tok.type == Token.OPERAND:
            return self.operand(tok)
        if tok.type == Token.FUNC and tok.subtype == Token.OPEN:
            return self.call(tok.value[:-1])
        if tok.type == Token.PAREN and tok.subtype == Token.OPEN:
            node = self.expr()
            self.expect(Token.PAREN)
            return node
        if tok.type == Token.ARRAY and tok.subtype == Token.OPEN:
            return self.array()
        raise self.fail(f"unexpected '{tok.value}'")

    def expect(self, kind: str) -> None:
        tok = self.peek()
        if tok is None:
            raise self.fail("a '(' is not closed")
        if tok.type != kind or tok.subtype != Token.CLOSE:
            raise self.fail(f"unexpected '{tok.value}'")
        self.pos += 1

    def operand(self, tok: Token) -> Node:
        value = tok.value
        if tok.subtype == Token.NUMBER:
            return Num(float(value))
        if tok.subtype == Token.TEXT:
            return Text(value[1:-1].replace('""', '"'))
        if tok.subtype == Token.LOGICAL:
            return Bool(value == "TRUE")
        if tok.subtype == Token.ERROR:
            return ErrorLit(value[value.index("#"):])
        if value.upper() in ("TRUE", "FALSE"):
            return Bool(value.upper() == "TRUE")
        try:
            return parse_reference(value, self.sheet)
        except WorkbookError as exc:
            return Unsupported(exc.message)

    def call(self, raw: str) -> Node:
        implicit = raw.startswith("@")
        name = canonical_function(raw.lstrip("@"))
        args: list[Node] = []
        tok = self.peek()
        if tok is not None and tok.type == Token.FUNC and tok.subtype == Token.CLOSE:
            self.pos += 1
        else:
            while True:
                tok = self.peek()
                if tok is not None and (tok.type == Token.SEP
                                        or (tok.type == Token.FUNC and tok.subtype == Token.CLOSE)):
                    args.append(Missing())
                else:
                    args.append(self.expr())
                tok = self.peek()
                if tok is None:
                    raise self.fail(f"the '(' after {name} is not closed")
                if tok.type == Token.SEP and tok.subtype == Token.ARG:
                    self.pos += 1
                    continue
                self.expect(Token.FUNC)
                break
        node: Node = Call(name, name.startswith(self.prefix), tuple(args))
        # '@' asks for implicit intersection, which for a computed array is its first item
        return Call("SINGLE", False, (node,)) if implicit else node

    def array(self) -> Node:
        rows: list[tuple[Any, ...]] = []
        row: list[Any] = []
        while True:
            tok = self.peek()
            if tok is None:
                raise self.fail("a '{' is not closed")
            self.pos += 1
            sign = 1.0
            if tok.type == Token.OP_PRE:
                sign = -1.0 if tok.value == "-" else 1.0
                tok = self.peek()
                if tok is None or tok.subtype != Token.NUMBER:
                    raise self.fail("only constants may appear inside { }")
                self.pos += 1
            if tok.type != Token.OPERAND or tok.subtype == Token.RANGE:
                raise self.fail("only constants may appear inside { }")
            item = self.operand(tok)
            if isinstance(item, Num):
                row.append(sign * item.value)
            elif isinstance(item, (Text, Bool, ErrorLit)):
                row.append(item[0])
            else:
                raise self.fail("only constants may appear inside { }")
            tok = self.peek()
            if tok is None:
                raise self.fail("a '{' is not closed")
            self.pos += 1
            if tok.type == Token.SEP and tok.subtype == Token.ROW:
                rows.append(tuple(row))
                row = []
            elif tok.type == Token.ARRAY and tok.subtype == Token.CLOSE:
                rows.append(tuple(row))
                break
            elif not (tok.type == Token.SEP and tok.subtype == Token.ARG):
                raise self.fail(f"unexpected '{tok.value}' inside {{ }}")
        if len({len(r) for r in rows}) != 1:
            raise self.fail("the rows of { } have different lengths")
        return ArrayLit(tuple(rows))


# --------------------------------------------------------------------------
# A1 references
# --------------------------------------------------------------------------

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


def _clip(text: str, n: int = 60) -> str:
    return repr(text if len(text) <= n else text[: n - 3] + "...")


def _short(exc: Exception, text: str) -> str:
    msg = str(exc) or type(exc).__name__
    if text:
        msg = msg.replace(f" in '{text}'", "").replace(f" in {text}", "")
    return msg


# --------------------------------------------------------------------------
# reach: which cells a formula reads, and which of our cells those depend on
# --------------------------------------------------------------------------



Deps = frozenset[int]                   # numbers of our cells (anchors)


class _NativeInfo(NamedTuple):
    hard: Deps
    soft: Deps
    children: tuple[Key, ...]           # native formula cells read directly
    rects: list[Rect]


class Reach:
    """Dependencies of formulas on "our" cells (the anchors, numbered by the caller).

    For a rectangle it tells which anchors lie inside (*sure* dependencies),
    which anchors up and left of a non-formula cell inside could spill into it
    (*possible* ones), and which native formula cells lie inside; for a native
    cell, the same through every native cell it reads in turn.  Everything is
    remembered; nothing is evaluated.
    """

    def __init__(self, book: Book, anchors: dict[Key, int]):
        self.book, self.anchors = book, anchors
        self._mine: dict[str, list[tuple[int, int, int]]] = {}
        for (sheet, r, c), i in anchors.items():
            self._mine.setdefault(sheet, []).append((i, r, c))
        self._trees: dict[tuple[str, str], Node | WorkbookError] = {}
        self._rects: dict[Rect, tuple[Deps, Deps, tuple[Key, ...]]] = {}
        self._natives: dict[Key, _NativeInfo] = {}
        self._closures: dict[Key, tuple[Deps, Deps]] = {}
        self._native_rects: dict[Key, list[Rect]] = {}

    def tree(self, text: str | None, sheet: str) -> Node:
        """Parsed text of a native formula or defined name (no calls of ours in them)."""
        if text is None:
            raise WorkbookError("this kind of formula cannot be read")
        key = (text, sheet)
        tree = self._trees.get(key)
        if tree is None:
            try:
                tree = parse_name_text(text, sheet, "\0")
            except WorkbookError as exc:
                tree = exc
            self._trees[key] = tree
        if isinstance(tree, WorkbookError):
            raise tree
        return tree

    def rects(self, node: Node, sheet: str, out: list[Rect] | None = None, depth: int = 0) -> list[Rect]:
        """Rectangles ``node`` reads, through defined names too; unknown ones are skipped
        (they are reported when the value is needed)."""
        out = [] if out is None else out
        try:
            if isinstance(node, Ref):
                out.append((self.book.sheet(node.sheet), node.r1, node.c1, node.r2, node.c2))
            elif isinstance(node, Name) and depth < MAX_NAME_DEPTH:
                text, scope = self.book.name_text(node, sheet)
                self.rects(self.tree(text, scope), scope, out, depth + 1)
            elif isinstance(node, Call):
                if node.name == "ANCHORARRAY" and len(node.args) == 1 and isinstance(node.args[0], Ref):
                    out.append(self.anchor_rect(node.args[0]))
                else:
                    for a in node.args:
                        self.rects(a, sheet, out, depth)
            elif isinstance(node, (Neg, Percent)):
                self.rects(node.operand, sheet, out, depth)
            elif isinstance(node, BinOp):
                self.rects(node.left, sheet, out, depth)
                self.rects(node.right, sheet, out, depth)
        except WorkbookError:
            pass
        return out

    def anchor_rect(self, ref: Ref) -> Rect:
        """What ``F2#`` reads: our anchor itself, or a native array formula's range."""
        sheet = self.book.sheet(ref.sheet)
        f = self.book.cells[sheet].get((ref.r1, ref.c1))
        if (sheet, ref.r1, ref.c1) not in self.anchors and isinstance(f, Formula) and f.spill:
            return (sheet, *f.spill)
        return (sheet, ref.r1, ref.c1, ref.r1, ref.c1)

    def deps(self, node: Node, sheet: str) -> tuple[set[int], set[int]]:
        """(sure, possible) anchors a formula depends on."""
        hard: set[int] = set()
        soft: set[int] = set()
        for rect in self.rects(node, sheet):
            h, s, natives = self.rect_info(rect)
            hard |= h
            soft |= s
            for key in natives:
                ch, cs = self.closure(key)
                hard |= ch
                soft |= cs
        return hard, soft - hard

    def rect_info(self, rect: Rect) -> tuple[Deps, Deps, tuple[Key, ...]]:
        """(anchors inside, anchors that could spill into it, native formula cells inside)."""
        info = self._rects.get(rect)
        if info is not None:
            return info
        sheet, r1, c1, r2, c2 = rect
        grid = self.book.cells[sheet]
        if (r2 - r1 + 1) * (c2 - c1 + 1) > 4 * len(grid):      # sparse: look at stored cells
            fpos = {p for p, v in grid.items()
                    if type(v) is Formula and r1 <= p[0] <= r2 and c1 <= p[1] <= c2}
        else:
            fpos = {(r, c) for r in range(r1, r2 + 1) for c in range(c1, c2 + 1)
                    if type(grid.get((r, c))) is Formula}
        natives = tuple((sheet, r, c) for r, c in sorted(fpos) if (sheet, r, c) not in self.anchors)
        cols = self._mine_by_col(sheet)
        hard_ids: list[int] = []
        for c in range(c1, c2 + 1) if c2 - c1 < len(cols) else [c for c in cols if c1 <= c <= c2]:
            if c in cols:
                rows, ids = cols[c]
                hard_ids.extend(ids[bisect_left(rows, r1):bisect_right(rows, r2)])
        hard = frozenset(hard_ids)
        # low[c - c1]: lowest row, in columns >= c, of a cell a spill may cover (not a formula)
        low = [0] * (c2 - c1 + 2)
        for c in range(c2, c1 - 1, -1):
            r = r2
            while r >= r1 and (r, c) in fpos:
                r -= 1
            low[c - c1] = max(r if r >= r1 else 0, low[c - c1 + 1])
        soft_ids: list[int] = []
        for c, (rows, ids) in cols.items():
            if c <= c2:
                soft_ids.extend(ids[:bisect_right(rows, low[max(c, c1) - c1])])
        soft = frozenset(soft_ids)
        info = (hard, soft, natives)
        self._rects[rect] = info
        return info

    def _mine_by_col(self, sheet: str) -> dict[int, tuple[list[int], list[int]]]:
        """Our anchors on ``sheet`` by column: (sorted rows, ids in the same order)."""
        cache = self.__dict__.setdefault("_by_col", {})
        if sheet not in cache:
            by: dict[int, list[tuple[int, int]]] = {}
            for i, r, c in self._mine.get(sheet, []):
                by.setdefault(c, []).append((r, i))
            cache[sheet] = {c: ([r for r, _ in v], [i for _, i in v])
                            for c, v in ((c, sorted(v)) for c, v in by.items())}
        return cache[sheet]

    def _native(self, key: Key) -> _NativeInfo:
        info = self._natives.get(key)
        if info is None:
            sheet, r, c = key
            cell = self.book.cells[sheet][(r, c)]
            try:
                rects = self.rects(self.tree(cell.text, sheet), sheet)
            except WorkbookError:
                rects = []
            hard: set[int] = set()
            soft: set[int] = set()
            children: list[Key] = []
            for rect in rects:
                h, s, natives = self.rect_info(rect)
                hard |= h
                soft |= s
                children.extend(natives)
            info = _NativeInfo(frozenset(hard), frozenset(soft), tuple(dict.fromkeys(children)), rects)
            self._natives[key] = info
        return info

    def children(self, key: Key) -> tuple[Key, ...]:
        """Native formula cells that native cell ``key`` reads directly."""
        return self._native(key).children

    def closure(self, key: Key) -> tuple[Deps, Deps]:
        """(sure, possible) anchors native cell ``key`` depends on, through other natives."""
        memo = self._closures
        if key in memo:
            return memo[key]
        stack, opened = [key], set()
        while stack:        # iterative: chains of native formulas can be thousands long
            k = stack[-1]
            if k in memo:
                stack.pop()
                continue
            info = self._native(k)
            if k not in opened:
                opened.add(k)
                stack.extend(ch for ch in info.children if ch not in memo and ch not in opened)
                continue
            stack.pop()
            hard, soft = set(info.hard), set(info.soft)
            for ch in info.children:     # a child still open is in a cycle: its own cells only
                ch_hard, ch_soft = memo.get(ch) or self._native(ch)[:2]
                hard |= ch_hard
                soft |= ch_soft
            memo[k] = (frozenset(hard), frozenset(soft))
        return memo[key]

    def native_rects(self, key: Key) -> list[Rect]:
        """Every rectangle native cell ``key`` reads, through other natives."""
        rects = self._native_rects.get(key)
        if rects is None:
            rects, seen, todo = [], {key}, [key]
            while todo:
                info = self._native(todo.pop())
                rects.extend(info.rects)
                for ch in info.children:
                    if ch not in seen:
                        seen.add(ch)
                        todo.append(ch)
            self._native_rects[key] = rects
        return rects
