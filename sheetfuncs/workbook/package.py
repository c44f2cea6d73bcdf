"""Low-level access to an .xlsx/.xlsm zip package: write cached results in place.

``write_results`` copies the package member by member (same order, same
compression) and changes only the ``<c>`` elements it is asked to, in the sheet
XML that holds them, plus ``<calcPr fullCalcOnLoad>`` in the workbook part.
Everything else -- shapes, charts, VBA, extensions -- is copied unchanged, which
a load-and-save through openpyxl would not do.

How values are cached (chosen so that LibreOffice, which by default never
recalculates an OOXML file on load, shows them):

* numbers: ``<v>repr</v>`` without ``t``; booleans as 1/0; NaN/inf as the text
  ``NONFINITE_TEXT``;
* text in a formula cell: ``t="str"`` + ``<v>``; text in a constant cell: an
  inline string (``t="inlineStr"``), so sharedStrings.xml is never touched;
* ``None``: no cached value.

Known limits (measured with LibreOffice 7.4): it recomputes array, shared and
volatile formulas and any cell cached as an error, boolean or empty text, so
such cells show #NAME? for our functions there whatever is cached.  A cell of
a shared group is therefore rewritten as a plain formula when its own formula
text is given (``CellWrite.own_formula``); a group must be rewritten whole.

calcChain.xml is kept: it lists formula cells, and we never turn a formula
cell into a constant (that is refused), so every entry stays valid; a formula
written into a new cell is merely missing from the chain, which is allowed.
"""
from __future__ import annotations

import io
import math
import numbers
import os
import posixpath
import re
import shutil
import tempfile
import zipfile
import zlib
from bisect import bisect_left
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable

from lxml import etree

from ..errors import WorkbookError
from .refs import column_letters as _col_letters

__all__ = ["CellWrite", "Package", "read_package", "write_results", "defined_names", "NONFINITE_TEXT"]

#: cached text written for NaN / infinity
NONFINITE_TEXT = "SF! not a finite number"
MAX_FILE_BYTES = 1 << 30        # refuse packages above 1 GiB
MAX_XML_BYTES = 512 << 20       # refuse to parse a single XML part above 512 MiB
MAX_UNPACKED_BYTES = 1 << 30    # refuse packages whose parts inflate to more than 1 GiB in all
BOMB_MIN_BYTES = 32 << 20       # a part above 32 MiB that inflates more than
BOMB_RATIO = 200                # 200 times its compressed size is refused as a zip bomb
MAX_TEXT = 32767                # longest cell text Excel accepts
MAX_ROW, MAX_COL = 1_048_576, 16_384
#: temp files are ``TEMP_PREFIX + name[:40] + ".PID.RANDOM.tmp"`` next to the output, so a
#: later run can tell (by the process id) which ones a killed run left behind
TEMP_PREFIX = ".~"

_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ENCRYPTED_STREAM = "EncryptedPackage".encode("utf-16-le")
_REF_RE = re.compile(r"^\$?([A-Za-z]{1,3})\$?([0-9]{1,7})$")
_BAD_XML_CHARS = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")
# a DOCTYPE must come before the root element, so looking at the start of a part is enough
_DOCTYPE_WINDOW = 1 << 16
_DOCTYPE = re.compile(rb"<!DOCTYPE", re.IGNORECASE)
_DOCTYPE16 = re.compile("<!DOCTYPE".encode("utf-16-le").replace(b"\0", b"\0?"), re.IGNORECASE)
_CELL_TAG = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?c[\s>/]")
_PARSER = etree.XMLParser(resolve_entities=False, no_network=True, load_dtd=False)


@dataclass(frozen=True)
class CellWrite:
    """One cell to write.

    ``formula=None, constant=False``: cache ``value`` in the cell's existing
    formula (the cell must hold one).  ``formula="..."`` (without ``=``): write
    this formula plus the cached value.  ``constant=True``: write a plain
    constant (spilled array cells); refused on a cell that holds a formula.
    Missing ``<row>``/``<c>`` elements are created in order; a style ``s`` is kept.
    """

    sheet: str
    ref: str
    value: float | int | str | bool | None
    formula: str | None = None
    constant: bool = False
    #: the cell's own formula text; when the cell belongs to a shared formula group
    #: (as Excel saves filled-down columns) it is rewritten as this plain formula,
    #: because LibreOffice recomputes shared formulas and would show #NAME? for ours
    own_formula: str | None = None


