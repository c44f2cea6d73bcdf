"""The run behind ``plan.evaluate``: our cells computed in dependency order.

``_Run`` orders the cells (repeating the pass when a result spills into cells
read before it existed), reads cells, ranges and defined names, places array
results, and gives cells holding native formulas their cached or computed value.
"""
from __future__ import annotations

import inspect
from typing import Any, Callable, Mapping

from sheetfuncs.errors import ParameterError, WorkbookError
from sheetfuncs.workbook import refs as _r
from sheetfuncs.workbook.calc import (_AGGREGATE, _NATIVE, _arity_text, _binop, _cell_value, _elementwise,
                                      _Located, _neg, _normalise, _percent, _truth, _Unsupported)
from sheetfuncs.workbook.deps import MAX_NAME_DEPTH, Reach
from sheetfuncs.workbook.formula import (ArrayLit, BinOp, Bool, Call, ErrorLit, Missing, Neg, Num,
                                         Percent, Text, Unsupported)
from sheetfuncs.workbook.natives import _NativeCells
from sheetfuncs.workbook.order import _cycles, _order
from sheetfuncs.workbook.refs import NOTHING, ErrorValue, Formula, Key, Name, Rect, Ref, cell_label

Rows = list[list[Any]]                  # an array value: rows of cell values

_MAX_PASSES = 4
#: most cells one range argument may cover (each becomes a value handed to the function)
MAX_RANGE_CELLS = 1 << 20                # one whole column
_CYCLE_SHOWN = 12                      # cells a cycle's message names


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


_PENDING = object()
_FAILED = object()


# --------------------------------------------------------------------------
# the run
# --------------------------------------------------------------------------

class _Run(_NativeCells):
    def __init__(self, book: _r.Book, items: list[_Item], functions: Mapping[str, Callable[..., Any]]):
        self.book, self.items = book, items
        self.funcs = {k.upper(): f for k, f in functions.items()}
        self.anchor = {(it.sheet, it.row, it.col): i for i, it in enumerate(items)}
        self.reach = Reach(book, self.anchor)
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
                if len(comp) > 1:               # one text for the whole cycle (it can be long)
                    exc = WorkbookError(self._cycle_text(comp, hard))
                    failed.update((i, exc) for i in comp)
                else:
                    failed[comp[0]] = WorkbookError(self._cycle_text(comp, hard))
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
            shown = ", ".join(self.items[i].label for i in comp[:_CYCLE_SHOWN])
            more = f" and {len(comp) - _CYCLE_SHOWN} more cells" if len(comp) > _CYCLE_SHOWN else ""
            return f"circular reference among {shown}{more}"
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
        if t is BinOp:
            if type(node.left) is not BinOp:
                return _binop(node.op, self._value(node.left, sheet, depth),
                              self._value(node.right, sheet, depth))
            spine = []                      # a chain A+B+C..., left to right, without recursion
            while type(node) is BinOp:
                spine.append(node)
                node = node.left
            acc = self._value(node, sheet, depth)
            for op in reversed(spine):
                acc = _binop(op.op, acc, self._value(op.right, sheet, depth))
            return acc
        if t is Neg:
            return _elementwise(_neg, [self._value(node.operand, sheet, depth)])
        if t is Percent:
            return _elementwise(_percent, [self._value(node.operand, sheet, depth)])
        if t is Name:
            if depth >= MAX_NAME_DEPTH:
                raise WorkbookError(f"the defined name '{node.name}' refers to itself")
            text, scope = self.book.name_text(node, sheet)
            return self._value(self.reach.tree(text, scope), scope, depth + 1)
        if t is Missing:
            return None
        if t is ArrayLit:
            return [list(row) for row in node.rows]
        if t is ErrorLit:
            raise WorkbookError(f"the formula contains the error value {node.code}")
        if t is Unsupported:
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
            size = (r2 - r1 + 1) * (c2 - c1 + 1)
            if size > MAX_RANGE_CELLS:
                label = _r.ref_label(Ref(sheet, r1, c1, r2, c2))
                raise WorkbookError(f"the range {label} has {size:,} cells, above fill's limit of "
                                    f"{MAX_RANGE_CELLS:,}; use a range that covers only the data")
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
        if name in ("IF", "IFERROR"):
            return self._if(name, args, sheet, depth)
        agg = _AGGREGATE.get(name)
        if agg is not None:
            lo, hi, afn = agg
            if not lo <= len(args) <= hi:
                raise WorkbookError(f"{name} takes {lo} to {hi} arguments, but {len(args)} were given")
            return afn([self._value(a, sheet, depth) for a in args])
        spec = _NATIVE.get(name)
        if spec is None:
            exc = _Unsupported(f"{name} cannot be computed by fill; compute it in a cell of "
                               "its own and refer to that cell")
            exc.what = name
            raise exc
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

    def _if(self, name: str, args: tuple[Any, ...], sheet: str, depth: int) -> Any:
        """IF(condition, then, else) and IFERROR(value, instead), computing only the branch taken."""
        if name == "IF":
            if not 2 <= len(args) <= 3:
                raise WorkbookError(f"IF takes 2 or 3 arguments, but {len(args)} were given")
            cond = self._value(args[0], sheet, depth)
            if type(cond) is list:          # a range condition: item by item, both branches
                rest = [self._value(a, sheet, depth) for a in args[1:]] + [False] * (3 - len(args))
                return _elementwise(lambda c, a, b: a if _truth(c) else b, [cond, *rest])
            if _truth(cond):
                return self._value(args[1], sheet, depth)
            return self._value(args[2], sheet, depth) if len(args) == 3 else False
        if len(args) != 2:
            raise WorkbookError(f"IFERROR takes 2 arguments, but {len(args)} were given")
        try:
            return self._value(args[0], sheet, depth)
        except _Unsupported:
            raise
        except WorkbookError:
            return self._value(args[1], sheet, depth)

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
        stale = self.stale
        for a in range(m):
            for b in range(n):
                if not (a or b):
                    continue
                key = (it.sheet, it.row + a, it.col + b)
                held = grid.get(key[1:])
                if key in self.anchor or key in self.spilled or type(held) is Formula:
                    other = self.spilled.get(key)
                    why = (f"the result of {self.items[other[1]].label}" if other
                           else "a formula")
                elif held is not None and key not in stale:
                    # the user's own value: never overwritten (Excel shows #SPILL! too)
                    why = f"a value ({_shown(held)})"
                else:
                    continue
                raise WorkbookError(f"the {m}x{n} result cannot spill: {cell_label(*key)} "
                                    f"holds {why}; clear it or move this formula")
        for a in range(m):
            for b in range(n):
                if a or b:
                    self.spilled[(it.sheet, it.row + a, it.col + b)] = (rows[a][b], i)
        r2, c2 = it.row + m - 1, it.col + n - 1
        self.spill_rect[i] = (it.sheet, it.row, it.col, r2, c2)
        for rect in [k for k in self.range_memo if k[0] == it.sheet and k[1] <= r2
                     and it.row <= k[3] and k[2] <= c2 and it.col <= k[4]]:
            del self.range_memo[rect]


def _shown(value: Any) -> str:
    if isinstance(value, ErrorValue):
        return f"the error {value.code}"
    if isinstance(value, str):
        return repr(value if len(value) <= 30 else value[:27] + "...")
    return repr(value)
