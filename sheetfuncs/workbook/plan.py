"""Plan and evaluate ``fill``: find our formula cells, order them, compute them.

``scan`` lists the cells whose formula calls one of our functions (names that
start with the prefix, in any case, with or without Excel's ``_xlfn.`` /
``_xludf.`` marks).  ``evaluate`` resolves each call's arguments in the shapes
xlwings would pass and computes the cells in dependency order; it never
writes.  ``spill_targets`` lists the cells an array result spills into.

Choices
-------
* A formula the tokenizer cannot read, or whose structure is broken, makes
  ``scan`` raise ``WorkbookError`` naming file and cell; ``evaluate`` reports
  it as that cell's error and carries on with the others.
* An array result spills down and right over empty cells and constants (the
  writer stores spilled cells as constants, so a second run must overwrite
  them); a formula cell or another result in the way is an error, as Excel's
  #SPILL! is.  Constants inside a spill an earlier fill recorded (defined names
  ``_sfspill...``) read as empty unless a new result covers them, since the
  writer empties them.
* A cell holding a native formula gives its cached value, unless it depends on
  cells computed in this run (the cache would be stale); then, or without a
  cache, it is computed with the small evaluator (+ - * / ^ %, PI, SQRT, EXP,
  LN, ABS and a few more), never with ``eval``.
* Order: cells referred to come first.  A reference to a cell that some other
  result *might* spill into is a preference only; when a result turns out to
  spill into cells read earlier, the run is repeated with that order enforced
  (a few times at most).  Cycles are errors on every cell in them.
"""
from __future__ import annotations

import heapq
import inspect
import math
import numbers
from dataclasses import dataclass
from typing import Any, Callable, Iterator, Mapping, cast

from sheetfuncs.errors import ParameterError, WorkbookError
from sheetfuncs.workbook import refs as _r
from sheetfuncs.workbook.refs import (NOTHING, ArrayLit, Bool, Call, ErrorLit, ErrorValue, Formula,
                                      Key, Missing, Name, Neg, Num, Percent, Rect, Ref, Text,
                                      cell_label)

Rows = list[list[Any]]                  # an array value: rows of cell values

__all__ = ["Job", "Outcome", "scan", "evaluate", "spill_targets"]

_MAX_PASSES = 4


@dataclass(frozen=True)
class Job:
    """One cell whose formula calls our functions."""
    sheet: str
    ref: str                 #: anchor cell, e.g. ``"B5"``
    formula: str             #: formula text as stored, with ``=``
    function: str            #: first of our functions it calls, canonical (``"SF_STEPAT"``)
    arg_refs: tuple[str, ...]  #: what it reads (``"Data!A1:A9"``, ``"gain"``), for diagnostics


@dataclass(frozen=True)
class Outcome:
    """Result of one cell: ``value`` (scalar or rows of values) or ``error``."""
    sheet: str
    ref: str
    value: object
    error: str | None


class _Item:
    __slots__ = ("sheet", "row", "col", "formula", "tree", "problem", "function", "arg_refs")

    def __init__(self, sheet: str, row: int, col: int, formula: str):
        self.sheet, self.row, self.col, self.formula = sheet, row, col, formula
        self.tree: Any = None
        self.problem: str | None = None
        self.function = ""
        self.arg_refs: tuple[str, ...] = ()

    @property
    def ref(self) -> str:
        return f"{_r.column_letters(self.col)}{self.row}"

    @property
    def label(self) -> str:
        return cell_label(self.sheet, self.row, self.col)


class _Located(WorkbookError):
    """An error whose message already names the cell it is about."""


class _Unsupported(WorkbookError):
    """Something the small evaluator does not compute."""


class _Err:
    __slots__ = ("message",)

    def __init__(self, message: str):
        self.message = message


_PENDING = object()
_FAILED = object()


# --------------------------------------------------------------------------
# public API
# --------------------------------------------------------------------------

def _refuse_unreadable(book: Any, items: list) -> None:
    bad = [it for it in items if it.problem]
    if bad:
        more = f" ({len(bad) - 1} more cells cannot be read)" if len(bad) > 1 else ""
        raise WorkbookError(f"{bad[0].problem}{more}", file=book.label, cell=bad[0].label)


