"""The Excel route, read through xlwings' own code on Linux.

xlwings' *Import Functions* writes a VBA module with ``udfs.generate_vba_wrapper``; here that
generator runs on ``sheetfuncs.cells`` with the pywin32 modules stubbed (no Excel on Linux), and
the VBA it writes and the metadata xlwings keeps (descriptions, options) are checked.  Also the
contract every cell function keeps: a one-line description and a description per argument.
"""
from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest

from sheetfuncs import cellfuncs

# Reserved identifiers of VBA, from the VBA language specification [MS-VBAL] section 3.3.5.2
# (statement, marker, operator, special-form, type and literal keywords; written from memory)
# plus the statement names Error, Name, Line and Width.
VBA_RESERVED = {w.lower() for w in """
Abs AddressOf And Any Array As Attribute Boolean ByRef Byte ByVal Call Case CBool CByte CCur CDate
CDbl CDec CInt Circle CLng CLngLng CLngPtr Close Const CSng CStr Currency CVar CVErr Date Debug Decimal
Declare DefBool DefByte DefCur DefDate DefDbl DefDec DefInt DefLng DefLngLng DefLngPtr DefObj DefSng
DefStr DefVar Dim Do DoEvents Double Each Else ElseIf Empty End EndIf Enum Eqv Erase Error Event Exit
False Fix For Friend Function Get Global GoSub GoTo If Imp Implements In Input InputB Int Integer Is
LBound Len LenB Let Like Line Lock Long LongLong LongPtr Loop LSet Me Mod Name New Next Not Nothing
Null On Open Option Optional Or ParamArray Preserve Print Private PSet Public Put RaiseEvent ReDim Rem
Resume Return RSet Scale Seek Select Set Sgn Shared Single Spc Static Stop String Sub Tab Then To True
Type TypeOf UBound Unlock Until Variant Wend While Width With WithEvents Write Xor
""".split()}

_GENERATE = r"""
import io, json, sys, types
stubs = {n: types.ModuleType(n) for n in ("pythoncom", "pywintypes", "win32com", "win32com.client")}
stubs["pythoncom"].CoInitialize = lambda: None
stubs["pywintypes"].com_error = type("com_error", (Exception,), {})
stubs["win32com.client"].Dispatch = lambda *a, **k: None
stubs["win32com"].client = stubs["win32com.client"]
sys.modules.update(stubs)
import xlwings
import xlwings.udfs as udfs
xlwings.func, xlwings.arg, xlwings.ret = udfs.xlfunc, udfs.xlarg, udfs.xlret   # as on Windows
from sheetfuncs import cells
class Book:
    Name = sys.argv[1]
buf = io.StringIO()
udfs.generate_vba_wrapper("sheetfuncs.cells", cells, buf, Book())
meta = {}
for name, f in cells.CELL_FUNCTIONS.items():
    x = f.__xlfunc__
    meta[name] = {"doc": x["ret"]["doc"], "call_in_wizard": x["call_in_wizard"], "category": x["category"],
                  "args": [{"name": a["name"], "doc": a["doc"], "vba": a["vba"],
                            "options": {k: v for k, v in a["options"].items() if k in ("ndim", "err_to_str")}}
                           for a in x["args"]]}
print(json.dumps({"vba": buf.getvalue(), "meta": meta}))
"""


@pytest.fixture(scope="module")
def generated():
    pytest.importorskip("xlwings")
    res = subprocess.run([sys.executable, "-c", _GENERATE, "sheetfuncs.xlam"], capture_output=True,
                         text=True, timeout=300)
    assert res.returncode == 0, res.stderr[-2000:]
    return json.loads(res.stdout)


def test_every_function_is_described():
    for info in cellfuncs.catalogue():
        assert info.summary and not info.summary.endswith(":"), info.name
        for a in info.args:
            assert a.description, f"{info.name}: argument {a.name} has no description (Args: section)"


def test_no_argument_is_a_vba_reserved_word():
    for info in cellfuncs.catalogue():
        for a in info.args:
            assert a.name.lower() not in VBA_RESERVED, f"{info.name}: argument '{a.name}' is reserved in VBA"
            assert re.fullmatch(r"[A-Za-z][A-Za-z0-9_]{0,254}", a.name), a.name


