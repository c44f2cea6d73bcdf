"""Cells holding native formulas, for the run: their cached value, or one the small
evaluator computes when the cache would be stale (or there is none)."""
from __future__ import annotations

from typing import Any

from sheetfuncs.errors import WorkbookError
from sheetfuncs.workbook.calc import _Located, _Unsupported
from sheetfuncs.workbook.deps import Reach
from sheetfuncs.workbook.refs import NOTHING, Book, ErrorValue, Key, Rect, cell_label


class _Err:
    __slots__ = ("message",)

    def __init__(self, message: str):
        self.message = message


class _NativeCells:
    """Part of ``run._Run``: values of native formula cells, children first.

    Final values go to ``native_memo``; values that depend on results not yet
    settled go to ``job_memo`` (valid for the current cell only).
    """

    book: Book
    reach: Reach
    results: dict[int, Any]
    spill_rect: dict[int, Rect]
    native_memo: dict[Key, Any]
    job_memo: dict[Key, Any]
    active: set[Key]

    def _value(self, node: Any, sheet: str, depth: int) -> Any:     # defined by _Run
        raise NotImplementedError

    def _note(self, rect: Rect) -> None:                            # defined by _Run
        raise NotImplementedError

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
        except _Unsupported as exc:
            what = getattr(exc, "what", None)
            why = f"{what} is not among the functions fill computes" if what else exc.message
            return _Err(self._cannot(key, self._depends(key), why))
        except _Located as exc:
            return _Err(exc.message)
        except Exception as exc:
            return _Err(f"cell {cell_label(*key)}: {exc}")
        if type(v) is list:
            v = v[0][0]
        return 0.0 if v is None else v          # =A1 of an empty A1 shows 0

    @staticmethod
    def _cannot(key: Key, depends: bool, why: str = "") -> str:
        label = cell_label(*key)
        why = f" ({why})" if why else ""
        if depends:
            return (f"cell {label} holds a formula that fill cannot compute and that uses results "
                    f"of this run{why}; see docs/fill.md for the functions fill computes")
        return (f"cell {label} holds a formula that fill cannot compute{why}; "
                "type its value or use a defined constant")