def scan(book_or_path: Any, *, prefix: str = "SF_") -> list[Job]:
    """Cells calling our functions, sheet by sheet, row by row (anchors of array formulas).

    Raises ``WorkbookError`` naming file and cell if such a formula cannot be
    read (broken text); formulas that are valid but use something fill does not
    compute are listed, and ``evaluate`` reports them per cell.
    """
    book = _r.open_book(book_or_path)
    items = _collect(book, prefix)
    _refuse_unreadable(book, items)
    return [Job(it.sheet, it.ref, it.formula, it.function, it.arg_refs) for it in items]


def evaluate(book_or_path: Any, functions: Mapping[str, Callable[..., Any]], *, prefix: str = "SF_",
             error_text: Callable[[Exception], str], strict: bool = False) -> list[Outcome]:
    """Compute every cell ``scan`` finds (in the same order); one bad cell never stops the run.

    ``book_or_path``: a path, an openpyxl Workbook (then there are no cached
    values of native formulas) or a ``refs.Book``.  ``functions`` maps
    upper-case names to callables taking the resolved arguments positionally.
    Any exception a callable raises, and every problem found here, becomes that
    cell's ``error`` through ``error_text``.  Raises ``WorkbookError`` only when
    the file itself cannot be read, or (``strict``) when one of our formulas cannot.
    """
    book = _r.open_book(book_or_path)
    items = _collect(book, prefix)
    if strict:                  # one of our formulas cannot be read: refuse the whole book
        _refuse_unreadable(book, items)
    run = _Run(book, items, functions)
    run.run()
    out = []
    for i, it in enumerate(run.items):
        if i in run.errors:
            exc = run.errors[i]
            if isinstance(exc, (_Located, _Unsupported)):     # private helpers: hand on the public class
                exc = WorkbookError(exc.message)
            out.append(Outcome(it.sheet, it.ref, None, error_text(exc)))
        elif i in run.results:
            out.append(Outcome(it.sheet, it.ref, run.results[i], None))
        else:                                                   # pragma: no cover - defensive
            out.append(Outcome(it.sheet, it.ref, None, error_text(WorkbookError("not computed"))))
    return out


def spill_targets(outcome: Outcome) -> list[tuple[str, str, object]]:
    """(sheet, ref, value) of every cell of an array result except the anchor."""
    rows = outcome.value
    if outcome.error is not None or not isinstance(rows, list):
        return []
    anchor = _r.parse_reference(outcome.ref, outcome.sheet)
    if not isinstance(anchor, Ref):
        raise WorkbookError(f"'{outcome.ref}' is not a cell reference")
    out = []
    for i, row in enumerate(rows):
        for j, value in enumerate(row):
            if i or j:
                out.append((outcome.sheet, f"{_r.column_letters(anchor.c1 + j)}{anchor.r1 + i}", value))
    return out


# --------------------------------------------------------------------------
# finding our cells
# --------------------------------------------------------------------------

def _collect(book: _r.Book, prefix: str) -> list[_Item]:
    if not prefix:
        raise ParameterError("the function prefix must not be empty", "prefix")
    key = prefix.upper()
    items = []
    for sheet in book.sheets:
        grid = book.cells[sheet]
        for pos in sorted(p for p, v in grid.items() if type(v) is Formula):
            text = grid[pos].text
            if text is None or key not in text.upper():
                continue
            it = _Item(sheet, pos[0], pos[1], text)
            try:
                tokens = _r.tokenize(text)
            except WorkbookError as exc:
                it.problem = exc.message
                items.append(it)
                continue
            ours = [name for name in (_r.canonical_function(t.value[:-1].lstrip("@"))
                                      for t in tokens if t.type == "FUNC" and t.subtype == "OPEN")
                    if name.startswith(key)]
            if not ours:
                continue                # "SF_" only inside text or a name: a native formula
            it.function = ours[0]
            try:
                it.tree = _r.parse_tokens(tokens, text, sheet, prefix)
            except WorkbookError as exc:
                it.problem = exc.message
            else:
                it.arg_refs = tuple(dict.fromkeys(_labels(it.tree)))
            items.append(it)
    return items


def _labels(node: Any) -> Iterator[str]:
    t = type(node)
    if t is Ref:
        yield _r.ref_label(node)
    elif t is Name:
        yield (_r.sheet_prefix(node.sheet) if node.sheet else "") + node.name
    elif t is Call:
        for a in node.args:
            yield from _labels(a)
    elif t is Neg or t is Percent:
        yield from _labels(node.operand)
    elif t is _r.BinOp:
        yield from _labels(node.left)
        yield from _labels(node.right)


