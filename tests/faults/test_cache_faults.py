"""Cache faults are never results: whatever is wrong with the result store, the
fill gives the same values as a fill without a cache, one warning, and waits
at most about one second on locks.  Real SQLite, real files, real processes."""
from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from sheetfuncs.engine import cache
from sheetfuncs.fill import fill_workbook
from tests.faults.compare import differences
from tests.faults.conftest import ROOT, build_book, remount_ro, run_cli, tmpfs, values


@pytest.fixture(autouse=True)
def cache_on(monkeypatch):
    monkeypatch.setenv("SHEETFUNCS_CACHE", "on")


def fill_with(store_path, tmp_path, reference, **store_kw):
    """Fill the fault book with the store at ``store_path``; check everything; return warnings."""
    src = build_book(tmp_path / "book.xlsx")
    before = src.read_bytes()
    notes = []
    store = cache.ResultStore(store_path, warn=notes.append, **store_kw)
    out = tmp_path / "out.xlsx"
    t0 = time.perf_counter()
    report = fill_workbook(src, out, store=store)
    seconds = time.perf_counter() - t0
    store.close()
    assert src.read_bytes() == before                       # the input is never touched
    assert report.errors == 0, report.error_cells            # a cache fault is never a result
    assert values(out) == reference[1]
    assert differences(src, out) == []
    assert list(report.warnings) == notes
    return notes, store, seconds


def populate(path: Path, n=400):
    st = cache.ResultStore(path)
    st.put_many({f"k{i}": {"v": "x" * 200} for i in range(n)})
    st.close()


def test_garbage_file_is_set_aside_and_rebuilt(tmp_path, reference):
    db = tmp_path / "c" / "results.sqlite3"
    db.parent.mkdir()
    db.write_bytes(b"this is not a database\n" * 200)
    notes, store, _ = fill_with(db, tmp_path, reference)
    assert len(notes) == 1 and "moved aside" in notes[0]
    aside = [p for p in db.parent.iterdir() if ".corrupt-" in p.name]
    assert len(aside) == 1 and aside[0].read_bytes().startswith(b"this is not")
    # the rebuilt store serves the next fill
    notes2, _, _ = fill_with(db, tmp_path, reference)
    assert notes2 == []
    assert sqlite3.connect(db).execute("SELECT count(*) FROM results").fetchone()[0] > 0