# ---------------------------------------------------------------- reading

class Package:
    """An opened workbook package (held in memory).  Use ``read_package``."""

    def __init__(self, data: bytes, file: str):
        self.file = file
        self._data = data
        try:
            self._zip = zipfile.ZipFile(io.BytesIO(data))
        except (zipfile.BadZipFile, zipfile.LargeZipFile, ValueError, OSError) as e:
            raise WorkbookError(_not_a_zip_reason(data, e), file=file) from None
        self._infos = self._zip.infolist()
        names = [i.filename for i in self._infos]
        if len(set(names)) != len(names):
            raise WorkbookError("damaged package (a zip member appears twice)", file=file)
        self._lower = {n.lower(): n for n in names}
        self._check_sizes()
        self._check_doctypes()
        self.workbook_part = self._find_workbook_part()
        self._sheets = self._read_sheet_list()

    # -- public
    def sheet_names(self) -> list[str]:
        """Sheet titles in workbook order (worksheets and chart sheets)."""
        return [name for name, _kind, _path in self._sheets]

    def sheet_xml_path(self, sheet: str) -> str:
        """Zip member of the worksheet titled ``sheet`` (exact, else case-insensitive)."""
        name, kind, path = self._sheet_entry(sheet)
        if kind != "worksheet":
            raise WorkbookError(f"sheet '{name}' is a {kind}, not a worksheet", file=self.file)
        if path is None:
            raise WorkbookError(f"the XML part of sheet '{name}' is missing", file=self.file)
        return path

    def worksheet_parts(self) -> list[str]:
        return [path for _name, kind, path in self._sheets if kind == "worksheet" and path]

    def count_cells(self, stop: int | None = None) -> int:
        """Cells stored in the worksheets (``<c>`` elements), counted on the compressed
        stream in 1 MiB chunks, so memory stays flat whatever the size; counting ends
        early once above ``stop``."""
        total = 0
        for member in self.worksheet_parts():
            try:
                with self._zip.open(self._info(member)) as fh:
                    tail = b""
                    while True:
                        chunk = fh.read(1 << 20)
                        if not chunk:
                            break
                        data = tail + chunk
                        # a tag holds one "<", at its start: tags before the last "<" are whole
                        cut = data.rfind(b"<")
                        if cut < 0:
                            tail = b""
                            continue
                        total += len(_CELL_TAG.findall(data, 0, cut))
                        tail = data[cut:]
                        if len(tail) > 4096:          # no tag is that long: not a cell tag
                            tail = b""
                        if stop is not None and total > stop:
                            return total
                    total += len(_CELL_TAG.findall(tail))
            except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as e:
                raise WorkbookError(f"damaged package: cannot read '{member}' ({e})", file=self.file) from None
        return total

    def member_names(self) -> list[str]:
        """Zip member names in package order."""
        return [i.filename for i in self._infos]

    def read(self, member: str) -> bytes:
        """Uncompressed bytes of one zip member."""
        info = self._info(member)
        try:
            return self._zip.read(info)
        except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as e:
            raise WorkbookError(f"damaged package: cannot read '{member}' ({e})", file=self.file) from None
        except RuntimeError:
            raise WorkbookError(f"zip member '{member}' is encrypted", file=self.file) from None
        except NotImplementedError as e:
            raise WorkbookError(f"zip member '{member}': {e}", file=self.file) from None

    def xml(self, member: str) -> etree._Element:
        """Parsed XML root of one member (entities are not resolved)."""
        info = self._info(member)
        if info.file_size > MAX_XML_BYTES:
            raise WorkbookError(f"part '{member}' is too large ({info.file_size} bytes)", file=self.file)
        data = self.read(member)
        if _DOCTYPE.search(data[:_DOCTYPE_WINDOW]) or _DOCTYPE16.search(data[:2 * _DOCTYPE_WINDOW]):
            raise WorkbookError(f"part '{member}' has a document type declaration (<!DOCTYPE>), "
                                "which workbooks never use; refused (nothing written)", file=self.file)
        try:
            root = etree.fromstring(data, _PARSER)
        except etree.XMLSyntaxError as e:
            raise WorkbookError(f"damaged XML in '{member}': {e}", file=self.file) from None
        if root.getroottree().docinfo.doctype:
            raise WorkbookError(f"part '{member}' has a document type declaration (<!DOCTYPE>), "
                                "which workbooks never use; refused (nothing written)", file=self.file)
        return root

    # -- internals
    def _check_doctypes(self) -> None:
        """Refuse a DOCTYPE in any XML part before anything (openpyxl included) parses it:
        entity definitions are how XML bombs and entity leaks work, and no workbook needs one."""
        for info in self._infos:
            if not info.filename.lower().endswith((".xml", ".rels", ".vml")) or info.is_dir():
                continue
            try:
                with self._zip.open(info) as fh:
                    head = fh.read(2 * _DOCTYPE_WINDOW)
            except (zipfile.BadZipFile, zlib.error, EOFError, OSError, RuntimeError, NotImplementedError):
                continue                # reported as damaged when the part is needed
            if _DOCTYPE.search(head) or _DOCTYPE16.search(head):
                raise WorkbookError(f"part '{info.filename}' has a document type declaration "
                                    "(<!DOCTYPE>), which workbooks never use; refused (nothing written)",
                                    file=self.file)

    def _check_sizes(self) -> None:
        """Refuse parts that inflate far beyond the package before anything inflates them.
        zipfile never gives more than a member's declared size (and checks it), so the
        declared sizes bound what reading can cost."""
        total = 0
        for info in self._infos:
            total += info.file_size
            if info.file_size > MAX_XML_BYTES:
                raise WorkbookError(f"part '{info.filename}' inflates to {info.file_size:,} bytes, above "
                                    f"the limit of {MAX_XML_BYTES:,}; refused (nothing written)",
                                    file=self.file)
            if (info.file_size > BOMB_MIN_BYTES
                    and info.file_size > BOMB_RATIO * max(info.compress_size, 1)):
                raise WorkbookError(f"part '{info.filename}' inflates {info.file_size // max(info.compress_size, 1):,}"
                                    f" times ({info.compress_size:,} -> {info.file_size:,} bytes), like a "
                                    "zip bomb; refused (nothing written)", file=self.file)
        if total > MAX_UNPACKED_BYTES:
            raise WorkbookError(f"the package inflates to {total:,} bytes, above the limit of "
                                f"{MAX_UNPACKED_BYTES:,}; refused (nothing written)", file=self.file)

    def _info(self, member: str) -> zipfile.ZipInfo:
        real = self._lower.get(member.lower())
        if real is None:
            raise WorkbookError(f"package part '{member}' is missing", file=self.file)
        return self._zip.getinfo(real)

    def _has(self, member: str) -> bool:
        return member.lower() in self._lower

    def _rels(self, part: str) -> dict[str, tuple[str, str]]:
        """Relationships of ``part``: id -> (type, target member path)."""
        folder, base = posixpath.split(part)
        rels_path = posixpath.join(folder, "_rels", base + ".rels")
        if not self._has(rels_path):
            return {}
        out = {}
        for rel in self.xml(rels_path):
            if not isinstance(rel.tag, str) or etree.QName(rel).localname != "Relationship":
                continue
            if rel.get("TargetMode") == "External":
                continue
            target = rel.get("Target", "")
            if target.startswith("/"):
                target = target[1:]
            else:
                target = posixpath.join(folder, target)
            target = posixpath.normpath(target).lstrip("/")
            real = self._lower.get(target.lower(), target)
            out[rel.get("Id", "")] = (rel.get("Type", ""), real)
        return out

    def _find_workbook_part(self) -> str:
        if self._has("mimetype") and self._has("content.xml"):
            raise WorkbookError("an OpenDocument (.ods) file, not an .xlsx workbook", file=self.file)
        for rtype, target in self._rels("").values():
            if rtype.endswith("/officeDocument"):
                if target.lower().endswith(".bin"):
                    raise WorkbookError("binary .xlsb workbooks are not supported; save as .xlsx", file=self.file)
                if not self._has(target):
                    break
                return target
        raise WorkbookError("not a spreadsheet package (no workbook part)", file=self.file)

    def _read_sheet_list(self) -> list[tuple[str, str, str | None]]:
        root = self.xml(self.workbook_part)
        if etree.QName(root).localname != "workbook":
            raise WorkbookError("not a spreadsheet (the main part is not a workbook)", file=self.file)
        rels = self._rels(self.workbook_part)
        sheets = []
        for el in root.iter("{*}sheet"):
            rid = next((v for k, v in el.attrib.items()
                        if etree.QName(k).localname == "id" and etree.QName(k).namespace), None)
            rtype, target = rels.get(rid, ("", None))
            kind = rtype.rsplit("/", 1)[-1] or "sheet"
            kind = {"chartsheet": "chart sheet", "dialogsheet": "dialog sheet",
                    "xlMacrosheet": "macro sheet"}.get(kind, kind)
            sheets.append((el.get("name", ""), kind, target if target and self._has(target) else None))
        return sheets

    def _sheet_entry(self, sheet: str):
        for entry in self._sheets:
            if entry[0] == sheet:
                return entry
        folded = [e for e in self._sheets if e[0].casefold() == str(sheet).casefold()]
        if len(folded) == 1:
            return folded[0]
        have = ", ".join(f"'{n}'" for n in self.sheet_names())
        raise WorkbookError(f"no sheet named '{sheet}' (sheets: {have})", file=self.file)