# --------------------------------------------------------------------------
# the run
# --------------------------------------------------------------------------

class _Run:
    def __init__(self, book: _r.Book, items: list[_Item], functions: Mapping[str, Callable[..., Any]]):
        self.book, self.items = book, items
        self.funcs = {k.upper(): f for k, f in functions.items()}
        self.anchor = {(it.sheet, it.row, it.col): i for i, it in enumerate(items)}
        self.reach = _r.Reach(book, self.anchor)
        self.stale = book.stale_spill_cells()
        self.errors: dict[int, Exception] = {}
        self._sigs: dict[str, Any] = {}
        self._reset()

    def _reset(self) -> None:
        self.results: dict[int, Any] = {}
        self.finish: dict[int, int] = {}
        self.spilled: dict[Key, tuple[Any, int]] = {}       # cell -> (value, whose result)
        self.spill_rect: dict[int, Rect] = {}
        self.native_memo: dict[Key, Any] = {}               # final values of native cells
        self.job_memo: dict[Key, Any] = {}                  # values valid for the current cell only
        self.range_memo: dict[Rect, tuple[Rows, bool]] = {}
        self.log: dict[int, list[tuple[str, int, int, int, int, int]]] = {}   # reads of plain cells
        self.active: set[Key] = set()
        self.current: int | None = None
        self.seq = 0

    # ---- ordering ---------------------------------------------------------

    def run(self) -> None:
        n = len(self.items)
        pre = {i: WorkbookError(it.problem) for i, it in enumerate(self.items) if it.problem}
        hard: list[set[int]] = []
        soft: list[set[int]] = []
        for i in range(n):
            it = self.items[i]
            h, s = (set(), set()) if i in pre else self.reach.deps(it.tree, it.sheet)
            s.discard(i)
            hard.append(h)
            soft.append(s)
        forced: list[set[int]] = [set() for _ in range(n)]
        bad: set[tuple[int, int]] = set()
        for _ in range(_MAX_PASSES):
            cons = [hard[i] | forced[i] for i in range(n)]
            failed: dict[int, Exception] = dict(pre)
            for comp in _cycles(cons):
                failed.update((i, WorkbookError(self._cycle_text(comp, hard))) for i in comp)
            self._pass(_order(cons, soft, failed), failed)
            bad = self._violations()
            if not bad:
                return
            for j, k in bad:
                forced[j].add(k)
        # still unsettled: report those cells and everything that read them
        rev: dict[int, set[int]] = {}
        for j, deps in enumerate(hard):
            for k in deps | forced[j]:
                rev.setdefault(k, set()).add(j)
        todo = []
        for j, k in sorted(bad):
            self._fail(j, WorkbookError(f"circular reference: {self.items[j].label} reads cells "
                                        f"that the result of {self.items[k].label} spills into"))
            todo.append(j)
        while todo:
            k = todo.pop()
            for j in rev.get(k, ()):
                if j not in self.errors:
                    self._fail(j, WorkbookError(f"depends on {self.items[k].label}, which has an error"))
                    todo.append(j)

    def _cycle_text(self, comp: list[int], hard: list[set[int]]) -> str:
        if len(comp) > 1:
            return "circular reference among " + ", ".join(self.items[i].label for i in comp)
        i = comp[0]
        if i in hard[i]:
            return f"circular reference: {self.items[i].label} refers to its own cell"
        return f"circular reference: {self.items[i].label} reads cells its own result spills into"

    def _fail(self, i: int, exc: Exception) -> None:
        self.results[i] = _FAILED
        self.errors[i] = exc

    def _pass(self, order: list[int], failed: dict[int, Exception]) -> None:
        self._reset()
        self.errors = {}
        for i, exc in failed.items():
            self._fail(i, exc)
            self.finish[i] = -1
        for i in order:
            it = self.items[i]
            self.current, self.job_memo = i, {}
            try:
                value = self._value(it.tree, it.sheet, 0)
                if type(value) is list:
                    self._place(i, value)
                self.results[i] = value
            except Exception as exc:    # any failure belongs to this cell only
                self._fail(i, exc)
            self.finish[i] = self.seq
            self.seq += 1
        self.current = None

    def _violations(self) -> set[tuple[int, int]]:
        """(reader, result) pairs where a result spilled into cells read before it existed."""
        spills: dict[str, list[tuple[int, int, int, int, int]]] = {}
        for k, (sheet, r1, c1, r2, c2) in self.spill_rect.items():
            spills.setdefault(sheet, []).append((k, r1, c1, r2, c2))
        out = set()
        for j, entries in self.log.items():
            for sheet, r1, c1, r2, c2, seq in entries:
                for k, a1, b1, a2, b2 in spills.get(sheet, ()):
                    if self.finish[k] >= seq and r1 <= a2 and a1 <= r2 and c1 <= b2 and b1 <= c2:
                        out.add((j, k))
        return out

    def _note(self, rect: Rect) -> None:
        if self.current is not None:
            self.log.setdefault(self.current, []).append((*rect, self.seq))

    # ---- values -----------------------------------------------------------

    def _value(self, node: Any, sheet: str, depth: int) -> Any:
        t = type(node)
        if t is Num or t is Text or t is Bool:
            return node.value
        if t is Ref:
            return self._ref_value(node)
        if t is Call:
            return self._call(node, sheet, depth)
        if t is _r.BinOp:
            return _binop(node.op, self._value(node.left, sheet, depth),
                          self._value(node.right, sheet, depth))
        if t is Neg:
            return _elementwise(_neg, [self._value(node.operand, sheet, depth)])
        if t is Percent:
            return _elementwise(_percent, [self._value(node.operand, sheet, depth)])
        if t is Name:
            if depth >= _r.MAX_NAME_DEPTH:
                raise WorkbookError(f"the defined name '{node.name}' refers to itself")
            text, scope = self.book.name_text(node, sheet)
            return self._value(self.reach.tree(text, scope), scope, depth + 1)
        if t is Missing:
            return None
        if t is ArrayLit:
            return [list(row) for row in node.rows]
        if t is ErrorLit:
            raise WorkbookError(f"the formula contains the error value {node.code}")
        if t is _r.Unsupported:
            raise _Unsupported(node.reason)
        raise WorkbookError(f"cannot compute {node!r}")      # pragma: no cover - parser makes no other nodes

    def _read(self, sheet: str, grid: dict[_r.Pos, Any], r: int, c: int) -> tuple[Any, bool]:
        """(value, True if it is a stored constant or empty) of one cell."""
        key = (sheet, r, c)
        i = self.anchor.get(key)
        if i is not None:
            res = self.results.get(i, _PENDING)
            if res is _FAILED:
                raise _Located(f"depends on {cell_label(*key)}, which has an error")
            if res is _PENDING:
                raise _Located(f"{cell_label(*key)} is not computed yet (circular reference?)")
            return _cell_value(res[0][0] if type(res) is list else res), False
        hit = self.spilled.get(key)
        if hit is not None:
            return _cell_value(hit[0]), False
        if key in self.stale:           # left from an earlier spill; fill empties it
            return None, True
        v = grid.get((r, c))
        if type(v) is Formula:
            return self._native(key), False
        if isinstance(v, ErrorValue):
            raise _Located(f"{cell_label(*key)} holds the error {v.code}")
        return v, True

    def _ref_value(self, ref: Ref) -> Any:
        sheet = self.book.sheet(ref.sheet)
        grid = self.book.cells[sheet]
        if ref.r1 == ref.r2 and ref.c1 == ref.c2:
            v, plain = self._read(sheet, grid, ref.r1, ref.c1)
            if plain:
                self._note((sheet, ref.r1, ref.c1, ref.r1, ref.c1))
            return v
        return self._range((sheet, ref.r1, ref.c1, ref.r2, ref.c2))

    def _range(self, rect: Rect) -> Rows:
        # A range's values change only when a result spills into it (_place
        # forgets it then) or through native cells not yet final (not kept).
        memo = self.range_memo.get(rect)
        if memo is None:
            sheet, r1, c1, r2, c2 = rect
            grid = self.book.cells[sheet]
            read = self._read
            rows, plain_any = [], False
            for r in range(r1, r2 + 1):
                row = []
                for c in range(c1, c2 + 1):
                    v, plain = read(sheet, grid, r, c)
                    row.append(v)
                    plain_any = plain_any or plain
                rows.append(row)
            memo = (rows, plain_any)
            if all(key in self.native_memo for key in self.reach.rect_info(rect)[2]):
                self.range_memo[rect] = memo
        if memo[1]:
            self._note(rect)
        return [row[:] for row in memo[0]]     # the callee may change what it is given

    def _call(self, node: Call, sheet: str, depth: int) -> Any:
        name, args = node.name, node.args
        if node.ours:
            func = self.funcs.get(name)
            if func is None:
                raise WorkbookError(f"unknown function {name}")
            self._check_arity(name, func, len(args))
            values = [self._value(a, sheet, depth) for a in args]
            return _normalise(func(*values), name)
        if name == "ANCHORARRAY":
            return self._anchor_array(args)
        spec = _NATIVE.get(name)
        if spec is None:
            raise _Unsupported(f"{name} cannot be computed by fill; compute it in a cell of "
                               "its own and refer to that cell")
        lo, hi, fn = spec
        if not lo <= len(args) <= hi:
            want = f"{lo}" if lo == hi else f"{lo} or {hi}"
            raise WorkbookError(f"{name} takes {want} argument{'s' if hi != 1 else ''}, "
                                f"but {len(args)} {'was' if len(args) == 1 else 'were'} given")
        values = [self._value(a, sheet, depth) for a in args]
        if name == "SINGLE":
            v = values[0]
            return v[0][0] if type(v) is list else v
        return _elementwise(fn, values)

    def _check_arity(self, name: str, func: Callable[..., Any], n: int) -> None:
        sig = self._sigs.get(name, NOTHING)
        if sig is NOTHING:
            try:
                sig = inspect.signature(func)
            except (TypeError, ValueError):
                sig = None                      # builtins: let the call itself complain
            self._sigs[name] = sig
        if sig is None:
            return
        try:
            sig.bind(*([None] * n))
        except TypeError:
            raise ParameterError(f"{name} takes {_arity_text(sig)}, but "
                                 f"{n} {'was' if n == 1 else 'were'} given") from None

    def _anchor_array(self, args: tuple[Any, ...]) -> Any:
        if len(args) != 1 or type(args[0]) is not Ref:
            raise _Unsupported("the spill operator # needs one cell, as in F2#")
        ref = args[0]
        sheet = self.book.sheet(ref.sheet)
        key = (sheet, ref.r1, ref.c1)
        i = self.anchor.get(key)
        if i is not None:
            res = self.results.get(i, _PENDING)
            if res is _FAILED or res is _PENDING:
                raise _Located(f"depends on {cell_label(*key)}, which has an error")
            if type(res) is list:
                return [[_cell_value(v) for v in row] for row in res]
            return _cell_value(res)
        rect = self.reach.anchor_rect(ref)
        if rect[1:3] == rect[3:5]:
            raise WorkbookError(f"{cell_label(*key)}# refers to a cell that holds no array result")
        return self._range(rect)

    def _place(self, i: int, rows: Rows) -> None:
        """Record the cells an array result spills into, or raise if one is taken."""
        it = self.items[i]
        m, n = len(rows), len(rows[0])
        if m == 1 and n == 1:
            return
        if it.row + m - 1 > _r.MAX_ROW or it.col + n - 1 > _r.MAX_COL:
            raise WorkbookError(f"the {m}x{n} result does not fit on the sheet from {it.ref}")
        grid = self.book.cells[it.sheet]
        for a in range(m):
            for b in range(n):
                key = (it.sheet, it.row + a, it.col + b)
                if (a or b) and (key in self.anchor or key in self.spilled
                                 or type(grid.get(key[1:])) is Formula):
                    other = self.spilled.get(key)
                    why = (f"the result of {self.items[other[1]].label}" if other
                           else "a formula")
                    raise WorkbookError(f"the {m}x{n} result cannot spill: {cell_label(*key)} "
                                        f"holds {why}; move it or this formula")
        for a in range(m):
            for b in range(n):
                if a or b:
                    self.spilled[(it.sheet, it.row + a, it.col + b)] = (rows[a][b], i)
        r2, c2 = it.row + m - 1, it.col + n - 1
        self.spill_rect[i] = (it.sheet, it.row, it.col, r2, c2)
        for rect in [k for k in self.range_memo if k[0] == it.sheet and k[1] <= r2
                     and it.row <= k[3] and k[2] <= c2 and it.col <= k[4]]:
            del self.range_memo[rect]

    # ---- cells holding native formulas -----------------------------------

    def _native(self, key: Key) -> Any:
        v = self.native_memo.get(key, NOTHING)
        if v is NOTHING:
            v = self.job_memo.get(key, NOTHING)
        if v is NOTHING:
            if key in self.active:
                raise _Located(f"{cell_label(*key)} is part of a circular reference")
            v = self._compute_native(key)
        if type(v) is _Err:
            raise _Located(v.message)
        return v

    def _known(self, key: Key) -> bool:
        return key in self.native_memo or key in self.job_memo

    def _store(self, key: Key, value: Any) -> None:
        hard, soft = self.reach.closure(key)
        results = self.results
        settled = all(k in results for k in hard) and all(k in results for k in soft)
        (self.native_memo if settled else self.job_memo)[key] = value

    def _compute_native(self, key: Key) -> Any:
        stack = [key]
        while stack:        # children first, without deep recursion
            k = stack[-1]
            if self._known(k):
                stack.pop()
                continue
            if k not in self.active:
                quick = self._native_quick(k)
                if quick is not NOTHING:
                    self._store(k, quick)
                    stack.pop()
                    continue
                self.active.add(k)
                stack.extend(ch for ch in self.reach.children(k)
                             if not self._known(ch) and ch not in self.active)
                continue
            stack.pop()
            self._store(k, self._native_eval(k))
            self.active.discard(k)
        v = self.native_memo.get(key, NOTHING)
        return self.job_memo[key] if v is NOTHING else v

    def _depends(self, key: Key) -> bool:
        """Whether the cell surely reads results of this run (so its cache is stale)."""
        hard, soft = self.reach.closure(key)
        if hard:
            return True
        if not soft:
            return False
        rects = self.reach.native_rects(key)
        pending = False
        for k in soft:
            if k not in self.results:
                pending = True
            elif k in self.spill_rect:
                sheet, a1, b1, a2, b2 = self.spill_rect[k]
                if any(s == sheet and r1 <= a2 and a1 <= r2 and c1 <= b2 and b1 <= c2
                       for s, r1, c1, r2, c2 in rects):
                    return True
        if pending:
            for rect in rects:
                self._note(rect)
        return False

    def _native_quick(self, key: Key) -> Any:
        """Cached value or error when there is nothing to compute, else NOTHING."""
        sheet, r, c = key
        depends = self._depends(key)
        if not depends:
            cached = self.book.cached(sheet, (r, c))
            if type(cached) is ErrorValue:
                return _Err(f"{cell_label(*key)} holds the error {cached.code}")
            if cached is not NOTHING:
                return cached
        try:
            self.reach.tree(self.book.cells[sheet][(r, c)].text, sheet)
        except WorkbookError:
            return _Err(self._cannot(key, depends))
        return NOTHING

    def _native_eval(self, key: Key) -> Any:
        sheet, r, c = key
        try:
            v = self._value(self.reach.tree(self.book.cells[sheet][(r, c)].text, sheet), sheet, 0)
        except _Unsupported:
            return _Err(self._cannot(key, self._depends(key)))
        except _Located as exc:
            return _Err(exc.message)
        except Exception as exc:
            return _Err(f"cell {cell_label(*key)}: {exc}")
        if type(v) is list:
            v = v[0][0]
        return 0.0 if v is None else v          # =A1 of an empty A1 shows 0

    @staticmethod
    def _cannot(key: Key, depends: bool) -> str:
        label = cell_label(*key)
        if depends:
            return (f"cell {label} holds a formula that fill cannot compute and that uses results "
                    "of this run; keep it to + - * / ^ and PI, SQRT, EXP, LN, ABS")
        return (f"cell {label} holds a formula that fill cannot compute; "
                "type its value or use a defined constant")