def test_truncated_database(tmp_path, reference):
    db = tmp_path / "results.sqlite3"
    populate(db)
    sqlite3.connect(db).execute("PRAGMA wal_checkpoint(TRUNCATE)").close()
    data = db.read_bytes()
    assert len(data) > 8192
    db.write_bytes(data[: len(data) // 3])
    for extra in ("-wal", "-shm"):
        Path(str(db) + extra).unlink(missing_ok=True)
    notes, _, _ = fill_with(db, tmp_path, reference)
    assert len(notes) <= 1 and all("moved aside" in n or "cache off" in n for n in notes)


def test_rows_that_do_not_decode_are_misses(tmp_path, reference):
    db = tmp_path / "results.sqlite3"
    cache.ResultStore(db).put("x", 1)
    # every key the fill could ask for holds a broken value: write them after a first run
    notes, _, _ = fill_with(db, tmp_path, reference)
    con = sqlite3.connect(db)
    n = con.execute("UPDATE results SET value = '{not json'").rowcount
    con.commit()
    con.close()
    assert n > 1
    notes, _, _ = fill_with(db, tmp_path, reference)
    assert notes == []


def test_folder_in_place_of_the_database(tmp_path, reference):
    db = tmp_path / "results.sqlite3"
    db.mkdir()
    notes, store, _ = fill_with(db, tmp_path, reference)
    assert len(notes) == 1 and "result cache off" in notes[0] and store.off


def test_folder_that_cannot_be_created(tmp_path, reference):
    (tmp_path / "file").write_text("a file, not a folder")
    notes, store, _ = fill_with(tmp_path / "file" / "sub" / "results.sqlite3", tmp_path, reference)
    assert len(notes) == 1 and "cannot use its folder" in notes[0]


def test_read_only_disk(tmp_path, reference):
    with tmpfs("1m") as where:
        db = where / "results.sqlite3"
        populate(db, 10)
        remount_ro(where)
        notes, store, _ = fill_with(db, tmp_path, reference)
        assert len(notes) == 1 and "result cache off" in notes[0]


def test_full_disk(tmp_path, reference):
    with tmpfs("64k") as where:
        db = where / "results.sqlite3"
        populate(db, 10)
        fill_disk(where)              # the fill's writes cannot land
        notes, store, _ = fill_with(db, tmp_path, reference)
        assert len(notes) == 1 and "result cache off" in notes[0]
        assert "full" in notes[0] or "disk" in notes[0] or "space" in notes[0]


def fill_disk(where: Path) -> None:
    fd = os.open(where / "filler", os.O_WRONLY | os.O_CREAT)
    try:
        while True:
            os.write(fd, b"\0" * 512)
    except OSError:
        pass
    finally:
        os.close(fd)


HOLDER = r"""
import sqlite3, sys, time
db, mode = sys.argv[1], sys.argv[2]
con = sqlite3.connect(db, isolation_level=None)
if mode == "exclusive-mode":            # SQLite's EXCLUSIVE locking mode, WAL database
    con.execute("PRAGMA locking_mode=EXCLUSIVE")
    con.execute("BEGIN IMMEDIATE"); con.execute("INSERT OR REPLACE INTO results VALUES('h','1')")
    con.execute("COMMIT")
elif mode == "exclusive-txn":           # NORMAL locking mode, an open EXCLUSIVE transaction
    con.execute("BEGIN EXCLUSIVE"); con.execute("INSERT OR REPLACE INTO results VALUES('h','1')")
elif mode == "rollback-journal":        # a rollback-journal database written under EXCLUSIVE
    con.execute("PRAGMA journal_mode=DELETE")
    con.execute("BEGIN EXCLUSIVE"); con.execute("INSERT OR REPLACE INTO results VALUES('h','1')")
print("held", flush=True)
time.sleep(60)
"""


@pytest.mark.parametrize("mode", ["exclusive-mode", "exclusive-txn", "rollback-journal"])
def test_locked_by_another_process(tmp_path, reference, mode):
    db = tmp_path / "results.sqlite3"
    populate(db, 5)
    holder = subprocess.Popen([sys.executable, "-c", HOLDER, str(db), mode], stdout=subprocess.PIPE,
                              text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        notes, store, seconds = fill_with(db, tmp_path, reference)
        assert len(notes) == 1 and "locked by another process" in notes[0]
        assert store.waited <= cache.WAIT_BUDGET + 1e-9
    finally:
        holder.kill()
        holder.wait()


def test_cli_one_warning_exit_0(tmp_path):
    """Through the command: a broken cache folder is one warning line, exit 0, values right."""
    src = build_book(tmp_path / "b.xlsx")
    (tmp_path / "cachedir").write_text("a file where the cache folder should be")
    r = run_cli("fill", src, src, "-o", tmp_path / "outs", env={"SHEETFUNCS_CACHE_DIR": str(tmp_path / "cachedir")})
    assert r.returncode == 0, r.stderr
    assert r.stderr.count("warning:") == 1 and "result cache off" in r.stderr


def test_sqlite3_is_imported_only_when_the_cache_is_used():
    code = ("import sys, sheetfuncs, sheetfuncs.api, sheetfuncs.cellfuncs, sheetfuncs.fill\n"
            "print('sqlite3' in sys.modules)\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert r.returncode == 0 and r.stdout.strip() == "False", r.stderr


def test_package_imports_and_fills_without_sqlite3(tmp_path):
    """A Python without sqlite3 (as in Pyodide) imports the package; the cache turns itself off."""
    src = build_book(tmp_path / "b.xlsx")
    code = ("import sys; sys.modules['sqlite3'] = None\n"
            "import sheetfuncs, sheetfuncs.cellfuncs\n"
            "from sheetfuncs.fill import fill_workbook\n"
            f"r = fill_workbook({str(src)!r}, {str(tmp_path / 'o.xlsx')!r})\n"
            "print(r.errors, r.warnings)\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                       env=dict(os.environ, PYTHONPATH=str(ROOT), SHEETFUNCS_CACHE="on"))
    assert r.returncode == 0, r.stderr
    assert r.stdout.startswith("0 (") and "no sqlite3 module" in r.stdout
