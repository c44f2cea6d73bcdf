"""Drive a real LibreOffice through python3-uno: run by LibreOffice's Python (not pytest's).

``/usr/bin/python3 unodriver.py PROFILE_DIR`` starts ``soffice
--headless`` on that user profile, connects over a named pipe and then
answers one JSON command a line on stdin with one JSON line on stdout
(see ``handle``).  It ends soffice when stdin closes.  Standard library and
pyuno only: this interpreter has no sheetfuncs, NumPy or pytest.
"""
import json
import os
import subprocess
import sys
import time
import traceback
import uuid

import uno
from com.sun.star.beans import PropertyValue

SOFFICE = os.environ.get("SOFFICE") or "soffice"


def prop(name, value):
    p = PropertyValue()
    p.Name, p.Value = name, value
    return p


class Office:
    def __init__(self, profile):
        self.pipe = "sfdrv" + uuid.uuid4().hex[:12]
        self.proc = subprocess.Popen(
            [SOFFICE, "-env:UserInstallation=" + uno.systemPathToFileUrl(os.path.abspath(profile)),
             "--headless", "--invisible", "--norestore", "--nolockcheck", "--nodefault", "--nologo",
             "--accept=pipe,name=%s;urp;StarOffice.ComponentContext" % self.pipe],
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            start_new_session=True)
        local = uno.getComponentContext()
        resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
        deadline = time.monotonic() + 120
        while True:
            try:
                self.ctx = resolver.resolve("uno:pipe,name=%s;urp;StarOffice.ComponentContext" % self.pipe)
                break
            except Exception:
                if time.monotonic() > deadline or self.proc.poll() is not None:
                    raise RuntimeError("soffice did not accept a connection (exit %s)" % self.proc.poll())
                time.sleep(0.3)
        self.smgr = self.ctx.ServiceManager
        self.desktop = self.smgr.createInstanceWithContext("com.sun.star.frame.Desktop", self.ctx)
        self.doc = None

    def close_doc(self):
        if self.doc is not None:
            try:
                self.doc.close(True)
            except Exception:
                pass
            self.doc = None

    def quit(self):
        self.close_doc()
        try:
            self.desktop.terminate()
        except Exception:
            pass
        try:
            self.proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            os.killpg(self.proc.pid, 9)

    # -- commands
    def open(self, path):
        self.close_doc()
        t0 = time.perf_counter()
        url = uno.systemPathToFileUrl(os.path.abspath(path))
        for _ in range(40):     # right after start-up soffice may load nothing: ask again
            self.doc = self.desktop.loadComponentFromURL(url, "_blank", 0, (prop("Hidden", True),))
            if self.doc is not None:
                break
            time.sleep(0.5)
        if self.doc is None:
            raise RuntimeError("LibreOffice could not open %s" % path)
        return {"seconds": time.perf_counter() - t0}

    def sheet(self, name):
        return self.doc.Sheets.getByName(name)

    def cells(self, formulas_only=False):
        out = []
        for sheet in self.doc.Sheets:
            cur = sheet.createCursor()
            cur.gotoEndOfUsedArea(False)
            addr = cur.getRangeAddress()
            rows = sheet.getCellRangeByPosition(0, 0, addr.EndColumn, addr.EndRow)
            formulas = rows.getFormulaArray()
            for r, row in enumerate(formulas):
                for c, f in enumerate(row):
                    if formulas_only and not f.startswith("="):
                        continue
                    if not f:
                        continue
                    cell = sheet.getCellByPosition(c, r)
                    out.append({"sheet": sheet.Name, "row": r, "col": c, "formula": f,
                                "local": cell.FormulaLocal if f.startswith("=") else f,
                                "value": cell.getValue(), "string": cell.getString(),
                                "error": cell.getError(),
                                "result_type": int(cell.FormulaResultType2) if f.startswith("=") else -1})
        return out

    def new(self):
        self.close_doc()
        self.doc = self.desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0,
                                                     (prop("Hidden", True),))
        return {"sheet": self.doc.Sheets.getByIndex(0).Name}

    def set(self, sheet, row, col, value):
        cell = self.sheet(sheet).getCellByPosition(col, row)
        if isinstance(value, str) and value.startswith("="):
            cell.setFormula(value)
        elif isinstance(value, str):
            cell.setString(value)
        else:
            cell.setValue(float(value))

    def define(self, name, sheet, row, col, local=False):
        """A defined name for one cell: workbook-level, or sheet-level when local."""
        from com.sun.star.table import CellAddress
        sh = self.sheet(sheet)
        addr = CellAddress(sh.getRangeAddress().Sheet, col, row)
        ref = "$%s.$%s$%d" % (sheet, _col_letters(col), row + 1)
        target = sh.NamedRanges if local else self.doc.NamedRanges
        target.addNewByName(name, ref, addr, 0)

    def calc(self, full=False):
        t0 = time.perf_counter()
        if full:
            self.doc.calculateAll()
        else:
            self.doc.calculate()
        return {"seconds": time.perf_counter() - t0}

    def save(self, path, filter_name="Calc MS Excel 2007 XML"):
        """Save As (the document then lives at path, as after File > Save As)."""
        self.doc.storeAsURL(uno.systemPathToFileUrl(os.path.abspath(path)),
                            (prop("FilterName", filter_name), prop("Overwrite", True)))

    def functions(self, prefix):
        descs = self.smgr.createInstanceWithContext("com.sun.star.sheet.FunctionDescriptions", self.ctx)
        out = []
        for i in range(descs.getCount()):
            d = {p.Name: p.Value for p in descs.getByIndex(i)}
            if not str(d.get("Name", "")).upper().startswith(prefix):
                continue
            out.append({"name": d["Name"], "description": d.get("Description", ""),
                        "category": d.get("Category"),
                        "arguments": [{"name": a.Name, "description": a.Description,
                                       "optional": bool(a.IsOptional)} for a in d.get("Arguments", ())]})
        return out

    def extensions(self):
        mgr = self.ctx.getValueByName("/singletons/com.sun.star.deployment.PackageInformationProvider")
        return [list(x) for x in mgr.getExtensionList()]


