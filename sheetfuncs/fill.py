"""Headless fill: compute every cell that calls one of our functions and store
the results as the formulas' cached values, touching nothing else.

Steps: read the plan (``workbook.plan``: find our cells with openpyxl's
tokenizer, resolve arguments, evaluate in dependency order with the plain
cell functions), then write (``workbook.package``: patch only those cells in
the original zip package, atomically).  Array results spill below/right as
constants, exactly as Excel spills them; the extent of each spill is kept in
a hidden defined name so that a later fill clears what a smaller result no
longer covers.  Results are kept in the persistent result cache, so a second
fill of an unchanged workbook is quick.

The input is never overwritten unless ``in_place`` (then a backup is kept).
"""
from __future__ import annotations

import json
import os
import shutil
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Mapping

from . import cellfuncs
from .engine import cache
from .errors import WorkbookError
from .workbook import plan as _plan
from .workbook import refs as _refs
from .workbook.package import CellWrite, defined_names, read_package, write_results

SPILL_NAME_PREFIX = _refs.SPILL_NAME_PREFIX
EMPTY_TEXT = " "          # LibreOffice recomputes a formula cached as "" (shows #NAME?)
SUFFIXES = (".xlsx", ".xlsm")


@dataclass(frozen=True)
class FillReport:
    source: str
    output: str
    cells: int
    errors: int
    spilled: int
    cleared: int
    cache_hits: int
    seconds: float
    backup: str | None = None
    error_cells: tuple = field(default=())      # (sheet!ref, message), first few

    def to_dict(self) -> dict:
        return {"source": self.source, "output": self.output, "cells": self.cells,
                "errors": self.errors, "spilled": self.spilled, "cleared": self.cleared,
                "cache_hits": self.cache_hits, "seconds": round(self.seconds, 3),
                "backup": self.backup,
                "error_cells": [{"cell": c, "error": e} for c, e in self.error_cells]}


# ------------------------------------------------------------------ caching
class _CachedFunctions:
    """The cell functions behind the persistent result store."""

    def __init__(self, functions: Mapping[str, Callable], store: cache.ResultStore | None,
                 names: dict):
        self.functions = functions
        self.store = store
        self.names = names
        self.hits = 0
        self.pending: dict = {}

    def mapping(self) -> dict:
        return {name: self._wrap(name, fn) for name, fn in self.functions.items()}

    def _wrap(self, name, fn):
        def call(*args):
            key = None
            if self.store is not None:
                try:
                    key = cache.make_key(name, args, self.names)
                except (TypeError, ValueError):
                    key = None
            if key is not None:
                if key in self.pending:
                    self.hits += 1
                    return self.pending[key]
                hit = self.store.get(key)
                if hit is not None:
                    self.hits += 1
                    return hit["v"]
            value = fn(*args)
            if key is not None and not _is_error(value):
                self.pending[key] = value
            return value
        return call

    def flush(self):
        if self.store is not None and self.pending:
            try:
                self.store.put_many({k: {"v": v} for k, v in self.pending.items()})
            except Exception:  # noqa: BLE001 - a cache that cannot be written is only slower
                pass
        self.pending = {}


def _is_error(value) -> bool:
    if isinstance(value, str):
        return value.startswith(cellfuncs.ERROR_MARK)
    if isinstance(value, list):
        return any(_is_error(v) for row in value for v in (row if isinstance(row, list) else [row]))
    return False


# ------------------------------------------------------------------ names
def defined_name_values(book: _refs.Book) -> dict:
    """Workbook-scoped defined names that point at one cell holding a number."""
    out = {}
    for key, text in book.book_names.items():
        if key.startswith(SPILL_NAME_PREFIX) or key.startswith("_xlnm"):
            continue
        try:
            ref = _refs.parse_reference(text.strip().lstrip("="), book.sheets[0] if book.sheets else "")
        except Exception:  # noqa: BLE001 - names to constants or formulas: not parameters
            continue
        if not isinstance(ref, _refs.Ref) or (ref.r1, ref.c1) != (ref.r2, ref.c2):
            continue
        try:
            sheet = book.sheet(ref.sheet)
        except WorkbookError:
            continue
        value = book.cells.get(sheet, {}).get((ref.r1, ref.c1))
        if isinstance(value, _refs.Formula):
            value = book.cached(sheet, (ref.r1, ref.c1))
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            out[book.book_name_case.get(key, key)] = float(value)
    return out