# --------------------------------------------------------------------------
# ordering helpers
# --------------------------------------------------------------------------

def _cycles(deps: list[set[int]]) -> list[list[int]]:
    """Strongly connected components that form cycles (Tarjan, iterative)."""
    index: dict[int, int] = {}
    low: dict[int, int] = {}
    stack: list[int] = []
    on: set[int] = set()
    out: list[list[int]] = []
    for root in range(len(deps)):
        if root in index:
            continue
        index[root] = low[root] = len(index)
        stack.append(root)
        on.add(root)
        work = [(root, iter(sorted(deps[root])))]
        while work:
            v, it = work[-1]
            for w in it:
                if w not in index:
                    index[w] = low[w] = len(index)
                    stack.append(w)
                    on.add(w)
                    work.append((w, iter(sorted(deps[w]))))
                    break
                if w in on:
                    low[v] = min(low[v], index[w])
            else:
                work.pop()
                if work:
                    u = work[-1][0]
                    low[u] = min(low[u], low[v])
                if low[v] == index[v]:
                    comp = []
                    while True:
                        w = stack.pop()
                        on.discard(w)
                        comp.append(w)
                        if w == v:
                            break
                    if len(comp) > 1 or v in deps[v]:
                        out.append(sorted(comp))
    return out


def _order(deps: list[set[int]], soft: list[set[int]], done: Mapping[int, Any]) -> list[int]:
    """Cells in an order that meets every ``deps`` edge and as many ``soft`` ones as it can;
    ties go to sheet order.  Cells in ``done`` are left out (they already failed)."""
    n = len(deps)
    need_h = [0] * n
    need_s = [0] * n
    rev_h: list[list[int]] = [[] for _ in range(n)]
    rev_s: list[list[int]] = [[] for _ in range(n)]
    for j in range(n):
        if j in done:
            continue
        for k in deps[j]:
            if k not in done:
                need_h[j] += 1
                rev_h[k].append(j)
        for k in soft[j]:
            if k not in done and k not in deps[j]:
                need_s[j] += 1
                rev_s[k].append(j)
    ready_all: list[int] = []       # hard and soft needs met
    ready_hard: list[int] = []      # hard needs met
    for j in range(n):
        if j not in done and need_h[j] == 0:
            heapq.heappush(ready_hard, j)
            if need_s[j] == 0:
                heapq.heappush(ready_all, j)
    placed = [False] * n
    order: list[int] = []
    while ready_all or ready_hard:
        j = heapq.heappop(ready_all) if ready_all else heapq.heappop(ready_hard)
        if placed[j]:
            continue
        placed[j] = True
        order.append(j)
        for k in rev_h[j]:
            need_h[k] -= 1
            if need_h[k] == 0:
                heapq.heappush(ready_hard, k)
                if need_s[k] == 0:
                    heapq.heappush(ready_all, k)
        for k in rev_s[j]:
            need_s[k] -= 1
            if need_s[k] == 0 and need_h[k] == 0:
                heapq.heappush(ready_all, k)
    return order


