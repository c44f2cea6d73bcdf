"""Benchmark: live recalculation in LibreOffice with the extension (``python -m sheetfuncs.calcext.bench``).

Installs the extension into a fresh profile, fills every template, opens each in a headless
LibreOffice and measures: the worker's start (its first line after the process start, from the
extension's log), the first full recalculation of the book, and the recalculation after editing
one input (``calculate()``: only the cells that depend on it), for ``--repeat`` edits that
alternate between two values (the first edit with a value is computed cold; its repeats are
answered from the worker's memory).  Prints a table and JSON.  No assertions: figures go in
docs/benchmarks.md.
"""
from __future__ import annotations

import argparse
import json
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

EDITS = {   # template -> (input name in column A of Calculation, two values)
    "rlc_step_response": ("R", (30.0, 20.0)),
    "mount_release": ("damp", (900.0, 600.0)),
    "dead_time_process": ("tau1 [s]", (120.0, 90.0)),
    "slab_heating": ("thick", (0.05, 0.04)),
}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=4, help="edits per book (default 4)")
    ap.add_argument("--workbooks", default=str(Path(__file__).resolve().parents[2] / "workbooks"))
    args = ap.parse_args(argv)
    from ..fill import fill_workbook
    from . import install
    from .session import OfficeSession

    python = install.office_python()
    if python is None:
        print("error: LibreOffice's Python with pyuno not found", file=sys.stderr)
        return 2
    tmp = Path(tempfile.mkdtemp(prefix="sf-lo-bench-"))
    try:
        t0 = time.perf_counter()
        install.install(tmp / "profile")
        results = {"install_s": time.perf_counter() - t0, "books": {}}
        log = tmp / "calc.log"
        office = OfficeSession(tmp / "profile", python=python, soffice=str(install.program_dir() / "soffice"),
                               log=log)
        try:
            for book, (name, values) in EDITS.items():
                src = Path(args.workbooks) / f"{book}.xlsx"
                filled = tmp / src.name
                fill_workbook(src, filled)
                t0 = time.perf_counter()
                office.ask("open", path=str(filled))
                full = office.ask("calc", full=True)["seconds"]
                opened = time.perf_counter() - t0
                cells = office.ask("cells")
                sf = sum(1 for c in cells if "SF_" in c.get("local", "").upper())
                row = next(c["row"] for c in cells
                           if c["sheet"] == "Calculation" and c["col"] == 0 and c["string"] == name)
                times = []
                for k in range(args.repeat):
                    office.ask("set", sheet="Calculation", row=row, col=1, value=values[k % 2])
                    times.append(office.ask("calc")["seconds"])
                office.ask("close")
                results["books"][book] = {"sf_cells": sf, "open_and_full_recalc_s": opened, "full_recalc_s": full,
                                          "edit": name, "first_edit_s": times[0],
                                          "repeat_edits_median_s": statistics.median(times[2:]) if len(times) > 2
                                          else None}
        finally:
            office.close()
        text = log.read_text() if log.is_file() else ""
        results["worker_start_s"] = [float(l.split()[3]) for l in text.splitlines() if "worker ready" in l]
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print(f"{'book':20} {'SF cells':>8} {'open+full s':>11} {'1st edit s':>10} {'repeat edit s':>13}")
    for book, r in results["books"].items():
        rep = r["repeat_edits_median_s"]
        print(f"{book:20} {r['sf_cells']:8d} {r['open_and_full_recalc_s']:11.3f} {r['first_edit_s']:10.3f} "
              f"{rep if rep is None else format(rep, '13.3f')}")
    print(f"worker start: {results['worker_start_s']} s; install: {results['install_s']:.1f} s")
    print(json.dumps(results))
    return 0


if __name__ == "__main__":
    sys.exit(main())
