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

import errno
import gc
import json
import os
import re
import shutil
import stat
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Mapping

from . import cellfuncs
from .engine import cache
from .errors import WorkbookError
from .workbook import plan as _plan
from .workbook import refs as _refs
from .workbook.package import TEMP_PREFIX, CellWrite, defined_names, read_package, write_results

try:
    import fcntl
except ImportError:  # pragma: no cover - Windows: in-place fills are not serialised
    fcntl = None

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
    error_cells: tuple = field(default=())      # (sheet!ref, message), first few in full
    error_names: tuple = field(default=())      # sheet!ref of every cell with an error
    warnings: tuple = field(default=())         # cache and file notes (the fill went on)
    #: (sheet!ref, reason) of native formulas whose value fill did not compute or cache
    natives_not_computed: tuple = field(default=())
    #: in place: True when ``backup`` is an earlier run's backup, kept (never replaced)
    backup_kept: bool = False

    @property
    def status(self) -> int:
        """0: every cell of ours filled; 1: written, but some cells hold errors."""
        return 1 if self.errors else 0

    def to_dict(self) -> dict:
        return {"source": self.source, "output": self.output, "cells": self.cells,
                "errors": self.errors, "spilled": self.spilled, "cleared": self.cleared,
                "cache_hits": self.cache_hits, "seconds": round(self.seconds, 3),
                "backup": self.backup,
                "error_cells": [{"cell": c, "error": e} for c, e in self.error_cells],
                "error_names": list(self.error_names), "warnings": list(self.warnings),
                "natives_not_computed": [{"cell": c, "why": w} for c, w in self.natives_not_computed],
                "backup_kept": self.backup_kept}


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
        plain = getattr(fn, "plain", None)      # our @cell functions: errors handled here
        if plain is not None:
            def fn(*args, _plain=plain):
                try:
                    return _plain(*args)
                except cellfuncs._Empty:
                    return ""
                except Exception as exc:  # noqa: BLE001 - a cell shows every failure as text
                    return cell_error_text(exc)

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
                if isinstance(hit, dict) and "v" in hit:
                    self.hits += 1
                    return hit["v"]
            value = fn(*args)
            if key is not None and not _is_error(value):
                self.pending[key] = value
            return value
        return call

    def flush(self):
        if self.store is not None and self.pending:
            self.store.put_many({k: {"v": v} for k, v in self.pending.items()})   # never raises
        self.pending = {}


#: longest text a cell holds (Excel's limit); longer results and messages are cut or refused
MAX_CELL_TEXT = 32767
_ARITHMETIC = (OverflowError, ZeroDivisionError, FloatingPointError)


def cell_error_text(exc: BaseException) -> str:
    """The cell's error text for ``exc``: arithmetic trouble is an ordinary error,
    and no text is longer than a cell holds."""
    if isinstance(exc, _ARITHMETIC):
        text = (f"{cellfuncs.ERROR_MARK} a number in the calculation is beyond the range of "
                f"floating point ({type(exc).__name__}: {exc}); rescale the expression")
    elif isinstance(exc, RecursionError):
        text = f"{cellfuncs.ERROR_MARK} the formula or expression is nested too deeply"
    elif isinstance(exc, MemoryError):
        text = f"{cellfuncs.ERROR_MARK} not enough memory for this cell"
    else:
        text = cellfuncs.error_text(exc)
    return cap_text(text)


def cap_text(text: str) -> str:
    """``text`` cut to the cell limit with a note of how much was left out."""
    if len(text) <= MAX_CELL_TEXT:
        return text
    keep = MAX_CELL_TEXT - 60
    return text[:keep] + f" ... ({len(text) - keep:,} more characters not shown)"


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
    """Where the filled book goes.  ``out`` naming a folder (existing, or written
    with a trailing slash) means a file of the same name in it."""
    if in_place:
        return src
    if out is None:
        return src.with_name(f"{src.stem}_filled{src.suffix}")
    text = os.fspath(out)
    out = Path(out)
    if out.is_dir() or text.endswith(("/", os.sep)):
        return out / src.name
    return out