def _arity_text(sig: inspect.Signature) -> str:
    kinds = (inspect.Parameter.POSITIONAL_ONLY, inspect.Parameter.POSITIONAL_OR_KEYWORD)
    params = [p for p in sig.parameters.values() if p.kind in kinds]
    need = sum(1 for p in params if p.default is inspect.Parameter.empty)
    if any(p.kind is inspect.Parameter.VAR_POSITIONAL for p in sig.parameters.values()):
        return f"at least {need} argument{'s' if need != 1 else ''}"
    if need == len(params):
        return "no arguments" if need == 0 else f"{need} argument{'s' if need != 1 else ''}"
    return f"{need} to {len(params)} arguments"


# --------------------------------------------------------------------------
# values and the small evaluator
# --------------------------------------------------------------------------

def _cell_value(v: Any) -> Any:
    return float(v) if type(v) is int else v


def _scalar(v: Any, name: str) -> Any:
    if v is None or isinstance(v, (bool, str, int, float)):
        return v
    if hasattr(v, "item") and getattr(v, "shape", None) == ():     # numpy scalar
        return _scalar(v.item(), name)
    if isinstance(v, numbers.Real):
        return float(v)
    raise WorkbookError(f"{name} returned a value of type {type(v).__name__}, which a cell cannot hold")


