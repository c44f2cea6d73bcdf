"""The README's main-job command: sheetfuncs demo copies, fills and reports.
The key figures it prints are checked against sheetfuncs.figures on the same
inputs (itself checked against common-practice formulas and scipy elsewhere)."""
import json

import openpyxl
import pytest

import sheetfuncs as sf
from sheetfuncs import demo
from sheetfuncs.cli import main
from sheetfuncs.templates import TEMPLATES


def _params(ws, rng):
    rows = ws[rng]
    return {r[0].value.split(" ")[0]: r[1].value for r in rows}


def test_demo_command_json(tmp_path, capsys):
    code = main(["demo", str(tmp_path / "out"), "--json"])
    d = json.loads(capsys.readouterr().out)
    assert code == 0 and len(d["workbooks"]) == len(TEMPLATES)
    assert "licensed review" in d["caution"]
    for book in d["workbooks"]:
        assert book["errors"] == 0 and book["cells"] > 200
    rlc = next(b for b in d["workbooks"] if b["file"].endswith("rlc_step_response.xlsx"))
    wb = openpyxl.load_workbook(rlc["file"], data_only=True)
    ws = wb["Calculation"]
    info = next(i for i in demo_infos() if i["name"] == "rlc_step_response")
    f0 = info["figures"][0]
    expected = sf.figures(ws[f0["expr"]].value, _params(ws, f0["params"]), input=f0["input"])
    shown = dict((label, value) for label, value, _ in rlc["figures"])
    for f in info["figures"]:
        assert shown[f["label"]] == pytest.approx(getattr(expected, f["attr"]), rel=1e-12)


def demo_infos():
    from sheetfuncs.templates import describe
    return describe()


def test_demo_text_and_new_folder(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sheetfuncs-demo").mkdir()            # exists already: a new folder is made
    result = demo.run_demo()
    assert result.folder.endswith("sheetfuncs-demo-2")
    text = result.text()
    assert "rlc_step_response.xlsx" in text and "overshoot" in text and "licensed review" in text


def test_demo_builds_templates_when_not_in_a_checkout(tmp_path, monkeypatch):
    # an installed package has no workbooks/ folder beside it: the generator makes them
    monkeypatch.setattr(demo, "_template_files", demo._build_only)
    result = demo.run_demo(str(tmp_path / "d"))
    assert len(result.books) == len(TEMPLATES) and all(b["errors"] == 0 for b in result.books)
