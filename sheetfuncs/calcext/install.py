"""Add the extension to LibreOffice, or take it out, with ``unopkg``.

As root (CI, containers) unopkg refuses a user profile, so the same work is
done through a headless LibreOffice and its extension manager
(``office_install.py`` under LibreOffice's Python); a profile folder is then
required.

``install(profile=None)``: for the current user, or into the LibreOffice
user profile folder ``profile`` (the folder given to
``-env:UserInstallation=file://DIR``), created if needed.  An installed
extension is replaced (``unopkg add --force``).
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from ..errors import SheetfuncsError
from . import EXTENSION_ID, build

TIMEOUT = 300


class LibreOfficeMissing(SheetfuncsError):
    """LibreOffice or its unopkg tool is not installed (or not found)."""


class UnopkgError(SheetfuncsError):
    """unopkg ran and failed."""


def _candidates():
    env = os.environ.get("SOFFICE")
    if env:
        yield Path(env).resolve().parent
    for name in ("soffice", "libreoffice", "unopkg"):
        found = shutil.which(name)
        if found:
            yield Path(found).resolve().parent
    yield from (Path(p) for p in ("/usr/lib/libreoffice/program", "/opt/libreoffice/program",
                                  "/Applications/LibreOffice.app/Contents/MacOS",
                                  r"C:\Program Files\LibreOffice\program"))


def program_dir() -> Path | None:
    """LibreOffice's program folder (where soffice and unopkg live), or None."""
    for d in _candidates():
        if (d / "soffice").is_file() or (d / "soffice.exe").is_file() or (d / "soffice.bin").is_file():
            return d
    return None


def _require_office() -> None:
    """LibreOfficeMissing unless soffice is found (and unopkg, where it is what does the work)."""
    if _as_root():
        _office_dir()
    else:
        unopkg_path()


def _office_dir() -> Path:
    prog = program_dir()
    if prog is None:
        raise LibreOfficeMissing("LibreOffice not found (install it, e.g. Debian/Ubuntu: "
                                 "apt-get install libreoffice-calc-nogui python3-uno; or set SOFFICE "
                                 "to the path of soffice)")
    return prog


def unopkg_path() -> str:
    prog = _office_dir()
    for name in ("unopkg", "unopkg.com", "unopkg.exe"):
        if (prog / name).is_file():
            return str(prog / name)
    found = shutil.which("unopkg")
    if found:
        return found
    raise LibreOfficeMissing(f"unopkg not found next to soffice in {prog}")


def office_python() -> str | None:
    """LibreOffice's Python (the one with pyuno): bundled next to soffice, or a system one."""
    prog = program_dir()
    cands = []
    if prog is not None:
        cands += [prog / "python", prog / "python.exe", prog.parent / "Resources" / "python"]
    cands += [Path(p) for p in ("/usr/bin/python3", "/usr/local/bin/python3") if Path(p).is_file()]
    for cand in cands:
        if not cand.is_file():
            continue
        try:
            ok = subprocess.run([str(cand), "-c", "import uno"], capture_output=True, timeout=60,
                                env=office_env()).returncode == 0
        except (OSError, subprocess.TimeoutExpired):
            ok = False
        if ok:
            return str(cand)
    return None


def office_env() -> dict:
    """The environment to start LibreOffice (or its Python) in, from this process's.

    Without PYTHONPATH / PYTHONHOME, and without the PATH entries of a non-system Python
    (pyenv, a virtualenv): LibreOffice's embedded Python finds its standard library through
    PATH, and one of another build there breaks its component loader."""
    env = dict(os.environ)
    for key in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV"):
        env.pop(key, None)
    foreign = {Path(p).resolve() for p in (sys.prefix, sys.base_prefix, sys.exec_prefix)}
    foreign -= {Path("/usr"), Path("/usr/local"), Path("/")}
    keep = []
    for entry in env.get("PATH", "").split(os.pathsep):
        if not entry:
            continue
        resolved = Path(entry).resolve()
        if "pyenv" in entry or any(resolved == f or f in resolved.parents for f in foreign):
            continue
        keep.append(entry)
    env["PATH"] = os.pathsep.join(keep or ["/usr/bin", "/bin"])
    return env


def _as_root() -> bool:
    return hasattr(os, "geteuid") and os.geteuid() == 0


