"""The fast core gives the same answers with and without python-flint (the
WebAssembly Python has no flint): the pure-Python backend is run in a
subprocess with SHEETFUNCS_NO_FLINT=1 and compared with the flint backend."""
import json
import os
import subprocess
import sys

import pytest

CASES = ["(s+3)/((s+1)^2 (s^2+2s+5))", "1/(s(s^2+620s+4000))", "(s+2)/(s^3+3s^2+4s+5)",
         "2.5exp(-1.2s)/(s(8s+1))", "(s^3+1)/(s^2+3s+2)", "1/((s^2+0.4s+1)^2(s+3)^2)",
         "0.25 exp(-4s)/s/(1 + 0.25 exp(-4s)/s)"]

CODE = """
import json, sys
import sheetfuncs as sf
from sheetfuncs.engine import qpoly
out = {"backend": qpoly.BACKEND, "flint_loaded": "flint" in sys.modules}
for c in json.loads(sys.argv[1]):
    out[c] = {"dict": sf.invert(c).to_dict(),
              "y": list(sf.sample(c, [0.5, 3.0, 9.0], input="step").y)}
print(json.dumps(out))
"""


def run(no_flint: bool) -> dict:
    env = dict(os.environ)
    env.pop("SHEETFUNCS_NO_FLINT", None)
    if no_flint:
        env["SHEETFUNCS_NO_FLINT"] = "1"
    proc = subprocess.run([sys.executable, "-c", CODE, json.dumps(CASES)], capture_output=True,
                          text=True, timeout=300, env=env)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def test_pure_python_backend_matches_flint():
    a, b = run(False), run(True)
    assert a["backend"] == "flint" and b["backend"] == "python" and not b["flint_loaded"]
    for c in CASES:
        da, db = a[c]["dict"], b[c]["dict"]
        assert da["method"] == db["method"]
        if da["f_t"] is not None and "numeric" not in da["method"]:
            assert da["f_t"] == db["f_t"], c            # exact route: the same exact text
        assert len(da["terms"]) == len(db["terms"])
        for ta, tb in zip(da["terms"], db["terms"]):
            assert ta["order"] == tb["order"]
            for x, y in zip(ta["pole"] + ta["coefficient"], tb["pole"] + tb["coefficient"]):
                assert x == pytest.approx(y, rel=1e-12, abs=1e-300)
        for ya, yb in zip(a[c]["y"], b[c]["y"]):
            assert ya == pytest.approx(yb, rel=1e-11, abs=1e-14)
