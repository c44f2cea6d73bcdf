"""sheetfuncs cell functions for LibreOffice Calc: the UNO add-in component.

This file runs inside LibreOffice's own Python, which may lack NumPy, SymPy
and sheetfuncs, so it uses the standard library and pyuno only.  Every call
is forwarded as one JSON line to a long-lived sheetfuncs worker process
(``python -m sheetfuncs.calcext.worker``) started from the interpreter
recorded when the extension was built (``worker.json`` beside this file).
The worker is started when Calc first loads the add-in, restarted when it
dies, and a cell shows ``#SF! ...`` with the reason when it cannot answer.

Built into the .oxt by ``sheetfuncs.calcext.build``; the methods of the
add-in interface are made from ``functions.json`` beside this file.
"""
import json
import os
import re
import sys
import threading
import time

import uno
import unohelper
from com.sun.star.lang import XServiceInfo, XServiceName
from com.sun.star.task import XJob

HERE = os.path.dirname(os.path.abspath(__file__))


def _read_json(name):
    with open(os.path.join(HERE, name), encoding="utf-8") as fh:
        return json.load(fh)


def _log(message):
    """A line in the file named by $SHEETFUNCS_CALC_LOG (diagnostics; off when unset)."""
    path = os.environ.get("SHEETFUNCS_CALC_LOG")
    if path:
        try:
            with open(path, "a", encoding="utf-8") as fh:
                fh.write("%s %s\n" % (time.strftime("%H:%M:%S"), message))
        except OSError:
            pass


SPEC = _read_json("functions.json")
sys.path.insert(0, os.path.join(HERE, "pythonpath"))      # the loader does this too
from sheetfuncs_calc_client import Worker  # noqa: E402  (stdlib only, tested apart)
ERROR_MARK = SPEC["error_mark"]
XFunctions = uno.getClass(SPEC["interface"])   # the IDL interface, from sheetfuncs.rdb


def _plain(value):
    """A UNO argument as JSON: numbers, texts, None, and ranges as lists of rows."""
    if isinstance(value, (tuple, list)):
        return [_plain(v) for v in value]
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    return str(value)


def _to_calc(value):
    """A worker answer as the rows Calc takes (a single value is one row of one)."""
    if not isinstance(value, list):
        value = [[value]]
    return tuple(tuple(_cell(c) for c in row) for row in value)


def _cell(c):
    if isinstance(c, str):
        return c
    if c is None:
        return ""
    if isinstance(c, (int, float)) and not isinstance(c, bool):
        return float(c)
    return str(c)


def _document_names(doc):
    """Workbook-level defined names that point at one cell holding a number (as fill reads them)."""
    out = {}
    if doc is None:
        return out
    try:
        ranges = doc.getPropertyValue("NamedRanges")
    except Exception:  # noqa: BLE001 - no document: no names
        return out
    for name in ranges.getElementNames():
        try:
            cells = ranges.getByName(name).getReferredCells()
            if cells is None:
                continue
            addr = cells.getRangeAddress()
            if addr.StartColumn != addr.EndColumn or addr.StartRow != addr.EndRow:
                continue
            value = cells.getDataArray()[0][0]
        except Exception:  # noqa: BLE001 - names to formulas or constants are no parameters
            continue
        if isinstance(value, float):
            out[name] = value
    return out


_WORKER = None
_WORKER_LOCK = threading.Lock()


def worker():
    global _WORKER
    with _WORKER_LOCK:
        if _WORKER is None:
            _WORKER = Worker(_read_json("worker.json"), ERROR_MARK,
                             on_ready=lambda sec: _log("worker ready %.3f s after its start" % sec))
        return _WORKER


class Functions(unohelper.Base, XFunctions, XServiceName, XServiceInfo):
    """The add-in object Calc creates (metadata for the wizard: CalcAddIns.xcu)."""

    def __init__(self, ctx=None):
        self.ctx = ctx
        try:
            worker().start()          # start early: the worker imports while the book loads
        except Exception:  # noqa: BLE001 - the first call reports why
            pass

    # XServiceName
    def getServiceName(self):
        return SPEC["service"]

    # XServiceInfo
    def getImplementationName(self):
        return SPEC["implementation"]

    def supportsService(self, name):
        return name in self.getSupportedServiceNames()

    def getSupportedServiceNames(self):
        return (SPEC["service"], "com.sun.star.sheet.AddIn")


def _method(name, nargs):
    def method(self, *args):
        visible, doc = args[:nargs], (args[nargs] if len(args) > nargs else None)
        try:
            names = _document_names(doc)
            return _to_calc(worker().call(name, [_plain(a) for a in visible], names))
        except Exception as exc:  # noqa: BLE001 - a cell shows every failure as text
            return (("%s extension error (%s: %s)" % (ERROR_MARK, type(exc).__name__, exc),),)
    method.__name__ = name
    return method


for _name, _nargs in SPEC["functions"].items():
    setattr(Functions, _name, _method(_name, _nargs))