def _spill_cells(text: str, book: _refs.Book):
    try:
        ref = _refs.parse_reference(text.strip().lstrip("="), book.sheets[0])
        sheet = book.sheet(ref.sheet)
    except Exception:  # noqa: BLE001 - a damaged bookkeeping name is ignored
        return []
    return [(sheet, r, c) for r in range(ref.r1, ref.r2 + 1) for c in range(ref.c1, ref.c2 + 1)]


def _col(c: int) -> str:
    return _refs.column_letters(c)


def _quote(sheet: str) -> str:
    return _refs.sheet_prefix(sheet)


# ------------------------------------------------------------------ fill
def output_path(src: Path, out: str | os.PathLike | None, in_place: bool) -> Path:
    if in_place:
        return src
    if out is None:
        return src.with_name(f"{src.stem}_filled{src.suffix}")
    out = Path(out)
    if out.is_dir():
        return out / src.name
    return out


def fill_workbook(src, dst=None, *, in_place: bool = False, functions: Mapping | None = None,
                  use_cache: bool = True, store: cache.ResultStore | None = None) -> FillReport:
    """Fill one workbook; returns what was done.  Raises WorkbookError (nothing written)."""
    t0 = time.perf_counter()
    src = Path(src)
    if src.suffix.lower() not in SUFFIXES:
        raise WorkbookError("not an .xlsx or .xlsm workbook", file=str(src))
    if not src.is_file():
        raise WorkbookError("file not found", file=str(src))
    dst_path = output_path(src, dst, in_place)
    if not in_place and dst_path.resolve() == src.resolve():
        raise WorkbookError("the output would overwrite the input; use --in-place (keeps a backup)",
                            file=str(src))
    pkg = read_package(src)                       # refuses corrupt / encrypted files early
    book = _refs.open_book(src)
    names = defined_name_values(book)
    if use_cache and cache.enabled():
        store = store or cache.ResultStore()
    else:
        store = None
    funcs = _CachedFunctions(functions or cellfuncs.FUNCTIONS, store, names)
    natives: dict = {}
    with cellfuncs.name_values(names):
        outcomes = _plan.evaluate(book, funcs.mapping(), prefix=cellfuncs.PREFIX,
                                  error_text=cellfuncs.error_text, strict=True, natives=natives)
    funcs.flush()
    writes, spill_names, spilled, errors = _writes(outcomes, book)
    taken = {(w.sheet, w.ref) for w in writes}
    # native formulas get their values cached too, so data-only readers see them
    writes += [CellWrite(sh, ref, v) for (sh, ref), v in natives.items() if (sh, ref) not in taken]
    cleared = _clear_stale(pkg, book, writes, outcomes)
    backup = None
    if in_place:
        backup = str(src.with_name(src.name + ".bak"))
        shutil.copy2(src, backup)
    write_results(pkg, dst_path, writes + cleared, names=spill_names, names_prefix=SPILL_NAME_PREFIX)
    return FillReport(str(src), str(dst_path), len(outcomes), len(errors), spilled, len(cleared),
                      funcs.hits, time.perf_counter() - t0, backup, tuple(errors[:10]))


def _cache_value(v):
    if v is None or (isinstance(v, str) and v == ""):
        return EMPTY_TEXT
    return v