def _col_letters(c):
    out = ""
    c += 1
    while c:
        c, r = divmod(c - 1, 26)
        out = chr(65 + r) + out
    return out


def handle(office, req):
    cmd = req.pop("cmd")
    if cmd == "open":
        return office.open(req["path"])
    if cmd == "new":
        return office.new()
    if cmd == "cells":
        return office.cells(req.get("formulas_only", False))
    if cmd == "set":
        office.set(req["sheet"], req["row"], req["col"], req["value"])
        return None
    if cmd == "define":
        office.define(req["name"], req["sheet"], req["row"], req["col"], req.get("local", False))
        return None
    if cmd == "calc":
        return office.calc(req.get("full", False))
    if cmd == "save":
        office.save(req["path"], req.get("filter", "Calc MS Excel 2007 XML"))
        return None
    if cmd == "close":
        office.close_doc()
        return None
    if cmd == "functions":
        return office.functions(req.get("prefix", "SF_"))
    if cmd == "extensions":
        return office.extensions()
    if cmd == "python":
        return {"executable": sys.executable, "version": sys.version}
    raise ValueError("unknown command %r" % cmd)


def main():
    office = Office(sys.argv[1])
    out = sys.stdout
    out.write(json.dumps({"ready": True}) + "\n")
    out.flush()
    try:
        for line in sys.stdin:
            if not line.strip():
                continue
            try:
                answer = {"ok": handle(office, json.loads(line))}
            except Exception as exc:
                answer = {"error": "%s: %s" % (type(exc).__name__, exc), "trace": traceback.format_exc()}
            out.write(json.dumps(answer) + "\n")
            out.flush()
    finally:
        office.quit()


if __name__ == "__main__":
    main()
