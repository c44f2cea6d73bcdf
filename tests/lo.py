"""Test harness around the real LibreOffice (``soffice --headless``) and poppler.

Every soffice call gets its own throw-away profile folder and its own process
group, which is killed on timeout and after the call.  ``--convert-to`` exits 0
even when it could not load a file, so outputs are checked to exist.
"""
from __future__ import annotations

import csv
import os
import re
import shutil
import signal
import struct
import subprocess
import sys
import tempfile
import zlib
from pathlib import Path

import numpy as np

#: every sheet to CSV: comma, double quote, UTF-8, from line 1, formatted as shown, all sheets (-1)
CSV_ALL_SHEETS = "csv:Text - txt - csv (StarCalc):44,34,UTF8,1,,0,false,true,false,false,false,-1"
TIMEOUT = 120


class LibreOfficeError(RuntimeError):
    """soffice or a poppler tool failed, hung or wrote nothing."""


def soffice_path() -> str | None:
    """Path of soffice ($SOFFICE first), or None."""
    env = os.environ.get("SOFFICE")
    if env and Path(env).is_file():
        return env
    for name in ("soffice", "libreoffice"):
        found = shutil.which(name)
        if found:
            return found
    for cand in ("/usr/lib/libreoffice/program/soffice",
                 "/Applications/LibreOffice.app/Contents/MacOS/soffice",
                 r"C:\Program Files\LibreOffice\program\soffice.exe"):
        if Path(cand).is_file():
            return cand
    return None


def _on_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() in ("1", "true", "yes")


def require_soffice() -> str:
    """soffice path; pytest.skip when missing (pytest.fail when CI=true)."""
    import pytest

    path = soffice_path()
    if path is None:
        if _on_ci():
            pytest.fail("LibreOffice (soffice) is required on CI but was not found")
        pytest.skip("LibreOffice (soffice) not installed")
    return path


def require_tool(name: str) -> str:
    """Path of a command-line tool (pdftoppm, pdfinfo); skip/fail like require_soffice."""
    import pytest

    path = shutil.which(name)
    if path is None:
        if _on_ci():
            pytest.fail(f"{name} is required on CI but was not found (poppler-utils)")
        pytest.skip(f"{name} not installed (poppler-utils)")
    return path


def _run(cmd: list[str], timeout: float, cwd: str | None = None) -> subprocess.CompletedProcess:
    """Run cmd in its own process group; kill the whole group on timeout and afterwards."""
    posix = os.name == "posix"
    kw = {"start_new_session": True} if posix else {
        "creationflags": getattr(subprocess, "CREATE_NEW_PROCESS_GROUP", 0)}
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=cwd, **kw)
    try:
        out, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        _kill(proc, posix)
        proc.communicate()
        raise LibreOfficeError(f"timed out after {timeout:.0f} s: {' '.join(cmd[:3])} ...") from None
    finally:
        _kill(proc, posix)
    return subprocess.CompletedProcess(cmd, proc.returncode, out.decode(errors="replace"),
                                       err.decode(errors="replace"))


def _kill(proc: subprocess.Popen, posix: bool) -> None:
    try:
        if posix:
            os.killpg(proc.pid, signal.SIGKILL)   # the group this call created (pgid == pid)
        elif proc.poll() is None:
            proc.kill()
    except (ProcessLookupError, PermissionError, OSError):
        pass


def _soffice(args: list[str], timeout: float = TIMEOUT) -> subprocess.CompletedProcess:
    exe = soffice_path()
    if exe is None:
        raise LibreOfficeError("soffice not found")
    profile = tempfile.mkdtemp(prefix="sf-lo-profile-")
    try:
        cmd = [exe, f"-env:UserInstallation={Path(profile).resolve().as_uri()}",
               "--headless", "--invisible", "--norestore", "--nolockcheck", "--nodefault",
               "--nologo", *args]
        return _run(cmd, timeout)
    finally:
        shutil.rmtree(profile, ignore_errors=True)


