"""The xlwings Lite route (Pyodide): no python-flint, no sqlite3 and none of fill's libraries.

Run in a fresh interpreter with those modules blocked by a meta-path finder, as in the browser.
"""
from __future__ import annotations

import json
import subprocess
import sys

import pytest

BLOCKER = r"""
import sys
class _Blocked:
    names = ("flint", "sqlite3", "_sqlite3", "openpyxl", "lxml", "tqdm")
    def find_spec(self, name, path=None, target=None):
        if name.split(".")[0] in self.names:
            raise ModuleNotFoundError(f"No module named '{name}' (blocked for this test)")
        return None
sys.meta_path.insert(0, _Blocked())
"""

RUN = BLOCKER + r"""
import json, math
import sheetfuncs.lite as lite
out = {
    "response": lite.SF_RESPONSE("1/(s+2)", 0.5),
    "overshoot": lite.SF_FIGURE("4/(s^2+1.2s+4)", "overshoot"),
    "inverse": lite.SF_INVERSE("1/(s^2+4)"),
    "poles": lite.SF_POLES("1/(s^2+2s+5)"),
    "named": lite.SF_RESPONSE("1/(s+a)", 0.5, "", [["a", 2.0]]),
    "loaded": [m for m in ("flint", "sqlite3", "openpyxl", "lxml", "tqdm") if m in sys.modules],
    "names": sorted(lite.LITE_FUNCTIONS),
}
print(json.dumps(out))
"""


def _run(code):
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert res.returncode == 0, res.stderr[-2000:]
    return json.loads(res.stdout.strip().splitlines()[-1])


def test_cell_functions_without_flint_sqlite_and_fill_libraries():
    from sheetfuncs import cellfuncs
    out = _run(RUN)
    assert out["loaded"] == []
    assert out["names"] == sorted(cellfuncs.FUNCTIONS)
    # 1/(s+a) <-> exp(-a t) (Laplace table)
    assert out["response"] == pytest.approx(2.718281828459045 ** -1, rel=1e-12)
    assert out["named"] == pytest.approx(2.718281828459045 ** -1, rel=1e-12)
    # second-order overshoot 100 exp(-pi zeta / sqrt(1 - zeta^2)), zeta = 1.2/(2*2) = 0.3 (textbook)
    import math
    zeta = 0.3
    assert out["overshoot"] == pytest.approx(100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta ** 2)), rel=1e-9)
    assert out["inverse"] == "0.5*sin(2*t)"                    # 2/(s^2+4) <-> sin(2t), halved
    mode = out["poles"][1]                                     # one mode: the pair -1 +- 2j
    assert (mode[2], mode[3]) == (-1.0, 2.0)                   # roots of s^2+2s+5: sigma, omega_d


def test_lite_functions_have_no_caller():
    # xlwings Lite passes no calling range; its decorators (xlwings.pro, licensed) are not run here
    import inspect
    from sheetfuncs import cellfuncs, lite
    for info in cellfuncs.catalogue():
        f = lite.LITE_FUNCTIONS[info.name]
        assert list(inspect.signature(f).parameters) == [a.name for a in info.args]
        assert f.__doc__ == info.summary