def _normalise(result: Any, name: str) -> Any:
    """A function's result as a cell value or rows of cell values (1-D = one row, as xlwings)."""
    if hasattr(result, "tolist") and not isinstance(result, (str, bytes)):
        result = result.tolist()
    if not isinstance(result, (list, tuple)):
        return _scalar(result, name)
    if not result:
        raise WorkbookError(f"{name} returned an empty array")
    if all(isinstance(row, (list, tuple)) for row in result):
        rows = [[_scalar(v, name) for v in row] for row in result]
        if len({len(row) for row in rows}) != 1 or not rows[0]:
            raise WorkbookError(f"{name} returned rows of different lengths")
        return rows
    return [[_scalar(v, name) for v in result]]


def _num(v: Any) -> float:
    t = type(v)
    if t is float:
        return cast(float, v)
    if v is None:
        return 0.0
    if t is bool:
        return 1.0 if v else 0.0
    if t is int:
        return float(v)
    if t is str:
        try:
            x = float(v)
        except ValueError:
            x = math.nan
        if math.isfinite(x):
            return x
        raise WorkbookError(f"the text {v!r} is used as a number")
    if isinstance(v, numbers.Real):
        return float(v)
    raise WorkbookError(f"a value of type {t.__name__} is used as a number")


def _finite(x: float) -> float:
    if math.isfinite(x):
        return x
    raise WorkbookError("a result is too large to be a number")


