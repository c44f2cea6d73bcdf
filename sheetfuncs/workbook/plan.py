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
* An array result spills down and right over empty cells only, and over the
  constants of a spill an earlier fill recorded (defined names ``_sfspill...``;
  the writer stores spilled cells as constants, so a second run overwrites
  them).  Any other cell in the way -- the user's text, number or error value,
  a formula, another result -- blocks it: the anchor gets an error naming the
  first blocking cell (row by row) and no blocking cell is touched, as Excel's
  #SPILL! does.  Constants inside a recorded spill read as empty unless a new
  result covers them, since the writer empties them.
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

from dataclasses import dataclass
from typing import Any, Callable, Iterator, Mapping

from sheetfuncs.errors import ParameterError, WorkbookError
from sheetfuncs.workbook import refs as _r
from sheetfuncs.workbook.calc import _Located, _Unsupported
from sheetfuncs.workbook.formula import (BinOp, Call, Neg, Percent, canonical_function, parse_tokens,
                                         tokenize)
from sheetfuncs.workbook.refs import Formula, Name, Ref
from sheetfuncs.workbook.run import _Item, _Run

__all__ = ["Job", "Outcome", "scan", "evaluate", "spill_targets"]


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
             error_text: Callable[[Exception], str], strict: bool = False,
             natives: dict | None = None, not_computed: dict | None = None) -> list[Outcome]:
    """Compute every cell ``scan`` finds (in the same order); one bad cell never stops the run.

    ``book_or_path``: a path, an openpyxl Workbook (then there are no cached
    values of native formulas) or a ``refs.Book``.  ``functions`` maps
    upper-case names to callables taking the resolved arguments positionally.
    Any exception a callable raises, and every problem found here, becomes that
    cell's ``error`` through ``error_text``.  Raises ``WorkbookError`` only when
    the file itself cannot be read, or (``strict``) when one of our formulas cannot.

    ``natives``: a dict to receive ``(sheet, ref) -> value`` for the cells
    holding native formulas that the small evaluator can compute (numbers and
    text; after our results, so formulas over them are current).  The others
    are left out; ``not_computed`` (a dict) receives ``(sheet, ref) -> reason`` for them.
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
    if natives is not None:
        natives.update(_native_values(run, book, not_computed))
    return out


def _native_values(run: _Run, book: _r.Book, missing: dict | None = None) -> dict:
    out = {}
    missing = {} if missing is None else missing
    run.job_memo.clear()
    run.current = None
    for sheet in book.sheets:
        for pos, cell in book.cells[sheet].items():
            if type(cell) is not Formula or (sheet, pos[0], pos[1]) in run.anchor or cell.text is None:
                continue
            ref = f"{_r.column_letters(pos[1])}{pos[0]}"
            try:
                value = run._native((sheet, pos[0], pos[1]))
            except Exception as exc:  # noqa: BLE001 - not computable here: left to the spreadsheet
                missing[(sheet, ref)] = getattr(exc, "message", None) or str(exc) or type(exc).__name__
                continue
            if isinstance(value, bool):
                missing[(sheet, ref)] = "a logical value (TRUE/FALSE): computed, not cached"
                continue
            if not isinstance(value, (int, float, str)):
                missing[(sheet, ref)] = f"a value of type {type(value).__name__}"
                continue
            out[(sheet, ref)] = value
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
                tokens = tokenize(text)
            except WorkbookError as exc:
                it.problem = exc.message
                items.append(it)
                continue
            ours = [name for name in (canonical_function(t.value[:-1].lstrip("@"))
                                      for t in tokens if t.type == "FUNC" and t.subtype == "OPEN")
                    if name.startswith(key)]
            if not ours:
                continue                # "SF_" only inside text or a name: a native formula
            it.function = ours[0]
            try:
                it.tree = parse_tokens(tokens, text, sheet, prefix)
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
    elif t is BinOp:
        rights = []
        while type(node) is BinOp:          # along the left spine, without recursion
            rights.append(node.right)
            node = node.left
        yield from _labels(node)
        for r in reversed(rights):
            yield from _labels(r)