def _through_office(action: str, profile, target: str = "") -> dict:
    """unopkg's work done by a running LibreOffice (office_install.py under its Python)."""
    import json
    python = office_python()
    if python is None:
        raise LibreOfficeMissing("LibreOffice's Python with pyuno not found (Debian/Ubuntu: apt-get install "
                                 "python3-uno)")
    if profile is None:
        raise UnopkgError("as root, give the profile folder: --profile DIR (unopkg refuses to change "
                          "root's own profile)")
    prof = Path(profile).expanduser().resolve()
    prof.mkdir(parents=True, exist_ok=True)
    env = office_env()
    prog = program_dir()
    if prog is not None and not os.environ.get("SOFFICE"):
        env["SOFFICE"] = str(prog / "soffice")
    try:
        res = subprocess.run([python, str(Path(__file__).with_name("office_install.py")), action, str(prof),
                              target], capture_output=True, text=True, timeout=TIMEOUT, env=env,
                             stdin=subprocess.DEVNULL)
    except subprocess.TimeoutExpired:
        raise UnopkgError(f"LibreOffice did not finish '{action}' within {TIMEOUT} s") from None
    lines = [l for l in res.stdout.splitlines() if l.startswith("{")]
    try:
        answer = json.loads(lines[-1])
    except (IndexError, ValueError):
        raise UnopkgError(f"LibreOffice could not {action} the extension (exit {res.returncode}): "
                          f"{(res.stderr or res.stdout).strip()[-600:]}") from None
    if "error" in answer:
        raise UnopkgError(f"LibreOffice could not {action} the extension: {answer['error']}")
    return answer


def _profile_arg(profile) -> list[str]:
    if profile is None:
        return []
    p = Path(profile).expanduser().resolve()
    p.mkdir(parents=True, exist_ok=True)
    return [f"-env:UserInstallation={p.as_uri()}"]


def _unopkg(args: list[str], profile) -> subprocess.CompletedProcess:
    exe = unopkg_path()
    cmd = [exe, *args, *_profile_arg(profile)]
    try:
        res = subprocess.run(cmd, capture_output=True, text=True, timeout=TIMEOUT,
                             stdin=subprocess.DEVNULL, env=office_env())
    except subprocess.TimeoutExpired:
        raise UnopkgError(f"unopkg {args[0]} did not finish within {TIMEOUT} s (is LibreOffice running "
                          f"with this profile? close it and try again)") from None
    return res


def installed(profile=None) -> bool:
    _require_office()
    if _as_root():                                  # (a profile folder is required there)
        return EXTENSION_ID in _through_office("list", profile)["identifiers"]
    res = _unopkg(["list", EXTENSION_ID], profile)
    return res.returncode == 0 and EXTENSION_ID in res.stdout


def install(profile=None, *, python: str | None = None, pythonpath: list[str] | None = None) -> str:
    """Build the extension for this Python and add it; returns a one-line summary."""
    _require_office()                               # say early when LibreOffice is missing
    with tempfile.TemporaryDirectory(prefix="sf-oxt-") as tmp:
        oxt = build(Path(tmp) / "sheetfuncs.oxt", python=python, pythonpath=pythonpath)
        if _as_root():
            _through_office("add", profile, str(oxt))
            return f"installed the sheetfuncs extension ({EXTENSION_ID}) into profile {Path(profile).resolve()}"
        res = _unopkg(["add", "--force", "--suppress-license", str(oxt)], profile)
    if res.returncode != 0:
        raise UnopkgError(f"unopkg add failed (exit {res.returncode}): "
                          f"{(res.stderr or res.stdout).strip()[-600:]}")
    where = f"profile {Path(profile).expanduser().resolve()}" if profile else "the current user"
    return f"installed the sheetfuncs extension ({EXTENSION_ID}) for {where}"


def remove(profile=None) -> str:
    if not installed(profile):
        where = f" in profile {profile}" if profile else ""
        raise UnopkgError(f"the sheetfuncs extension is not installed{where}")
    if _as_root():
        _through_office("remove", profile, EXTENSION_ID)
        return f"removed the sheetfuncs extension ({EXTENSION_ID})"
    res = _unopkg(["remove", EXTENSION_ID], profile)
    if res.returncode != 0:
        raise UnopkgError(f"unopkg remove failed (exit {res.returncode}): "
                          f"{(res.stderr or res.stdout).strip()[-600:]}")
    return f"removed the sheetfuncs extension ({EXTENSION_ID})"