def _not_a_zip_reason(data: bytes, err) -> str:
    if data.startswith(_OLE_MAGIC):
        if _ENCRYPTED_STREAM in data:
            return "the workbook is password-protected (encrypted); remove the password and save again"
        return "an old binary workbook (.xls) or other OLE file; save it as .xlsx"
    if not data:
        return "the file is empty"
    if data.startswith(b"PK"):
        return f"damaged zip package ({err})"
    return "not an .xlsx/.xlsm workbook (not a zip package)"


def read_package(path_or_bytes) -> Package:
    """Open a workbook package from a path or bytes; WorkbookError if unusable."""
    if isinstance(path_or_bytes, Package):
        return path_or_bytes
    if isinstance(path_or_bytes, (bytes, bytearray, memoryview)):
        return Package(bytes(path_or_bytes), "<bytes>")
    path = Path(path_or_bytes)
    file = str(path)
    try:
        size = path.stat().st_size
        if path.is_dir():
            raise WorkbookError("is a folder, not a workbook file", file=file)
        if size > MAX_FILE_BYTES:
            raise WorkbookError(f"file is too large ({size} bytes)", file=file)
        data = path.read_bytes()
    except FileNotFoundError:
        raise WorkbookError("file not found", file=file) from None
    except OSError as e:
        raise WorkbookError(f"cannot read the file ({e.strerror or e})", file=file) from None
    return Package(data, file)


