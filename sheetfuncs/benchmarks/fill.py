"""Benchmark of the headless fill: a workbook of 200 of our formula cells plus
five 1,000-row sampled columns, filled cold (empty result cache) and again
with unchanged inputs (warm, from the persistent cache).

    python -m sheetfuncs.benchmarks.fill [--rows 1000] [--cells 200]
    python -m sheetfuncs.benchmarks.fill --faults [--rows 1000000]   # zip bomb, locked cache, N SF rows
    python -m sheetfuncs.benchmarks.fill --natives FILLED.xlsx ...    # native-formula engines compared

Targets: cold under 5 s, warm under 1 s.  Figures go in docs/benchmarks.md.
"""
from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

MODELS = [
    "4/(s^2+1.2s+4)", "1/(s+1)^3", "(s+3)/(s^2+2s+5)", "exp(-0.8s)/(2.5s+1)",
    "10/(s^3+4s^2+6s+4)", "(0.5s+1)/((s+1)(0.2s+1)(s^2+0.6s+1))", "1/(s^2+0.4s+0.04)",
    "2.4 exp(-35 s)/((180s+1)(40s+1))", "(s^2+1)/((s+2)^2 (s^2+s+3))", "5/(s^3+3.2s^2+4.1s+5)",
]
SCALAR = ['=SF_INVERSE("{m}")', '=SF_FIGURE("{m}","overshoot")', '=SF_FIGURE("{m}","settling time")',
          '=SF_FIGURE("{m}","rise time")', '=SF_STABILITY("{m}")', '=SF_SELFCHECK("{m}")',
          '=SF_FIGURE("{m}","final value")', '=SF_SHEETFORMULA("{m}","A2")',
          '=SF_INVERSE("{m}",,"latex")', '=SF_FIGURE("{m}","peak time")']


def build(path: Path, cells: int = 200, rows: int = 1000) -> Path:
    import openpyxl
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Cells"
    k = 0
    for i in range(cells):
        m = MODELS[i % len(MODELS)]
        ws.cell(i + 1, 1, SCALAR[(i // len(MODELS)) % len(SCALAR)].format(m=m))
        k += 1
    data = wb.create_sheet("Samples")
    data.cell(1, 1, "t")
    for r in range(rows):
        data.cell(r + 2, 1, r * 0.02)
    for j in range(5):
        m = MODELS[j]
        data.cell(1, j + 2, m)
        col = openpyxl.utils.get_column_letter(j + 2)
        for r in range(rows):
            data.cell(r + 2, j + 2, f'=SF_RESPONSE({col}$1,$A{r + 2},"step")')
    wb.save(path)
    return path


_CT = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Types xmlns="http://schemas.openxmlformats.org/'
       'package/2006/content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-'
       'package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/><Override '
       'PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.'
       'sheet.main+xml"/><Override PartName="/xl/worksheets/sheet1.xml" ContentType="application/vnd.'
       'openxmlformats-officedocument.spreadsheetml.worksheet+xml"/></Types>')
_RELS = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.'
         'openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.'
         'openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/>'
         '</Relationships>')
_WB = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<workbook xmlns="http://schemas.openxmlformats.'
       'org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/'
       'relationships"><sheets><sheet name="Rows" sheetId="1" r:id="rId1"/></sheets></workbook>')
_WB_RELS = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.'
            'openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.'
            'openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/>'
            '</Relationships>')


def build_rows(path: Path, rows: int, model: str = "4/(s^2+1.2s+4)") -> Path:
    """A one-sheet book written directly as XML: C1 the model, column A times,
    column B ``=SF_RESPONSE($C$1,A{r},"step")`` on ``rows`` rows (fast to build at 10^6 rows)."""
    import zipfile
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("[Content_Types].xml", _CT)
        z.writestr("_rels/.rels", _RELS)
        z.writestr("xl/workbook.xml", _WB)
        z.writestr("xl/_rels/workbook.xml.rels", _WB_RELS)
        with z.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as fh:
            fh.write(b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet xmlns="http://'
                     b'schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>')
            fh.write(f'<row r="1"><c r="C1" t="inlineStr"><is><t>{model}</t></is></c></row>'.encode())
            chunk = []
            for r in range(2, rows + 2):
                chunk.append(f'<row r="{r}"><c r="A{r}"><v>{(r - 2) * 0.01!r}</v></c><c r="B{r}"><f>'
                             f'SF_RESPONSE($C$1,A{r},"step")</f></c></row>')
                if len(chunk) >= 10000:
                    fh.write("".join(chunk).encode())
                    chunk = []
            fh.write("".join(chunk).encode())
            fh.write(b"</sheetData></worksheet>")
    return path