def _own_formula(book, sheet, ref):
    """The anchor's formula text (openpyxl expands shared formulas per cell)."""
    try:
        r = _refs.parse_reference(ref, sheet)
        cell = book.cells[book.sheet(sheet)].get((r.r1, r.c1))
    except Exception:  # noqa: BLE001 - no text: the shared form is then kept
        return None
    return cell.text if isinstance(cell, _refs.Formula) else None


def _writes(outcomes, book=None):
    writes, names, errors = [], {}, []
    spilled = 0
    for o in outcomes:
        where = f"{_quote(o.sheet)}{o.ref}"
        own = _own_formula(book, o.sheet, o.ref) if book is not None else None
        if o.error is not None:
            writes.append(CellWrite(o.sheet, o.ref, o.error, own_formula=own))
            errors.append((where, o.error))
            continue
        value = o.value
        if isinstance(value, list):
            rows = value or [[""]]
            writes.append(CellWrite(o.sheet, o.ref, _cache_value(rows[0][0] if rows[0] else ""),
                                    own_formula=own))
            targets = _plan.spill_targets(o)
            for sheet, ref, v in targets:
                writes.append(CellWrite(sheet, ref, None if v in ("", None) else v, constant=True))
            spilled += len(targets)
            if targets:
                width = max(len(r) for r in rows)
                a = _refs.parse_reference(o.ref, o.sheet)
                names[f"{SPILL_NAME_PREFIX}{len(names) + 1}"] = (
                    f"{_quote(o.sheet)}${_col(a.c1)}${a.r1}:"
                    f"${_col(a.c1 + width - 1)}${a.r1 + len(rows) - 1}")
        else:
            writes.append(CellWrite(o.sheet, o.ref, _cache_value(value), own_formula=own))
            if _is_error(value):
                errors.append((where, value))
    return writes, names, spilled, errors


def _clear_stale(pkg, book, writes, outcomes):
    """Empty the cells of earlier spills that the new results no longer cover."""
    covered = set()
    for w in writes:
        covered.add((w.sheet, w.ref))
    out = []
    seen = set()
    for _name, text in defined_names(pkg, SPILL_NAME_PREFIX).items():
        for sheet, r, c in _spill_cells(text, book):
            ref = f"{_col(c)}{r}"
            if (sheet, ref) in covered or (sheet, ref) in seen:
                continue
            seen.add((sheet, ref))
            value = book.cells.get(sheet, {}).get((r, c))
            if value is None or isinstance(value, _refs.Formula):
                continue
            out.append(CellWrite(sheet, ref, None, constant=True))
    return out


def workbook_paths(paths: Iterable) -> list[Path]:
    """Expand folders into the workbooks they hold (not recursive)."""
    out = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            out.extend(sorted(x for x in p.iterdir() if x.suffix.lower() in SUFFIXES
                              and not x.name.startswith((".", "~$")) and "_filled" not in x.stem))
        else:
            out.append(p)
    if not out:
        raise WorkbookError("no .xlsx or .xlsm workbooks to fill")
    return out


def fill_many(paths, out=None, *, in_place=False, use_cache=True, progress=False):
    """Fill several workbooks (or folders); a failed file is reported, the rest go on.
    Returns (reports, failures) with failures as (path, message)."""
    files = workbook_paths(paths)
    if out is not None and len(files) > 1:
        Path(out).mkdir(parents=True, exist_ok=True)
    reports, failures = [], []
    iterator = files
    if progress:
        try:
            from tqdm import tqdm
            iterator = tqdm(files, unit="book", desc="fill", leave=False)
        except ImportError:  # pragma: no cover - tqdm is a dependency
            pass
    for f in iterator:
        try:
            reports.append(fill_workbook(f, out, in_place=in_place, use_cache=use_cache))
        except WorkbookError as exc:
            failures.append((str(f), str(exc)))
    return reports, failures


__all__ = ["fill_workbook", "fill_many", "FillReport", "workbook_paths", "output_path"]


def report_json(reports, failures) -> str:
    return json.dumps({"filled": [r.to_dict() for r in reports],
                       "failed": [{"file": f, "error": e} for f, e in failures]})