def _pow(a: Any, b: Any) -> float:
    x, y = _num(a), _num(b)
    if x == 0 and y <= 0:
        raise WorkbookError("division by zero" if y < 0 else "0^0 is undefined")
    if x < 0 and y != int(y):
        raise WorkbookError("a negative number raised to a fractional power")
    try:
        return _finite(x ** y)
    except OverflowError:
        raise WorkbookError("a result is too large to be a number") from None


def _div(a: Any, b: Any) -> float:
    y = _num(b)
    if y == 0:
        raise WorkbookError("division by zero")
    return _finite(_num(a) / y)


_OPS: dict[str, Callable[[Any, Any], float]] = {
    "+": lambda a, b: _finite(_num(a) + _num(b)),
    "-": lambda a, b: _finite(_num(a) - _num(b)),
    "*": lambda a, b: _finite(_num(a) * _num(b)),
    "/": _div,
    "^": _pow,
}


def _binop(op: str, a: Any, b: Any) -> Any:
    fn = _OPS.get(op)
    if fn is None:
        what = {",": "the range union ','", " ": "the range intersection ' '"}.get(op, f"the operator {op}")
        raise _Unsupported(f"{what} is not supported by fill")
    return _elementwise(fn, [a, b])


def _neg(a: Any) -> float:
    return 0.0 - _num(a)


