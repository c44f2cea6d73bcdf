"""--in-place and the output file under faults: symlinks, owner and mode, the
first backup kept, concurrent runs serialised, full disks, SIGTERM/SIGINT/SIGKILL
mid-write.  After a failure the input is byte-identical; after a success only
our cells changed (tests/faults/compare.py)."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from sheetfuncs.fill import fill_workbook
from tests.faults.compare import differences
from tests.faults.conftest import ROOT, build_book, run_cli, tmpfs

# A fill run whose writing of the package is slowed down (fault injection): it
# prints "writing" once its temp file is open, then waits, so the test can kill
# it or start a rival mid-write.
SLOW = r"""
import os, sys, time
import sheetfuncs.workbook.package as p
import sheetfuncs.fill as f
delay = float(sys.argv[2])
orig_copy = p._copy_member
orig_read = f.read_package
def read(path):
    print(f"reading {time.time():.6f}", flush=True)
    return orig_read(path)
def slow(*a):
    print(f"writing {time.time():.6f}", flush=True)
    time.sleep(delay)
    return orig_copy(*a)
f.read_package = read
p._copy_member = slow
from sheetfuncs.cli import main
code = main(["fill", sys.argv[1], "--in-place", "--no-cache"])
print(f"done {time.time():.6f}", flush=True)
sys.exit(code)
"""


def slow_fill(path, delay):
    return subprocess.Popen([sys.executable, "-c", SLOW, str(path), str(delay)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True,
                            env=dict(os.environ, PYTHONPATH=str(ROOT)))


def wait_for(proc, word):
    for line in proc.stdout:
        if line.startswith(word):
            return float(line.split()[1])
    raise AssertionError(f"never printed {word}: {proc.stderr.read()}")


def temps(folder: Path):
    return [p.name for p in folder.iterdir() if p.name.startswith(".~")]


def test_symlink_is_filled_through_and_kept(tmp_path):
    real = tmp_path / "real"
    real.mkdir()
    target = build_book(real / "book.xlsx")
    original = target.read_bytes()
    link = tmp_path / "link.xlsx"
    link.symlink_to(target)
    report = fill_workbook(link, in_place=True, use_cache=False)
    assert report.errors == 0
    assert link.is_symlink() and os.readlink(link) == str(target)
    assert (real / "book.xlsx.bak").read_bytes() == original
    assert differences(real / "book.xlsx.bak", target) == [] and target.read_bytes() != original


@pytest.mark.skipif(os.geteuid() != 0, reason="giving a file to another owner needs root")
def test_owner_group_and_mode_are_kept(tmp_path):
    book = build_book(tmp_path / "book.xlsx")
    os.chown(book, 1234, 2345)
    os.chmod(book, 0o640)
    fill_workbook(book, in_place=True, use_cache=False)
    for p in (book, tmp_path / "book.xlsx.bak"):
        st = p.stat()
        assert (st.st_uid, st.st_gid, st.st_mode & 0o7777) == (1234, 2345, 0o640), p


def test_the_first_backup_is_kept(tmp_path):
    book = build_book(tmp_path / "book.xlsx")
    original = book.read_bytes()
    assert fill_workbook(book, in_place=True, use_cache=False).backup == str(tmp_path / "book.xlsx.bak")
    filled_once = book.read_bytes()
    r = run_cli("fill", book, "--in-place", "--no-cache")
    assert r.returncode == 0, r.stderr
    assert "kept from an earlier run" in r.stdout
    assert (tmp_path / "book.xlsx.bak").read_bytes() == original       # never replaced
    assert differences(filled_once, book) == [] and not temps(tmp_path)


def test_hard_link_is_reported(tmp_path):
    book = build_book(tmp_path / "book.xlsx")
    os.link(book, tmp_path / "other.xlsx")
    report = fill_workbook(book, in_place=True, use_cache=False)
    assert any("hard links" in w for w in report.warnings)


def test_concurrent_in_place_runs_one_after_the_other(tmp_path):
    book = build_book(tmp_path / "book.xlsx")
    original = book.read_bytes()
    first = slow_fill(book, 1.0)
    wait_for(first, "writing")
    second = slow_fill(book, 0.0)
    first_done = wait_for(first, "done")
    second_read = wait_for(second, "reading")        # fill reads the package only under the lock
    assert first.wait(60) == 0 and second.wait(60) == 0, (first.stderr.read(), second.stderr.read())
    assert second_read > first_done - 0.05
    assert (tmp_path / "book.xlsx.bak").read_bytes() == original
    assert differences(tmp_path / "book.xlsx.bak", book) == [] and not temps(tmp_path)


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT])
def test_signal_mid_write_removes_temp_and_keeps_input(tmp_path, sig):
    book = build_book(tmp_path / "book.xlsx")
    original = book.read_bytes()
    proc = slow_fill(book, 30.0)
    wait_for(proc, "writing")
    assert temps(tmp_path)                            # the temp file exists mid-write
    proc.send_signal(sig)
    code = proc.wait(30)
    assert code == 2 and "interrupted" in proc.stderr.read()
    assert book.read_bytes() == original and not temps(tmp_path)


def test_stale_temp_of_a_killed_run_is_removed_by_the_next(tmp_path):
    book = build_book(tmp_path / "book.xlsx")
    original = book.read_bytes()
    proc = slow_fill(book, 30.0)
    wait_for(proc, "writing")
    proc.kill()
    proc.wait(30)
    left = temps(tmp_path)
    assert left and book.read_bytes() == original
    fill_workbook(book, in_place=True, use_cache=False)
    assert not temps(tmp_path) and differences(tmp_path / "book.xlsx.bak", book) == []


def _fill_up(where: Path) -> None:
    fd = os.open(where / "filler", os.O_WRONLY | os.O_CREAT)
    try:
        while True:
            os.write(fd, b"\0" * 512)
    except OSError:
        pass
    finally:
        os.close(fd)


def test_backup_on_a_full_disk(tmp_path):
    src = build_book(tmp_path / "book.xlsx")
    with tmpfs("256k") as where:
        book = where / "book.xlsx"
        book.write_bytes(src.read_bytes())
        _fill_up(where)
        r = run_cli("fill", book, "--in-place", "--no-cache")
        assert r.returncode == 2
        assert "cannot write the backup book.xlsx.bak" in r.stderr and "not changed" in r.stderr
        assert "internal error" not in r.stderr and r.stderr.count(str(book)) == 1
        assert book.read_bytes() == src.read_bytes()
        assert not (where / "book.xlsx.bak").exists() and not temps(where)


def test_output_on_a_full_disk(tmp_path):
    src = build_book(tmp_path / "book.xlsx")
    before = src.read_bytes()
    with tmpfs("64k") as where:
        _fill_up(where)
        r = run_cli("fill", src, "-o", where / "out.xlsx", "--no-cache")
        assert r.returncode == 2 and "No space left" in r.stderr and "internal error" not in r.stderr
        assert not (where / "out.xlsx").exists() and not temps(where)
    assert src.read_bytes() == before