# ---------------------------------------------------------------- cell refs

def _parse_ref(ref) -> tuple[int, int]:
    m = _REF_RE.match(str(ref).strip())
    if not m:
        raise ValueError(f"'{ref}' is not a cell reference like B7")
    col = 0
    for ch in m.group(1).upper():
        col = col * 26 + ord(ch) - 64
    row = int(m.group(2))
    if not (1 <= row <= MAX_ROW and 1 <= col <= MAX_COL):
        raise ValueError(f"'{ref}' is outside the sheet")
    return row, col


def _ref(row: int, col: int) -> str:
    return f"{_col_letters(col)}{row}"


def _encode(value):
    """('n', text) | ('s', text) | (None, None) for a cached value."""
    if value is None:
        return None, None
    if isinstance(value, bool):
        return "n", "1" if value else "0"
    if isinstance(value, numbers.Integral):
        return "n", str(int(value))
    if isinstance(value, numbers.Real):
        x = float(value)
        return ("n", repr(x)) if math.isfinite(x) else ("s", NONFINITE_TEXT)
    if isinstance(value, str):
        if len(value) > MAX_TEXT:
            raise ValueError(f"text is {len(value)} characters, above the cell limit of {MAX_TEXT}")
        if _BAD_XML_CHARS.search(value):
            raise ValueError("text contains control characters that a workbook cannot store")
        return "s", value
    raise ValueError(f"cannot store a value of type {type(value).__name__}")