def test_old_positions_still_work():
    # the renamed arguments (input -> excitation, stop -> t_end) keep their places
    r = cellfuncs.response("1/(s+1)", 1.0, "step")
    assert r == pytest.approx(1 - 2.718281828459045 ** -1, rel=1e-12)     # 1/(s(s+1)) <-> 1 - e^-t
    rows = cellfuncs.response_table("1/(s+1)", 0.0, 1.0, 3, "step")
    assert [r[0] for r in rows[1:]] == [0.0, 0.5, 1.0]


def test_vba_module_from_xlwings(generated):
    vba = generated["vba"]
    infos = {i.name: i for i in cellfuncs.catalogue()}
    sigs = dict(re.findall(r"^Function (SF_\w+)\((.*)\)\s*$", vba, re.M))
    assert set(sigs) == set(infos)
    for name, info in infos.items():
        params = [p.strip() for p in sigs[name].split(",") if p.strip()]
        names = [p.split()[-1] for p in params]
        assert names == [a.name for a in info.args]                  # caller is not a VBA parameter
        for p, a in zip(params, info.args):
            assert p.startswith("Optional ") == (not a.required), (name, p)
            assert a.name.lower() not in VBA_RESERVED
        body = vba.split(f"Function {name}(", 1)[1].split("End Function", 1)[0]
        # call_in_wizard=False: xlwings makes the function return at once inside the wizard
        assert "Then Exit Function" in body.splitlines()[1]
        assert f'XLPy.CallUDF("sheetfuncs.cells", "{name}"' in body
        assert "ActiveWorkbook" in body                            # the add-in (.xlam) form


def test_wizard_texts_and_options(generated):
    for info in cellfuncs.catalogue():
        meta = generated["meta"][info.name]
        assert meta["doc"] == info.summary and len(meta["doc"]) <= 255
        assert meta["call_in_wizard"] is False and meta["category"] == "sheetfuncs"
        args = {a["name"]: a for a in meta["args"]}
        assert args["caller"]["vba"] == "Nothing"
        for a in info.args:
            got = args[a.name]
            assert got["doc"] == a.description and not got["doc"].startswith("Positional argument")
            assert got["options"].get("err_to_str") is True
            assert got["options"].get("ndim") == (2 if a.is_range else None)


def test_error_values_in_inputs_are_said():
    from sheetfuncs import cells
    out = cells.SF_RESPONSE("1/(s+1)", "#N/A")
    assert out == f"{cellfuncs.ERROR_MARK} input error: #N/A in argument t"
    out = cells.SF_INVERSE("R/(s+1)", [["R", "#DIV/0!"]])
    assert "input error: #DIV/0! in argument params" in out


def test_defined_names_scoped_like_fill():
    from sheetfuncs import cells
    from sheetfuncs.workbook import refs
    assert refs.SPILL_NAME_PREFIX.lower() in cells._RESERVED_NAME_PREFIXES

    class Rng:
        def __init__(self, v):
            self.value, self.count = v, 1

    class Name:
        def __init__(self, n, v):
            self.name, self.refers_to_range = n, Rng(v)

    class Caller:
        class sheet:
            class book:
                names = [Name("a", 2.0), Name("Sheet1!b", 3.0), Name("_sfspill1", 4.0), Name("txt", "x")]
    assert cells._book_names(Caller) == {"a": 2.0}
    assert cells.SF_RESPONSE("1/(s+a)", 0.5, None, None, caller=Caller) == pytest.approx(2.718281828459045 ** -1)


def test_long_results_are_capped():
    long_text = "x" * (cellfuncs.CELL_TEXT_LIMIT + 1)
    capped = cellfuncs.cell(lambda: long_text)()
    assert capped.startswith(cellfuncs.ERROR_MARK) and "32,767" in capped
    assert cellfuncs.cell(lambda: "y" * cellfuncs.CELL_TEXT_LIMIT)() == "y" * cellfuncs.CELL_TEXT_LIMIT