def _convert(src, outdir, target: str, timeout: float) -> tuple[Path, subprocess.CompletedProcess]:
    """Convert into a fresh sub-folder of outdir (so outputs are unambiguous)."""
    src = Path(src).resolve()
    if not src.is_file():
        raise LibreOfficeError(f"input file missing: {src}")
    Path(outdir).mkdir(parents=True, exist_ok=True)
    sub = Path(tempfile.mkdtemp(prefix="lo-", dir=outdir))
    res = _soffice(["--convert-to", target, "--outdir", str(sub), str(src)], timeout)
    return sub, res


def to_csv_all_sheets(xlsx_path, outdir, timeout: float = TIMEOUT) -> dict[str, list[list[str]]]:
    """Every sheet as shown by LibreOffice: {sheet name: rows of cell texts}."""
    sub, res = _convert(xlsx_path, outdir, CSV_ALL_SHEETS, timeout)
    stem = Path(xlsx_path).stem
    files = sorted(sub.glob("*.csv"))
    if not files:
        raise LibreOfficeError(f"LibreOffice wrote no CSV for {xlsx_path} (rc={res.returncode}): "
                               f"{(res.stderr or res.stdout).strip()[-500:]}")
    out = {}
    for f in files:
        name = f.stem[len(stem) + 1:] if f.stem.startswith(stem + "-") else f.stem
        with open(f, encoding="utf-8-sig", newline="") as fh:
            out[name] = [row for row in csv.reader(fh)]
    return out


def to_pdf(xlsx_path, outdir, timeout: float = TIMEOUT) -> Path:
    """PDF of all sheets as LibreOffice prints them."""
    sub, res = _convert(xlsx_path, outdir, "pdf", timeout)
    pdf = sub / (Path(xlsx_path).stem + ".pdf")
    if not pdf.is_file() or not pdf.read_bytes()[:5] == b"%PDF-":
        raise LibreOfficeError(f"LibreOffice wrote no PDF for {xlsx_path} (rc={res.returncode}): "
                               f"{(res.stderr or res.stdout).strip()[-500:]}")
    return pdf


def pdf_page_count(pdf) -> int:
    """Number of pages (pdfinfo)."""
    res = _run([shutil.which("pdfinfo") or "pdfinfo", str(pdf)], 60)
    m = re.search(r"^Pages:\s+(\d+)", res.stdout, re.M)
    if res.returncode != 0 or not m:
        raise LibreOfficeError(f"pdfinfo failed on {pdf}: {res.stderr.strip()[-300:]}")
    return int(m.group(1))


def pdf_page_png(pdf, page: int = 1, outdir=None, dpi: int = 40) -> Path:
    """Render one PDF page (1-based) to PNG with pdftoppm."""
    pdf = Path(pdf)
    outdir = Path(outdir) if outdir is not None else pdf.parent
    outdir.mkdir(parents=True, exist_ok=True)
    prefix = outdir / f"{pdf.stem}-p{page}"
    exe = shutil.which("pdftoppm") or "pdftoppm"
    res = _run([exe, "-png", "-r", str(dpi), "-f", str(page), "-l", str(page), "-singlefile",
                str(pdf), str(prefix)], 60)
    png = prefix.with_name(prefix.name + ".png")
    if res.returncode != 0 or not png.is_file():
        raise LibreOfficeError(f"pdftoppm failed on {pdf} page {page}: {res.stderr.strip()[-300:]}")
    return png


# ---------------------------------------------------------------- PNG without pillow