# ---------------------------------------------------------------- sheet patching

class _Sheet:
    """Index of one worksheet's rows and cells, created and patched lazily."""

    def __init__(self, root, file: str, member: str, sheet: str):
        self.root, self.file, self.member, self.sheet = root, file, member, sheet
        self.ns = etree.QName(root).namespace
        sd = root.find(self.q("sheetData"))
        if sd is None:
            sd = etree.Element(self.q("sheetData"))
            after = [root.find(self.q(n)) for n in ("sheetPr", "dimension", "sheetViews", "sheetFormatPr", "cols")]
            after = [a for a in after if a is not None]
            if after:
                after[-1].addnext(sd)
            else:
                root.insert(0, sd)
        self.sd = sd
        self.row_nums: list[int] = []
        self.row_els: list = []
        last = 0
        implicit = False
        for el in sd.iterchildren(self.q("row")):
            r = el.get("r")
            last = int(r) if r and r.isdigit() else last + 1
            implicit = implicit or not r
            self.row_nums.append(last)
            self.row_els.append(el)
        self.rows_implicit = implicit
        self.cells: dict[int, tuple[list[int], list, bool]] = {}
        self.created: list[tuple[int, int]] = []
        self.rows_created = 0

    def q(self, local: str) -> str:
        return f"{{{self.ns}}}{local}" if self.ns else local

    def _row(self, row: int, create: bool):
        i = bisect_left(self.row_nums, row)
        if i < len(self.row_nums) and self.row_nums[i] == row:
            return self.row_els[i]
        if not create:
            return None
        if self.rows_implicit:      # new rows would shift rows without r=: make them explicit
            for n, el in zip(self.row_nums, self.row_els):
                el.set("r", str(n))
            self.rows_implicit = False
        el = etree.Element(self.q("row"), r=str(row))
        if i < len(self.row_els):
            self.row_els[i].addprevious(el)
        elif self.row_els:
            self.row_els[-1].addnext(el)
        else:
            self.sd.insert(0, el)
        self.row_nums.insert(i, row)
        self.row_els.insert(i, el)
        self.rows_created += 1
        return el

    def _row_cells(self, row: int, row_el):
        if row not in self.cells:
            cols, els, last, implicit = [], [], 0, False
            for c in row_el.iterchildren(self.q("c")):
                r = c.get("r")
                if r:
                    try:
                        last = _parse_ref(r)[1]
                    except ValueError:
                        raise WorkbookError(f"damaged sheet XML: bad cell reference '{r}'",
                                            file=self.file, cell=f"'{self.sheet}'") from None
                else:
                    last, implicit = last + 1, True
                cols.append(last)
                els.append(c)
            self.cells[row] = (cols, els, implicit)
        return self.cells[row]

    def cell(self, row: int, col: int, create: bool):
        row_el = self._row(row, create)
        if row_el is None:
            return None
        cols, els, implicit = self._row_cells(row, row_el)
        i = bisect_left(cols, col)
        if i < len(cols) and cols[i] == col:
            return els[i]
        if not create:
            return None
        if implicit:
            for n, c in zip(cols, els):
                c.set("r", _ref(row, n))
            self.cells[row] = (cols, els, False)
        c = etree.Element(self.q("c"), r=_ref(row, col))
        if i < len(els):
            els[i].addprevious(c)
        elif els:
            els[-1].addnext(c)
        else:
            row_el.insert(0, c)
        cols.insert(i, col)
        els.insert(i, c)
        self.created.append((row, col))
        spans = row_el.get("spans")
        if spans:
            try:
                nums = [int(x) for part in spans.split() for x in part.split(":")]
                row_el.set("spans", f"{min(nums + [col])}:{max(nums + [col])}")
            except ValueError:
                del row_el.attrib["spans"]
        return c

    def set_value(self, c, value, as_constant: bool) -> None:
        for child in list(c):
            if child.tag in (self.q("v"), self.q("is")):
                c.remove(child)
        c.attrib.pop("vm", None)     # value metadata belonged to the old value
        kind, text = _encode(value)
        f = c.find(self.q("f"))
        pos = (c.index(f) + 1) if f is not None else 0
        if kind is None:
            c.attrib.pop("t", None)
        elif kind == "n":
            c.attrib.pop("t", None)
            v = etree.Element(self.q("v"))
            v.text = text
            c.insert(pos, v)
        elif as_constant:
            c.set("t", "inlineStr")
            is_ = etree.Element(self.q("is"))
            t = etree.SubElement(is_, self.q("t"))
            t.text = text
            if text != text.strip() or "\n" in text:
                t.set("{http://www.w3.org/XML/1998/namespace}space", "preserve")
            c.insert(pos, is_)
        else:
            c.set("t", "str")
            v = etree.Element(self.q("v"))
            v.text = text
            c.insert(pos, v)

    def update_dimension(self) -> None:
        dim = self.root.find(self.q("dimension"))
        if dim is None or not self.created:
            return
        rows = [r for r, _ in self.created]
        cols = [c for _, c in self.created]
        parts = (dim.get("ref") or "").split(":")
        try:
            corners = [_parse_ref(p) for p in parts if p]
        except ValueError:
            corners = []
        rows += [r for r, _ in corners]
        cols += [c for _, c in corners]
        lo, hi = _ref(min(rows), min(cols)), _ref(max(rows), max(cols))
        dim.set("ref", lo if lo == hi else f"{lo}:{hi}")


