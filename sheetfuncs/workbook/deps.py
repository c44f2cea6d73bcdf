"""Reach: which cells a formula reads, and which of our cells those depend on.

``Reach`` looks up, for rectangles, ``F2#`` anchors and native formula cells,
the anchors of our cells they surely or possibly depend on; it remembers what
it found and evaluates nothing.
"""
from __future__ import annotations

from bisect import bisect_left, bisect_right
from typing import NamedTuple

from sheetfuncs.errors import WorkbookError
from sheetfuncs.workbook.formula import BinOp, Call, Neg, Node, Percent, parse_name_text
from sheetfuncs.workbook.refs import Book, Formula, Key, Name, Rect, Ref

MAX_NAME_DEPTH = 20                     # defined names inside defined names

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
                rights = []
                while isinstance(node, BinOp):      # along the left spine, without recursion
                    rights.append(node.right)
                    node = node.left
                self.rects(node, sheet, out, depth)
                for r in reversed(rights):
                    self.rects(r, sheet, out, depth)
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
