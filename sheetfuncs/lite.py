"""The cell functions for xlwings Lite (Excel's browser-based Python, Pyodide).

Paste ``from sheetfuncs.lite import *`` into the add-in's ``main.py`` (with
``sheetfuncs`` in its requirements): every SF_ function is then registered
with xlwings' ``@func``/``@arg`` decorators, generated from the same metadata
as the classic xlwings wrappers (``sheetfuncs.cells``), without the hidden
``caller`` (xlwings Lite has none, so parameters come from the ``params``
range only).  Pyodide has neither python-flint nor (unless loaded) sqlite3,
and no timer signals: the engine imports without them, and under Pyodide the
time bound and the on-disk result store are switched off (their environment
variables, unless set).  Excel shows the functions under the add-in's
namespace (e.g. ``NAMESPACE.SF_INVERSE``), so books written for the classic
route need their formulas renamed there.
"""
from __future__ import annotations

import os
import sys

if sys.platform == "emscripten":                       # Pyodide
    os.environ.setdefault("SHEETFUNCS_TIMEOUT", "0")    # no SIGALRM timers in the browser
    os.environ.setdefault("SHEETFUNCS_CACHE", "off")    # no lasting file store there

from . import cellfuncs as _cf  # noqa: E402
from .cells import wrapper as _wrapper  # noqa: E402

#: the functions as registered for xlwings Lite, by name
LITE_FUNCTIONS = {}
for _info in _cf.catalogue():
    LITE_FUNCTIONS[_info.name] = globals()[_info.name] = _wrapper(_info, with_caller=False)
del _info

__all__ = sorted(LITE_FUNCTIONS)