def _serialize(root) -> bytes:
    """UTF-8 with an Excel-style declaration; top-level comments/PIs are kept."""
    tree = root.getroottree()
    decl = '<?xml version="1.0" encoding="UTF-8"'
    decl += ' standalone="yes"?>' if tree.docinfo.standalone else "?>"
    return decl.encode() + b"\n" + etree.tostring(tree, encoding="UTF-8", xml_declaration=False)


def _patch_sheet(pkg: Package, member: str, sheet: str, writes: list, counts: dict) -> bytes:
    sh = _Sheet(pkg.xml(member), pkg.file, member, sheet)
    unshared: set = set()
    for w, row, col in writes:
        where = f"'{sheet}'!{_ref(row, col)}"
        try:
            kind, _ = _encode(w.value)
        except ValueError as e:
            raise WorkbookError(str(e), file=pkg.file, cell=where) from None
        creating = w.constant or w.formula is not None
        c = sh.cell(row, col, create=creating)
        f = c.find(sh.q("f")) if c is not None else None
        if w.constant:
            if f is not None:
                raise WorkbookError("cell holds a formula; not overwriting it with a constant",
                                    file=pkg.file, cell=where)
            sh.set_value(c, w.value, as_constant=True)
            counts["constants"] += 1
        elif w.formula is not None:
            text = w.formula[1:] if w.formula.startswith("=") else w.formula
            if not text.strip() or _BAD_XML_CHARS.search(text):
                raise WorkbookError("empty or unprintable formula", file=pkg.file, cell=where)
            if f is not None and f.get("t") in ("shared", "array", "dataTable"):
                raise WorkbookError(f"cell is part of a {f.get('t')} formula; not replacing it",
                                    file=pkg.file, cell=where)
            if f is None:
                f = etree.Element(sh.q("f"))
                c.insert(0, f)
            f.text = text
            sh.set_value(c, w.value, as_constant=False)
            counts["formulas"] += 1
        else:
            if f is None:
                raise WorkbookError("cell has no formula to cache a value for",
                                    file=pkg.file, cell=where)
            if f.get("t") == "shared" and w.own_formula:
                text = w.own_formula[1:] if w.own_formula.startswith("=") else w.own_formula
                if not text.strip() or _BAD_XML_CHARS.search(text):
                    raise WorkbookError("empty or unprintable formula", file=pkg.file, cell=where)
                unshared.add(f.get("si"))
                plain = etree.Element(sh.q("f"))
                plain.text = text
                c.replace(f, plain)
                counts["unshared"] = counts.get("unshared", 0) + 1
            sh.set_value(c, w.value, as_constant=False)
            counts["cached_values"] += 1
        if kind == "s" and isinstance(w.value, float):
            counts["nonfinite"] += 1
    _check_shared_groups(sh, unshared, pkg.file)
    sh.update_dimension()
    counts["cells_created"] += len(sh.created)
    counts["rows_created"] += sh.rows_created
    return _serialize(sh.root)