def png_pixels(png) -> np.ndarray:
    """Decode an 8-bit non-interlaced PNG to an (h, w, 3) uint8 RGB array."""
    data = Path(png).read_bytes()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError(f"{png} is not a PNG")
    pos, idat, palette, hdr = 8, [], None, None
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        pos += 12 + length
        if kind == b"IHDR":
            hdr = struct.unpack(">IIBBBBB", body)
        elif kind == b"PLTE":
            palette = np.frombuffer(body, np.uint8).reshape(-1, 3)
        elif kind == b"IDAT":
            idat.append(body)
        elif kind == b"IEND":
            break
    w, h, depth, ctype, _, _, interlace = hdr
    if depth != 8 or interlace:
        raise ValueError(f"unsupported PNG (bit depth {depth}, interlace {interlace})")
    ch = {0: 1, 2: 3, 3: 1, 4: 2, 6: 4}[ctype]
    raw = np.frombuffer(zlib.decompress(b"".join(idat)), np.uint8).reshape(h, 1 + w * ch)
    img = np.zeros((h, w * ch), np.int32)
    prev = np.zeros(w * ch, np.int32)
    for y in range(h):
        ftype, line = raw[y, 0], raw[y, 1:].astype(np.int32)
        if ftype == 0:
            cur = line
        elif ftype == 1:
            cur = np.cumsum(line.reshape(w, ch), axis=0).reshape(-1) % 256
        elif ftype == 2:
            cur = (line + prev) % 256
        else:
            cur = _unfilter_slow(ftype, line.tolist(), prev.tolist(), ch)
        img[y] = cur
        prev = img[y]
    img = img.astype(np.uint8).reshape(h, w, ch)
    if ctype == 3:
        return palette[img[..., 0]]
    if ch in (1, 2):
        return np.repeat(img[..., :1], 3, axis=2)
    return img[..., :3]


def _unfilter_slow(ftype: int, line: list, prev: list, bpp: int) -> np.ndarray:
    out = [0] * len(line)
    for i, x in enumerate(line):
        a = out[i - bpp] if i >= bpp else 0
        b = prev[i]
        if ftype == 3:
            out[i] = (x + (a + b) // 2) & 255
        else:
            c = prev[i - bpp] if i >= bpp else 0
            p = a + b - c
            pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
            pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
            out[i] = (x + pred) & 255
    return np.array(out, np.int32)


def png_ink(png) -> dict:
    """Fractions of pixels that are not near-white (``ink``) and that are coloured
    (``color``), and how many pixel rows hold coloured pixels (``color_rows``: a
    rising curve covers many rows, a flat line or legend only a few)."""
    px = png_pixels(png).astype(np.int16)
    ink = px.min(axis=2) < 230
    color = (px.max(axis=2) - px.min(axis=2)) > 60
    return {"ink": float(ink.mean()), "color": float(color.mean()),
            "color_rows": int(color.any(axis=1).sum()), "size": px.shape[:2]}


def png_is_blank(png, min_ink: float = 0.001) -> bool:
    """True when (almost) every pixel is white."""
    return png_ink(png)["ink"] < min_ink


if __name__ == "__main__":  # manual check: python -m tests.lo FILE.xlsx
    for name, rows in to_csv_all_sheets(sys.argv[1], tempfile.mkdtemp()).items():
        print(f"--- {name}")
        for row in rows:
            print(row)


# ---------------------------------------------------------------- live LibreOffice (python3-uno)

def require_office_python() -> str:
    """LibreOffice's Python with pyuno (python3-uno); skip/fail like require_soffice."""
    import pytest
    from sheetfuncs.calcext.install import office_python

    require_soffice()
    path = office_python()
    if path is None:
        if _on_ci():
            pytest.fail("LibreOffice's Python with pyuno (python3-uno) is required on CI")
        pytest.skip("python3-uno not installed")
    return path


def OfficeSession(profile, log=None, timeout: float = 300):
    """A live LibreOffice on ``profile`` (sheetfuncs.calcext.session); skip/fail when missing."""
    from sheetfuncs.calcext.session import OfficeSession as _Session
    return _Session(profile, python=require_office_python(), soffice=soffice_path(), log=log, timeout=timeout)