def _percent(a: Any) -> float:
    return _num(a) / 100.0


def _elementwise(fn: Callable[..., Any], values: list[Any]) -> Any:
    """``fn`` on scalars, or item by item on rows (a single row or column is repeated)."""
    if not any(type(v) is list for v in values):
        return fn(*values)
    grids = [v if type(v) is list else [[v]] for v in values]
    shapes = [(len(g), len(g[0])) for g in grids]
    m = max(s[0] for s in shapes)
    n = max(s[1] for s in shapes)
    if any(s[0] not in (1, m) or s[1] not in (1, n) for s in shapes):
        sizes = " and ".join(f"{a}x{b}" for a, b in shapes)
        raise WorkbookError(f"ranges of different sizes ({sizes}) in one calculation")
    return [[fn(*(g[i if s[0] > 1 else 0][j if s[1] > 1 else 0] for g, s in zip(grids, shapes, strict=True)))
             for j in range(n)] for i in range(m)]


def _checked(name: str, fn: Callable[[float], float], ok: Callable[[float], bool],
             why: str) -> Callable[[Any], float]:
    def apply(v: Any) -> float:
        x = _num(v)
        if not ok(x):
            raise WorkbookError(f"{name} of {x:g}: {why}")
        try:
            return _finite(fn(x))
        except OverflowError:
            raise WorkbookError("a result is too large to be a number") from None
    return apply


def _any(x: float) -> bool:
    return True


_NATIVE: dict[str, tuple[int, int, Callable[..., Any]]] = {
    "PI": (0, 0, lambda: math.pi),
    "SQRT": (1, 1, _checked("SQRT", math.sqrt, lambda x: x >= 0, "the number is negative")),
    "EXP": (1, 1, _checked("EXP", math.exp, _any, "")),
    "LN": (1, 1, _checked("LN", math.log, lambda x: x > 0, "the number is not positive")),
    "LOG10": (1, 1, _checked("LOG10", math.log10, lambda x: x > 0, "the number is not positive")),
    "ABS": (1, 1, _checked("ABS", abs, _any, "")),
    "SIN": (1, 1, _checked("SIN", math.sin, _any, "")),
    "COS": (1, 1, _checked("COS", math.cos, _any, "")),
    "TAN": (1, 1, _checked("TAN", math.tan, _any, "")),
    "ATAN": (1, 1, _checked("ATAN", math.atan, _any, "")),
    "POWER": (2, 2, _pow),
    "SINGLE": (1, 1, lambda v: v),      # implicit intersection '@'; handled in _call
}