def build_bomb(path: Path, inflated: int = 500 << 20) -> Path:
    """A small book whose sheet part inflates to ``inflated`` bytes of empty rows."""
    import zipfile
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as z:
        z.writestr("[Content_Types].xml", _CT)
        z.writestr("_rels/.rels", _RELS)
        z.writestr("xl/workbook.xml", _WB)
        z.writestr("xl/_rels/workbook.xml.rels", _WB_RELS)
        with z.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as fh:
            head = (b'<?xml version="1.0" encoding="UTF-8"?>\n<worksheet xmlns="http://schemas.openxmlformats.'
                    b'org/spreadsheetml/2006/main"><sheetData>')
            tail = b"</sheetData></worksheet>"
            fh.write(head)
            cell = b'<row><c><v>1</v></c></row>'
            block = cell * (1 << 15)
            left = inflated - len(head) - len(tail)
            while left > len(block):
                fh.write(block)
                left -= len(block)
            fh.write(cell * (left // len(cell)))
            fh.write(tail)
    return path


_MEASURE = r"""
import json, resource, sys, time, os
from sheetfuncs.fill import fill_workbook
from sheetfuncs.errors import WorkbookError
t0 = time.perf_counter()
try:
    r = fill_workbook(sys.argv[1], sys.argv[2], use_cache=sys.argv[3] == "cache")
    what = {"cells": r.cells, "errors": r.errors, "warnings": list(r.warnings)}
except WorkbookError as e:
    what = {"refused": str(e)}
what["seconds"] = time.perf_counter() - t0
what["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps(what))
"""


def measure(book: Path, out: Path, cache: str = "nocache", env=None, limit_mb=None) -> dict:
    """Fill ``book`` in a fresh process; its time and peak memory (max RSS)."""
    import json
    import subprocess
    import sys
    e = dict(os.environ, **(env or {}))
    e["PYTHONPATH"] = str(Path(__file__).resolve().parents[2])
    pre = None
    if limit_mb:
        import resource

        def pre():
            resource.setrlimit(resource.RLIMIT_AS, (limit_mb << 20, limit_mb << 20))
    r = subprocess.run([sys.executable, "-c", _MEASURE, str(book), str(out), cache], env=e,
                       capture_output=True, text=True, preexec_fn=pre)
    if r.returncode:
        return {"failed": r.stderr.strip().splitlines()[-1:] or ["?"]}
    return json.loads(r.stdout)


def faults(rows: int) -> int:
    """Figures of docs/benchmarks.md "fill under faults"."""
    import sqlite3
    import subprocess
    import sys
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        bomb = build_bomb(tmp / "bomb.xlsx")
        m = measure(bomb, tmp / "bomb_out.xlsx")
        print(f"zip bomb ({bomb.stat().st_size / 1e6:.2f} MB -> 500 MB sheet): {m.get('refused', m)}")
        print(f"  refused in {m.get('seconds', 0):.3f} s, peak {m.get('peak_mb', 0):.0f} MB")
        small = build(tmp / "small.xlsx", cells=40, rows=50)
        cache_dir = tmp / "cache"
        cache_dir.mkdir()
        env = {"SHEETFUNCS_CACHE_DIR": str(cache_dir), "SHEETFUNCS_CACHE": "on"}
        measure(small, tmp / "warmup.xlsx", "cache", env)
        free = measure(small, tmp / "free.xlsx", "cache", env)
        cold = measure(small, tmp / "cold.xlsx", "nocache", env)
        db = cache_dir / "results.sqlite3"
        holder = subprocess.Popen([sys.executable, "-c",
                                   "import sqlite3,sys,time\n"
                                   "c=sqlite3.connect(sys.argv[1],isolation_level=None)\n"
                                   "c.execute('PRAGMA locking_mode=EXCLUSIVE')\n"
                                   "c.execute('BEGIN IMMEDIATE');c.execute(\"INSERT OR REPLACE INTO results "
                                   "VALUES('h','1')\");c.execute('COMMIT')\n"
                                   "print('held',flush=True);time.sleep(120)", str(db)],
                                  stdout=subprocess.PIPE, text=True)
        try:
            holder.stdout.readline()
            locked = measure(small, tmp / "locked.xlsx", "cache", env)
        finally:
            holder.kill()
            holder.wait()
        del sqlite3
        print(f"cache held in EXCLUSIVE locking mode by another process ({free.get('cells')} cells):")
        print(f"  warm free cache {free.get('seconds', 0):.2f} s; no cache {cold.get('seconds', 0):.2f} s; "
              f"locked {locked.get('seconds', 0):.2f} s, {locked.get('errors')} errors, "
              f"warning: {locked.get('warnings')}")
        big = build_rows(tmp / "rows.xlsx", rows)
        m = measure(big, tmp / "rows_out.xlsx")
        print(f"{rows:,} SF_RESPONSE rows ({big.stat().st_size / 1e6:.1f} MB book): "
              f"{m.get('seconds', 0):.1f} s, peak {m.get('peak_mb', 0):.0f} MB, {m.get('errors', m)} errors")
    return 0


# ---------------------------------------------------------------- native formula engines
def _native_cells(path):
    import openpyxl
    wb = openpyxl.load_workbook(path)
    vals = openpyxl.load_workbook(path, data_only=True)
    nat, ours = {}, {}
    for ws in wb.worksheets:
        for c in ws._cells.values():
            t = getattr(c.value, "text", c.value)
            if isinstance(t, str) and t.startswith("="):
                (ours if "SF_" in t.upper() else nat)[(ws.title, c.coordinate)] = (
                    t, vals[ws.title][c.coordinate].value)
    return nat, ours


def _ours_natives(path):
    from ..workbook import plan, refs
    t0 = time.perf_counter()
    book = refs.open_book(path)
    run = plan._Run(book, plan._collect(book, "SF_"), {})
    out = {}
    for sheet in book.sheets:
        for pos, cell in book.cells[sheet].items():
            if type(cell) is refs.Formula:
                key = (sheet, f"{refs.column_letters(pos[1])}{pos[0]}")
                try:
                    run.job_memo = {}
                    out[key] = run._native((sheet, pos[0], pos[1]))
                except Exception as e:  # noqa: BLE001 - counted as not computed
                    out[key] = e
    return out, time.perf_counter() - t0


def _formulas_natives(path):
    import re

    import formulas
    t0 = time.perf_counter()
    sol = formulas.ExcelModel().loads(str(path)).finish().calculate()
    out = {}
    for k, v in sol.items():
        m = re.match(r"'\[(.*)\](.*)'!([A-Z]+[0-9]+)$", k)
        if m:
            out[(m.group(2).upper(), m.group(3))] = v.value[0, 0] if hasattr(v, "value") else v
    return out, time.perf_counter() - t0


def _pycel_natives(path, cells):
    from pycel import ExcelCompiler
    t0 = time.perf_counter()
    xl = ExcelCompiler(filename=str(path))
    out = {}
    for s, ref in cells:
        try:
            out[(s, ref)] = xl.evaluate(f"{s}!{ref}")
        except Exception as e:  # noqa: BLE001 - counted as not computed
            out[(s, ref)] = e
    return out, time.perf_counter() - t0


def natives(paths) -> int:
    """Coverage and speed of native-formula engines (ours, and the PyPI packages ``formulas``
    and ``pycel`` where installed) on filled books whose SF cells are first replaced by their
    cached values, so that only native formulas are computed."""
    import math
    import warnings

    import openpyxl
    warnings.simplefilter("ignore")

    def good(v):
        return (isinstance(v, (int, float, str, bool)) and not (isinstance(v, str) and v.startswith("#"))
                and not (isinstance(v, float) and not math.isfinite(v)))

    with tempfile.TemporaryDirectory() as tmp:
        for orig in paths:
            nat, ours = _native_cells(orig)
            wb = openpyxl.load_workbook(orig)
            for (sheet, ref), (_t, v) in ours.items():
                wb[sheet][ref].value = v
            path = Path(tmp) / Path(orig).name
            wb.save(path)
            line = [f"{Path(orig).name} ({len(nat)} native cells):"]
            for name, fn in (("ours", lambda: _ours_natives(path)),
                             ("formulas", lambda: _formulas_natives(path)),
                             ("pycel", lambda: _pycel_natives(path, list(nat)))):
                try:
                    out, secs = fn()
                except ImportError:
                    line.append(f"{name}: not installed")
                    continue
                except Exception as e:  # noqa: BLE001 - an engine that cannot read the book
                    line.append(f"{name}: fails ({type(e).__name__}: {str(e)[:60]})")
                    continue
                if name == "formulas":
                    out = {(s, r): out.get((s.upper(), r)) for s, r in nat}
                done = sum(1 for k in nat if good(out.get(k)))
                line.append(f"{name}: {done}/{len(nat)} in {secs:.2f} s")
            print("  ".join(line))
    return 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m sheetfuncs.benchmarks.fill")
    ap.add_argument("--cells", type=int, default=200)
    ap.add_argument("--rows", type=int, default=1000)
    ap.add_argument("--faults", action="store_true",
                    help="figures under faults: zip bomb, locked cache, --rows SF rows (try 1000000)")
    ap.add_argument("--natives", nargs="+", metavar="BOOK",
                    help="native-formula coverage and speed: ours, formulas, pycel (filled books)")
    args = ap.parse_args(argv)
    if args.faults:
        return faults(args.rows)
    if args.natives:
        return natives(args.natives)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        os.environ["SHEETFUNCS_CACHE_DIR"] = str(tmp / "cache")   # empty persistent cache
        from ..fill import fill_workbook
        from ..engine.cache import ResultStore
        book = build(tmp / "bench.xlsx", args.cells, args.rows)
        store = ResultStore(tmp / "cache" / "results.sqlite3")
        t0 = time.perf_counter()
        cold = fill_workbook(book, tmp / "cold.xlsx", store=store)
        t_cold = time.perf_counter() - t0
        t0 = time.perf_counter()
        warm = fill_workbook(book, tmp / "warm.xlsx", store=store)
        t_warm = time.perf_counter() - t0
        n = args.cells + 5 * args.rows
        print(f"workbook: {args.cells} formula cells + 5 sampled columns x {args.rows} rows = {n} cells")
        print(f"cold fill (empty result cache): {t_cold:6.2f} s   ({cold.errors} errors)   target < 5 s")
        print(f"warm fill (unchanged inputs)  : {t_warm:6.2f} s   ({warm.cache_hits} cache hits)   target < 1 s")
        print(f"ratio cold/warm: {t_cold / t_warm:.1f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