def _check_shared_groups(sh, unshared: set, file: str) -> None:
    """A shared group whose master was rewritten must have no member left behind."""
    if not unshared:
        return
    masters, members = set(), {}
    for f in sh.root.iter(sh.q("f")):
        if f.get("t") == "shared":
            si = f.get("si")
            members.setdefault(si, f)
            if (f.text or "").strip() or f.get("ref"):
                masters.add(si)
    for si in unshared:
        if si in members and si not in masters:
            c = members[si].getparent()
            raise WorkbookError("part of a shared formula group would lose its master formula",
                                file=file, cell=f"'{sh.sheet}'!{c.get('r') or '?'}")


def _patch_calc(pkg: Package, calc_off: bool = True, names: dict | None = None,
                names_prefix: str = "") -> bytes | None:
    """workbook.xml with fullCalcOnLoad removed and, when ``names`` is given,
    every defined name starting with ``names_prefix`` replaced by ``names``
    (written hidden)."""
    root = pkg.xml(pkg.workbook_part)
    changed = False
    if calc_off:
        for calc in root.iter("{*}calcPr"):
            if calc.get("fullCalcOnLoad") not in (None, "0", "false"):
                del calc.attrib["fullCalcOnLoad"]
                changed = True
    if names is not None and names_prefix:
        ns = root.nsmap.get(None) or "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
        container = root.find(f"{{{ns}}}definedNames")
        if container is not None:
            for el in list(container):
                if (el.get("name") or "").startswith(names_prefix):
                    container.remove(el)
                    changed = True
        if names:
            if container is None:
                container = etree.Element(f"{{{ns}}}definedNames")
                sheets = root.find(f"{{{ns}}}sheets")
                if sheets is None:
                    raise WorkbookError("workbook.xml has no <sheets>", file=pkg.file)
                sheets.addnext(container)
            for name, text in sorted(names.items()):
                el = etree.SubElement(container, f"{{{ns}}}definedName", name=name, hidden="1")
                el.text = text
            changed = True
    return _serialize(root) if changed else None


def defined_names(pkg: Package, prefix: str = "") -> dict[str, str]:
    """Workbook-scoped defined names starting with ``prefix``: name -> text."""
    root = pkg.xml(pkg.workbook_part)
    out = {}
    for el in root.iter("{*}definedName"):
        name = el.get("name") or ""
        if name.startswith(prefix) and el.get("localSheetId") is None:
            out[name] = el.text or ""
    return out


# ---------------------------------------------------------------- writing

