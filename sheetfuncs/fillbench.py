"""Benchmark of the headless fill: a workbook of 200 of our formula cells plus
five 1,000-row sampled columns, filled cold (empty result cache) and again
with unchanged inputs (warm, from the persistent cache).

    python -m sheetfuncs.fillbench [--rows 1000] [--cells 200]

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


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m sheetfuncs.fillbench")
    ap.add_argument("--cells", type=int, default=200)
    ap.add_argument("--rows", type=int, default=1000)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        os.environ["SHEETFUNCS_CACHE_DIR"] = str(tmp / "cache")   # empty persistent cache
        from .fill import fill_workbook
        from .engine.cache import ResultStore
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