# ---------------------------------------------------------------- .xlsx names
# LibreOffice 7.4 neither binds a name stored in an .xlsx file to an add-in through its
# compatibility name nor writes that name back (newer versions do, from CalcAddIns.xcu).
# So the extension does both itself (a job run on document events, Jobs.xcu): after a book is opened, SF_ formulas whose name did not bind are entered again by their display
# name; after it is saved as .xlsx, the long programmatic names in the file are written back
# as the SF_ names.
_UNBOUND = re.compile(r"(?<![\w.])([A-Za-z]{2}_[A-Za-z0-9_]+)(\s*\()")
_FORMULA_CELLS = 16            # com.sun.star.sheet.CellFlags.FORMULA
_XLSX_FILTERS = ("Calc MS Excel 2007 XML", "Calc Office Open XML", "Calc MS Excel 2007 VBA XML")


def _rebind_formula(formula, known):
    def fix(m):
        name = m.group(1).upper()
        return name + m.group(2) if name in known else m.group(0)
    return _UNBOUND.sub(fix, formula)


def rebind(doc):
    """Enter again the SF_ formulas whose names did not bind on load; returns how many."""
    if doc is None or not doc.supportsService("com.sun.star.sheet.SpreadsheetDocument"):
        return 0
    known = set(SPEC["functions"])
    prefix = SPEC["prefix"].lower()
    changed = 0
    was_modified = doc.isModified()
    doc.lockControllers()
    try:
        for sheet in doc.Sheets:
            found = sheet.queryContentCells(_FORMULA_CELLS)
            for addr in found.getRangeAddresses():
                block = sheet.getCellRangeByPosition(addr.StartColumn, addr.StartRow,
                                                     addr.EndColumn, addr.EndRow)
                for r, row in enumerate(block.getFormulaArray()):
                    for c, formula in enumerate(row):
                        if not formula.startswith("=") or prefix not in formula.lower():
                            continue
                        new = _rebind_formula(formula, known)
                        if new != formula:
                            try:
                                block.getCellByPosition(c, r).setFormula(new)
                                changed += 1
                            except Exception:  # noqa: BLE001 - e.g. part of an array formula
                                pass
    finally:
        doc.unlockControllers()
    if changed and not was_modified:
        doc.setModified(False)            # same formulas as in the file: nothing to save
    return changed


def short_names_in_xlsx(path):
    """Write the programmatic add-in names in a saved .xlsx back as the SF_ names."""
    import zipfile
    long_name = re.compile(re.escape(SPEC["service"] + "."), re.I)
    with zipfile.ZipFile(path) as z:
        items = [(info, z.read(info.filename)) for info in z.infolist()]
    changed = False
    out = []
    for info, data in items:
        name = info.filename
        if name.startswith("xl/") and name.endswith(".xml") and "sharedStrings" not in name:
            text = data.decode("utf-8")
            new = long_name.sub("", text)
            if new != text:
                data, changed = new.encode("utf-8"), True
        out.append((info, data))
    if not changed:
        return False
    tmp = path + ".sf-part"
    with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as z:
        for info, data in out:
            z.writestr(info, data)
    os.replace(tmp, path)
    return True


def on_document_event(name, doc):
    """After a book is opened: rebind; after it is saved as .xlsx: short names in the file."""
    if name in ("OnLoadFinished", "onDocumentOpened", "OnLoad"):
        count = rebind(doc)
        _log("%s %s: %d formulas entered again" % (name, doc.getURL(), count))
    elif name in ("OnSaveDone", "OnSaveAsDone"):
        filt = {v.Name: v.Value for v in doc.getArgs()}.get("FilterName", "")
        url = doc.getURL()
        if filt in _XLSX_FILTERS and url.startswith("file:"):
            done = short_names_in_xlsx(uno.fileUrlToSystemPath(url))
            _log("%s %s: names shortened: %s" % (name, url, done))


class DocumentJob(unohelper.Base, XJob, XServiceInfo):
    """Run by LibreOffice on the document events listed in Jobs.xcu."""

    def __init__(self, ctx=None):
        self.ctx = ctx

    def execute(self, args):
        try:
            env = {v.Name: v.Value for v in ({a.Name: a.Value for a in args}.get("Environment") or ())}
            doc = env.get("Model")
            if doc is not None:
                on_document_event(env.get("EventName", ""), doc)
        except Exception as exc:  # noqa: BLE001 - a document event must never break loading or saving
            _log("document event failed: %s: %s" % (type(exc).__name__, exc))
        return None

    def getImplementationName(self):
        return SPEC["job_implementation"]

    def supportsService(self, name):
        return name in self.getSupportedServiceNames()

    def getSupportedServiceNames(self):
        return (SPEC["job_service"],)


g_ImplementationHelper = unohelper.ImplementationHelper()
g_ImplementationHelper.addImplementation(Functions, SPEC["implementation"],
                                         (SPEC["service"], "com.sun.star.sheet.AddIn"))
g_ImplementationHelper.addImplementation(DocumentJob, SPEC["job_implementation"], (SPEC["job_service"],))
