"""Shared pieces of the fault-injection suite: a small book with every kind of
cell, its reference fill (no cache), and small tmpfs mounts (root only)."""
from __future__ import annotations

import contextlib
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import openpyxl
import pytest

from sheetfuncs.fill import fill_workbook

ROOT = Path(__file__).resolve().parents[2]


def build_book(path: Path) -> Path:
    """Text, numbers, a native formula over ours, scalar SF cells and a spilled table."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Loop"
    ws["A1"], ws["B1"] = "plant", "3/((s+1)(s+3))"
    ws["A2"], ws["B2"] = "f(t)", "=SF_INVERSE(B1)"
    ws["A3"], ws["B3"] = "final", '=SF_FIGURE(B1,"final value")'
    ws["A4"], ws["B4"] = "twice", "=B3*2"
    ws["A5"], ws["B5"] = "note", 12.5
    ws["D1"] = "=SF_POLES(B1)"
    ws["T1"] = "kept text"                  # right of the 10-column poles table
    wb.create_sheet("Other")["A1"] = "untouched"
    wb.save(path)
    return path


def values(path) -> dict:
    wb = openpyxl.load_workbook(path, data_only=True)
    return {(ws.title, pos): c.value for ws in wb.worksheets for pos, c in ws._cells.items()}


@pytest.fixture(scope="session")
def reference(tmp_path_factory):
    """(source, values of the fill without any cache)."""
    d = tmp_path_factory.mktemp("ref")
    src = build_book(d / "ref.xlsx")
    report = fill_workbook(src, d / "ref_out.xlsx", use_cache=False)
    assert report.errors == 0, report.error_cells
    return src, values(d / "ref_out.xlsx")


def in_ci() -> bool:
    return os.environ.get("CI", "").lower() == "true"


@contextlib.contextmanager
def tmpfs(size: str):
    """A fresh tmpfs of ``size`` (root only); skips (fails in CI) where not permitted."""
    where = tempfile.mkdtemp(prefix="sf-tmpfs-")
    why = None
    if os.geteuid() != 0:
        why = "needs root to mount a small tmpfs"
    elif shutil.which("mount") is None:
        why = "no mount command"
    else:
        r = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", where],
                           capture_output=True, text=True)
        if r.returncode:
            why = f"mount -t tmpfs not permitted here ({r.stderr.strip()})"
    if why:
        os.rmdir(where)
        if in_ci():
            pytest.fail(why)
        pytest.skip(why)
    try:
        yield Path(where)
    finally:
        subprocess.run(["umount", "-l", where], capture_output=True)
        with contextlib.suppress(OSError):
            os.rmdir(where)


def remount_ro(where: Path) -> None:
    subprocess.run(["mount", "-o", "remount,ro", str(where)], check=True, capture_output=True)


def run_cli(*args, env=None, timeout=120, **kw):
    e = dict(os.environ, PYTHONPATH=str(ROOT))
    e.update(env or {})
    return subprocess.run([sys.executable, "-m", "sheetfuncs.cli", *map(str, args)], env=e,
                          capture_output=True, text=True, timeout=timeout, **kw)