def _regular_file(path: Path, what: str) -> os.stat_result:
    """stat of ``path`` (symlinks followed); WorkbookError unless it is a regular file."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise WorkbookError("file not found", file=str(path)) from None
    except OSError as e:
        raise WorkbookError(f"cannot read the file ({e.strerror or e})", file=str(path)) from None
    if stat.S_ISDIR(st.st_mode):
        raise WorkbookError("is a folder, not a workbook file", file=str(path))
    if not stat.S_ISREG(st.st_mode):
        kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(st.st_mode) else
                "a device" if stat.S_ISCHR(st.st_mode) or stat.S_ISBLK(st.st_mode) else
                "a socket" if stat.S_ISSOCK(st.st_mode) else "not a regular file")
        raise WorkbookError(f"is {kind}, not a regular file; {what} only regular files", file=str(path))
    return st


def fill_workbook(src, dst=None, *, in_place: bool = False, functions: Mapping | None = None,
                  use_cache: bool = True, store: cache.ResultStore | None = None) -> FillReport:
    """Fill one workbook; returns what was done.  Raises WorkbookError (nothing written).

    ``in_place``: the file a symlink points to is filled (owner, group and mode
    kept); the first backup ``NAME.bak`` is kept for ever (an existing one is never
    replaced); concurrent in-place fills of one file run one after the other.
    Cache problems never stop a fill: they end as ``FillReport.warnings``.
    """
    t0 = time.perf_counter()
    src = Path(src)
    if src.suffix.lower() not in SUFFIXES:
        raise WorkbookError("not an .xlsx or .xlsm workbook", file=str(src))
    notes: list[str] = []
    if store is None and use_cache and cache.enabled():
        store = cache.ResultStore(warn=notes.append)
    elif store is not None and not use_cache:
        store = None
    if store is None:
        return _fill_one(src, dst, in_place, functions, None, notes, t0)
    before = store.warn

    def relay(message):                 # the report lists the store's warnings too
        notes.append(message)
        if before is not None and before is not notes.append:
            before(message)
    store.warn = relay
    try:
        return _fill_one(src, dst, in_place, functions, store, notes, t0)
    finally:
        store.warn = before


def _fill_one(src, dst, in_place, functions, store, notes, t0) -> FillReport:
    if in_place:
        return _fill_in_place(src, functions, store, notes, t0)
    _regular_file(src, "fill reads")
    dst_path = output_path(src, dst, in_place)
    if dst_path.suffix.lower() not in SUFFIXES:
        raise WorkbookError("the output must end in .xlsx or .xlsm", file=str(dst_path))
    if dst_path.is_symlink() or dst_path.exists():
        dst_path = Path(os.path.realpath(dst_path))
        _regular_file(dst_path, "fill replaces")
    if _same_file(dst_path, src):
        raise WorkbookError("the output would overwrite the input; use --in-place (keeps a backup)",
                            file=str(src))
    if not dst_path.parent.is_dir():
        try:
            dst_path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as e:
            raise WorkbookError(f"cannot create the output folder ({e.strerror or e})",
                                file=str(dst_path.parent)) from None
    pkg = read_package(src)                       # refuses corrupt / encrypted files early
    _remove_stale_temps(dst_path)
    report = _fill_package(pkg, src, dst_path, functions, store, notes, t0)
    return report


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return a.resolve() == b.resolve()


#: measured peak memory of a fill per stored cell (openpyxl's cells, our snapshot, results):
#: about 2.1 kB on the 10^4..10^6-row books of ``sheetfuncs.benchmarks.fill --faults``; with a margin
BYTES_PER_CELL = 2500


def max_cells() -> int:
    """Most stored cells fill reads: ``SHEETFUNCS_FILL_MAX_CELLS``, else what 70 % of
    the memory available now holds at ``BYTES_PER_CELL`` (at least 200,000)."""
    text = os.environ.get("SHEETFUNCS_FILL_MAX_CELLS", "").strip()
    if text:
        try:
            return max(int(float(text)), 1)
        except ValueError:
            pass
    avail = _available_memory()
    if avail is None:
        return 4_000_000
    return max(int(avail * 0.7 / BYTES_PER_CELL), 200_000)


def _available_memory() -> int | None:
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


def _check_cells(pkg, file: str) -> None:
    limit = max_cells()
    n = pkg.count_cells(stop=limit)
    if n > limit:
        raise WorkbookError(f"the workbook holds more than {limit:,} cells; reading it would need "
                            f"about {n * BYTES_PER_CELL / 1e9:.1f} GB or more of memory; refused "
                            "(nothing written; SHEETFUNCS_FILL_MAX_CELLS sets the limit)", file=file)


def _fill_package(pkg, src: Path, dst_path: Path, functions, store, notes, t0, *,
                  backup: str | None = None, before_write=None) -> FillReport:
    _check_cells(pkg, str(src))
    book = _refs.open_book(dst_path if backup == "in place" else src)
    names = defined_name_values(book)
    funcs = _CachedFunctions(functions or cellfuncs.FUNCTIONS, store, names)
    natives: dict = {}
    not_computed: dict = {}
    with cellfuncs.name_values(names):
        outcomes = _plan.evaluate(book, funcs.mapping(), prefix=cellfuncs.PREFIX,
                                  error_text=cell_error_text, strict=False, natives=natives,
                                  not_computed=not_computed)
    funcs.flush()
    writes, spill_names, spilled, errors = _writes(outcomes, book)
    taken = {(w.sheet, w.ref) for w in writes}
    # native formulas get their values cached too, so data-only readers see them
    writes += [CellWrite(sh, ref, v) for (sh, ref), v in natives.items()
               if (sh, ref) not in taken and _storable(v)]
    cleared = _clear_stale(pkg, book, writes, outcomes)
    n_cells, hits = len(outcomes), funcs.hits
    # the snapshot of every cell is not needed for writing: free it before the sheet XML is
    # parsed, so the peak is the larger of the two phases, not their sum
    del book, outcomes, natives, funcs, taken
    gc.collect()
    if before_write is not None:
        backup = before_write()
    writes += cleared
    write_results(pkg, dst_path, writes, names=spill_names, names_prefix=SPILL_NAME_PREFIX)
    return FillReport(str(src), str(dst_path), n_cells, len(errors), spilled, len(cleared),
                      hits, time.perf_counter() - t0, backup, tuple(errors[:ERRORS_IN_FULL]),
                      tuple(w for w, _ in errors), tuple(dict.fromkeys(notes)),
                      tuple((f"{_quote(sh)}{ref}", why) for (sh, ref), why in sorted(not_computed.items())))


def _storable(v) -> bool:
    return not (isinstance(v, str) and (len(v) > MAX_CELL_TEXT or _BAD_CHARS.search(v)))


ERRORS_IN_FULL = 5              # error texts a report keeps in full; the rest by cell only
_BAD_CHARS = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


# ------------------------------------------------------------------ in place
def _fill_in_place(src: Path, functions, store, notes, t0) -> FillReport:
    target = Path(os.path.realpath(src))          # through symlinks: fill what they point to
    with _inplace_lock(target) as st:
        _remove_stale_temps(target)
        pkg = read_package(target)
        bak = target.with_name(target.name + ".bak")
        kept = []

        def make_backup():
            if bak.is_symlink() or bak.exists():
                kept.append(True)                 # the first backup is kept, never replaced
                return str(bak)
            _atomic_copy(target, bak, st)
            return str(bak)

        report = _fill_package(pkg, src, target, functions, store, notes, t0, backup="in place",
                               before_write=make_backup)
        _restore_owner(target, st)
    if kept:
        from dataclasses import replace
        report = replace(report, backup_kept=True)
    if st.st_nlink > 1:
        report = _with_note(report, f"{target} had {st.st_nlink} hard links; the filled file is a new "
                                    "file, the other links still show the old content")
    return report


def _with_note(report: FillReport, note: str) -> FillReport:
    from dataclasses import replace
    return replace(report, warnings=report.warnings + (note,))


class _inplace_lock:
    """An exclusive lock on the workbook itself (flock), re-taken if another fill
    replaced the file while we waited.  No lock file is left behind."""

    def __init__(self, target: Path):
        self.target = target
        self.fd = None

    def __enter__(self) -> os.stat_result:
        for _ in range(1000):
            _regular_file(self.target, "--in-place fills")
            try:
                fd = os.open(self.target, os.O_RDONLY)
            except OSError as e:
                raise WorkbookError(f"cannot open the file ({e.strerror or e})", file=str(self.target)) from None
            try:
                if fcntl is not None:
                    fcntl.flock(fd, fcntl.LOCK_EX)
                st = os.fstat(fd)
                now = os.stat(self.target)
            except OSError:
                os.close(fd)
                continue
            if (st.st_dev, st.st_ino) == (now.st_dev, now.st_ino):
                if fcntl is None:           # no flock (Windows): an open file could not be replaced
                    os.close(fd)
                else:
                    self.fd = fd
                return st
            os.close(fd)                      # replaced while we waited: lock the new file
        raise WorkbookError("the file keeps being replaced by another program", file=str(self.target))

    def __exit__(self, *exc):
        if self.fd is not None:
            os.close(self.fd)                 # closing releases the lock
            self.fd = None
        return False


def _atomic_copy(src: Path, dst: Path, st: os.stat_result) -> None:
    """Copy ``src`` to ``dst`` through a temp file; never replaces an existing ``dst``."""
    tmp = _temp_name(dst)
    try:
        with open(src, "rb") as fi, open(tmp, "xb") as fo:
            shutil.copyfileobj(fi, fo, 1 << 20)
            fo.flush()
            os.fsync(fo.fileno())
        shutil.copystat(src, tmp)
        _restore_owner(Path(tmp), st)
        try:
            os.link(tmp, dst)                     # fails if dst appeared meanwhile: kept
        except FileExistsError:
            raise
        except OSError as e:                      # no hard links here (FAT, some network shares)
            if e.errno not in _NO_LINKS or dst.exists() or dst.is_symlink():
                raise
            os.replace(tmp, dst)
    except FileExistsError:
        pass
    except OSError as e:
        raise WorkbookError(f"cannot write the backup {dst.name} ({e.strerror or e}); "
                            "the workbook was not changed", file=str(src)) from None
    finally:
        _unlink(tmp)


_NO_LINKS = {getattr(errno, n) for n in ("EPERM", "ENOTSUP", "EOPNOTSUPP", "ENOSYS", "EMLINK", "EXDEV")
             if hasattr(errno, n)}


def _restore_owner(path: Path, st: os.stat_result) -> None:
    try:
        now = os.stat(path)
        if (now.st_uid, now.st_gid) != (st.st_uid, st.st_gid) and hasattr(os, "chown"):
            os.chown(path, st.st_uid, st.st_gid)
        if stat.S_IMODE(now.st_mode) != stat.S_IMODE(st.st_mode):
            os.chmod(path, stat.S_IMODE(st.st_mode))
    except OSError:
        pass                                      # not ours to give away: the file stays ours


def _temp_name(dst: Path) -> str:
    return str(dst.with_name(f"{TEMP_PREFIX}{dst.name[:40]}.{os.getpid()}.{os.urandom(4).hex()}.tmp"))


def _remove_stale_temps(target: Path) -> None:
    """Temp files a killed fill of this workbook left behind (its process is gone)."""
    prefixes = (f"{TEMP_PREFIX}{target.name[:40]}.", f"{TEMP_PREFIX}{(target.name + '.bak')[:40]}.")
    try:
        entries = list(os.scandir(target.parent))
    except OSError:
        return
    for e in entries:
        if not e.name.endswith(".tmp") or not e.name.startswith(prefixes):
            continue
        parts = e.name.rsplit(".", 3)
        if len(parts) == 4 and parts[1].isdigit() and _alive(int(parts[1])):
            continue
        _unlink(e.path)


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return False
    if os.name == "nt":             # os.kill(pid, 0) would terminate the process there
        return True                 # so temp files are kept (never someone else's removed)
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    return True


def _unlink(path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _fit(value):
    """A result a cell can hold: over-long or unstorable text becomes an error text."""
    if isinstance(value, list):
        return [[_fit(v) for v in row] if isinstance(row, list) else _fit(row) for row in value]
    if isinstance(value, str):
        if len(value) > MAX_CELL_TEXT:
            return (f"{cellfuncs.ERROR_MARK} the result is {len(value):,} characters long, above "
                    f"the cell limit of {MAX_CELL_TEXT:,}")
        if _BAD_CHARS.search(value):
            return f"{cellfuncs.ERROR_MARK} the result holds control characters a cell cannot store"
    return value


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
        value = _fit(o.value)
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
    Returns (reports, failures) with failures as (path, message).

    One result store serves the whole run, so a cache problem costs one warning
    (and at most one second of waiting on a lock) however many books there are.
    SIGTERM is turned into an interruption while this runs (main thread only), so
    temp files are removed as for Ctrl-C.
    """
    files = workbook_paths(paths)
    if out is not None and len(files) > 1:
        try:
            Path(out).mkdir(parents=True, exist_ok=True)
        except OSError as e:
            raise WorkbookError(f"cannot create the output folder ({e.strerror or e})", file=str(out)) from None
        out = os.path.join(os.fspath(out), "")
    store = cache.ResultStore(warn=lambda message: None) if use_cache and cache.enabled() else None
    reports, failures = [], []
    iterator = files
    if progress:
        try:
            from tqdm import tqdm
            iterator = tqdm(files, unit="book", desc="fill", leave=False)
        except ImportError:  # pragma: no cover - tqdm is a dependency
            pass
    with _terminate_as_interrupt():
        for f in iterator:
            try:
                r = fill_workbook(f, out, in_place=in_place, use_cache=use_cache, store=store)
            except WorkbookError as exc:
                failures.append((str(f), str(exc)))
                continue
            reports.append(r)
    if store is not None:
        store.close()
    return reports, failures


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived during a fill (handled like Ctrl-C: temp files removed)."""


class _terminate_as_interrupt:
    def __enter__(self):
        import signal
        import threading
        self.old = None
        if threading.current_thread() is threading.main_thread() and hasattr(signal, "SIGTERM"):
            def handler(signum, frame):
                raise Terminated("terminated")
            try:
                self.old = signal.signal(signal.SIGTERM, handler)
            except (ValueError, OSError):
                self.old = None
        return self

    def __exit__(self, *exc):
        if self.old is not None:
            import signal
            signal.signal(signal.SIGTERM, self.old)
        return False


__all__ = ["fill_workbook", "fill_many", "FillReport", "workbook_paths", "output_path"]


def report_json(reports, failures) -> str:
    return json.dumps({"filled": [r.to_dict() for r in reports],
                       "failed": [{"file": f, "error": e} for f, e in failures]})