def write_results(src, dst, writes: Iterable[CellWrite], *, calc_full_on_load_off: bool = True,
                  names: dict | None = None, names_prefix: str = "") -> dict:
    """Copy package ``src`` to ``dst`` with ``writes`` applied; atomic; returns counts.

    On any problem a WorkbookError (naming file and cell) is raised and ``dst``
    is left as it was.
    """
    pkg = read_package(src)
    dst = Path(dst)
    counts = dict(cells=0, cached_values=0, formulas=0, constants=0, nonfinite=0,
                  cells_created=0, rows_created=0, sheets_patched=0,
                  full_calc_on_load_removed=False, members=len(pkg._infos))
    by_member: dict[str, tuple[str, list]] = {}
    seen: set[tuple[str, int, int]] = set()
    for w in writes:
        if not isinstance(w, CellWrite):
            raise WorkbookError(f"expected a CellWrite, got {type(w).__name__}", file=pkg.file)
        member = pkg.sheet_xml_path(w.sheet)
        title = pkg._sheet_entry(w.sheet)[0]
        try:
            row, col = _parse_ref(w.ref)
        except ValueError as e:
            raise WorkbookError(str(e), file=pkg.file, cell=f"'{title}'!{w.ref}") from None
        where = f"'{title}'!{_ref(row, col)}"
        if w.constant and w.formula is not None:
            raise WorkbookError("a write cannot be both a constant and a formula", file=pkg.file, cell=where)
        if (member, row, col) in seen:
            raise WorkbookError("cell is written twice", file=pkg.file, cell=where)
        seen.add((member, row, col))
        by_member.setdefault(member, (title, []))[1].append((w, row, col))
        counts["cells"] += 1

    patched: dict[str, bytes] = {}
    for member, (title, items) in by_member.items():
        patched[member] = _patch_sheet(pkg, member, title, items, counts)
    counts["sheets_patched"] = len(patched)
    if calc_full_on_load_off or names is not None:
        wb = _patch_calc(pkg, calc_full_on_load_off, names, names_prefix)
        if wb is not None:
            patched[pkg.workbook_part] = wb
            counts["full_calc_on_load_removed"] = calc_full_on_load_off
    _write_zip(pkg, dst, patched)
    return counts


def _write_zip(pkg: Package, dst: Path, patched: dict[str, bytes]) -> None:
    folder = dst.parent if str(dst.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{dst.name[:40]}.{os.getpid()}.",
                                   suffix=".tmp", dir=folder)
    except OSError as e:
        raise WorkbookError(f"cannot write in this folder ({e.strerror or e})", file=str(dst)) from None
    try:
        with os.fdopen(fd, "wb") as fh:
            with zipfile.ZipFile(fh, "w") as zout:
                zout.comment = pkg._zip.comment
                for info in pkg._infos:
                    zi = zipfile.ZipInfo(info.filename, info.date_time)
                    zi.compress_type = info.compress_type
                    zi.external_attr = info.external_attr
                    zi.create_system = info.create_system
                    zi.comment = info.comment
                    if info.filename in patched:
                        zout.writestr(zi, patched[info.filename])
                        continue
                    _copy_member(pkg, info, zi, zout)
            fh.flush()
            os.fsync(fh.fileno())
        with zipfile.ZipFile(tmp) as check:
            bad = check.testzip()
            if bad is not None or len(check.infolist()) != len(pkg._infos):
                raise WorkbookError(f"written package failed its check ({bad})", file=str(dst))
        try:
            old = dst.stat() if dst.exists() else None
            mode = (old or Path(pkg.file).stat()).st_mode & 0o7777
        except OSError:
            old, mode = None, 0o644
        os.chmod(tmp, mode)
        if old is not None and hasattr(os, "chown"):
            try:                    # keep the owner of a file we replace (possible as root)
                os.chown(tmp, old.st_uid, old.st_gid)
            except OSError:
                pass
        os.replace(tmp, dst)
    except WorkbookError:
        _unlink(tmp)
        raise
    except OSError as e:
        _unlink(tmp)
        raise WorkbookError(f"cannot write the file ({e.strerror or e})", file=str(dst)) from None
    except BaseException:
        _unlink(tmp)
        raise


def _copy_member(pkg: Package, info, zi, zout) -> None:
    try:
        with pkg._zip.open(info) as fi, zout.open(zi, "w", force_zip64=info.file_size > (1 << 31)) as fo:
            shutil.copyfileobj(fi, fo, 1 << 20)
    except (zipfile.BadZipFile, zlib.error, EOFError) as e:
        raise WorkbookError(f"damaged package: cannot read '{info.filename}' ({e})", file=pkg.file) from None
    except RuntimeError:
        raise WorkbookError(f"zip member '{info.filename}' is encrypted", file=pkg.file) from None
    except NotImplementedError as e:
        raise WorkbookError(f"zip member '{info.filename}': {e}", file=pkg.file) from None


def _unlink(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass
