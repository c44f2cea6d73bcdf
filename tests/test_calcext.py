"""The LibreOffice extension's parts that run without LibreOffice: generated files, the
worker process and the client that talks to it (restart, unavailable, time-out)."""
from __future__ import annotations

import math
import os
import sys
import textwrap
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import pytest

from sheetfuncs import calcext, cellfuncs
from sheetfuncs.calcext import client

OOR = "{http://openoffice.org/2001/registry}"


def _worker(**kw):
    return client.Worker(calcext.worker_config(), cellfuncs.ERROR_MARK, **kw)


def test_idl_has_every_function_and_argument():
    idl = calcext.idl_text()
    for info in cellfuncs.catalogue():
        line = next(l for l in idl.splitlines() if f" {info.name}(" in l)
        for a in info.args:
            assert f"[in] any {calcext.idl_name(a.name)}" in line
        assert line.count("[in]") == len(info.args) + 1          # + the hidden document


def test_idl_names_are_legal_unoidl():
    assert calcext.idl_name("t_end") == "tEnd"
    assert calcext.idl_name("input_s") == "inputS"
    assert calcext.idl_name("string") == "stringArg"


def test_xcu_describes_every_function():
    root = ET.fromstring(calcext.xcu_text())
    funcs = root.find(f"./node[@{OOR}name='AddInInfo']/node[@{OOR}name='{calcext.SERVICE}']"
                      f"/node[@{OOR}name='AddInFunctions']")
    by_name = {n.get(f"{OOR}name"): n for n in funcs}
    assert set(by_name) == set(cellfuncs.FUNCTIONS)
    for info in cellfuncs.catalogue():
        node = by_name[info.name]
        props = {p.get(f"{OOR}name"): p.find("value").text for p in node.findall("prop")}
        assert props["DisplayName"] == info.name
        assert props["CompatibilityName"] == info.name        # the name in .xlsx files
        assert props["Description"] == info.summary
        params = node.find(f"./node[@{OOR}name='Parameters']")
        assert [p.get(f"{OOR}name") for p in params] == [calcext.idl_name(a.name) for a in info.args]
        for p, a in zip(params, info.args):
            shown = {q.get(f"{OOR}name"): q.find("value").text for q in p.findall("prop")}
            assert shown["DisplayName"] == a.name and shown["Description"].startswith(a.description)


def _require_sdk():
    if calcext.sdk_tool("unoidl-write") is None or calcext.office_types() is None:
        if os.environ.get("CI", "").lower() in ("1", "true", "yes"):
            pytest.fail("unoidl-write (libreoffice-dev) and LibreOffice are required on CI")
        pytest.skip("LibreOffice SDK (unoidl-write) not installed")


def test_oxt_contents(tmp_path):
    _require_sdk()
    oxt = calcext.build(tmp_path / "sf.oxt", python="/some/python", pythonpath=["/some/dir"])
    with zipfile.ZipFile(oxt) as z:
        names = set(z.namelist())
        manifest = z.read("META-INF/manifest.xml").decode()
        cfg = z.read("worker.json").decode()
        rdb = z.read("sheetfuncs.rdb")
    for needed in ("sheetfuncs.rdb", "sheetfuncs.components", "CalcAddIns.xcu", "Jobs.xcu", "description.xml",
                   calcext.COMPONENT_FILE, "pythonpath/sheetfuncs_calc_client.py", "functions.json"):
        assert needed in names
        if needed != "description.xml" and not needed.endswith((".py", ".json")):
            assert needed in manifest
    assert rdb[:8] == b"UNOIDL\xff\x00"          # unoidl-write's binary type library
    assert "/some/python" in cfg and "/some/dir" in cfg


def test_missing_sdk_is_a_clear_error(monkeypatch):
    monkeypatch.setattr(calcext, "sdk_tool", lambda name: None)
    with pytest.raises(calcext.BuildError, match="unoidl-write.*libreoffice-dev"):
        calcext.compile_idl("module x { };", Path("unused.rdb"))


# ---------------------------------------------------------------- worker and client
def test_worker_answers_like_the_cell_functions():
    w = _worker()
    try:
        # textbook pair 1/(s+a) <-> exp(-a t) (any Laplace table)
        y = w.call("SF_RESPONSE", ["1/(s+2)", 0.5, None, None], {})
        assert y == pytest.approx(math.exp(-1.0), rel=1e-12)
        rows = w.call("SF_POLES", ["1/(s+2)", None, None], {})
        assert rows[0][0] == "mode" and rows[1][0] == 1 and rows[1][2] == -2.0     # sigma of the mode
        # defined names reach the function as parameters (as fill passes them)
        assert w.call("SF_RESPONSE", ["1/(s+a)", 0.5, None, None], {"a": 2.0}) == pytest.approx(math.exp(-1.0))
        assert w.call("SF_INVERSE", ["1/(s+", None, None, None], {}).startswith(cellfuncs.ERROR_MARK)
        assert w.start_seconds is not None and w.start_seconds > 0
    finally:
        w.stop()


def test_worker_restarts_after_a_crash():
    w = _worker()
    try:
        assert w.call("SF_STABILITY", ["1/(s+1)", None], {}).startswith("stable")
        w.proc.kill()
        w.proc.wait()
        assert w.call("SF_STABILITY", ["1/(s-1)", None], {}).startswith("unstable")
        assert w.starts == 2
    finally:
        w.stop()


def test_missing_interpreter_is_said_in_the_cell(tmp_path):
    w = client.Worker({"python": str(tmp_path / "no-python"), "path": []}, "#SF!")
    text = w.call("SF_INVERSE", ["1/s"], {})
    assert text.startswith("#SF! sheetfuncs worker unavailable") and "no-python" in text
    assert "sheetfuncs libreoffice install" in text


def test_interpreter_without_sheetfuncs_is_said_in_the_cell(tmp_path):
    # an interpreter that cannot import sheetfuncs: a bare venv-less Python with -I semantics is
    # not available through the config, so use a PYTHONPATH-free system Python when there is one
    system = Path("/usr/bin/python3")
    if not system.is_file() or system.resolve() == Path(sys.executable).resolve():
        pytest.skip("no second Python without sheetfuncs")
    w = client.Worker({"python": str(system), "path": [str(tmp_path)]}, "#SF!")
    text = w.call("SF_INVERSE", ["1/s"], {})
    assert text.startswith("#SF! sheetfuncs worker unavailable") and "sheetfuncs" in text


def test_a_hung_worker_is_stopped_and_said(tmp_path):
    # a stand-in worker module that says it is ready and then never answers: the client's
    # time-out handling is what is under test here
    pkg = tmp_path / "sheetfuncs" / "calcext"
    pkg.mkdir(parents=True)
    (tmp_path / "sheetfuncs" / "__init__.py").write_text("")
    (pkg / "__init__.py").write_text("")
    (pkg / "worker.py").write_text(textwrap.dedent("""
        import sys, time
        print('{"ready": "0"}', flush=True)
        sys.stdin.readline()
        time.sleep(60)
    """))
    w = client.Worker({"python": sys.executable, "path": [str(tmp_path)]}, "#SF!", call_timeout=1.0)
    text = w.call("SF_INVERSE", ["1/s"], {})
    assert "no answer within 1 s" in text and w.proc is None


# ---------------------------------------------------------------- the command's errors
def test_install_without_libreoffice_is_a_clear_error(monkeypatch, tmp_path, capsys):
    from sheetfuncs import cli
    from sheetfuncs.calcext import install
    monkeypatch.setattr(install, "program_dir", lambda: None)
    assert cli.main(["libreoffice", "install", "--profile", str(tmp_path / "p")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: LibreOffice not found") and "libreoffice-calc-nogui" in err


def test_install_without_unopkg_is_a_clear_error(monkeypatch, tmp_path, capsys):
    from sheetfuncs import cli
    from sheetfuncs.calcext import install
    (tmp_path / "soffice").write_text("")
    monkeypatch.setattr(install, "program_dir", lambda: tmp_path)
    monkeypatch.setattr(install.shutil, "which", lambda name: None)
    monkeypatch.setattr(install, "_as_root", lambda: False)          # the unopkg route
    assert cli.main(["libreoffice", "remove", "--profile", str(tmp_path / "p")]) == 2
    assert "unopkg not found next to soffice" in capsys.readouterr().err


def test_libreoffice_command_form():
    from sheetfuncs import cli
    args = cli.build_parser().parse_args(["libreoffice", "install", "--profile", "/x"])
    assert (args.command, args.action, args.profile) == ("libreoffice", "install", "/x")
    assert cli.main(["libreoffice", "upgrade"]) == 2
