"""Calculation-workbook templates: four worked scenarios as .xlsx files.

``python -m sheetfuncs.templates [OUTDIR]`` writes them (default ``workbooks/``)
with a README.  The files hold formulas only; ``sheetfuncs fill`` computes the
``SF_`` cells.  Output is deterministic: fixed document properties and zip
entry times, so a rebuild gives the same bytes.

Layout rules the builders keep: plain formulas only (no array or shared
formulas), every spilling table has empty room below/right (13 x 7 for tables,
10 x 3 for figure blocks), every sheet prints on one page.
"""
from __future__ import annotations

import datetime as _dt
import io
import re
import sys
import zipfile
from collections.abc import Callable
from pathlib import Path

from openpyxl import Workbook
from openpyxl.chart import Reference, ScatterChart, Series
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.worksheet.pagebreak import Break
from openpyxl.worksheet.properties import PageSetupProperties

FIXED_TIME = _dt.datetime(2024, 1, 1, 0, 0, 0)
CAUTION = ("CAUTION - analysis aid only: these results support engineering judgement; "
           "safety-relevant designs follow local codes and licensed review.")
FILL_NOTE = ("Cells with SF_ formulas are computed by 'sheetfuncs fill BOOK.xlsx -o OUT.xlsx' "
             "(or live in Excel with the sheetfuncs add-in); native formulas compute themselves.")
WIDTHS = {"A": 42, "B": 24, "C": 14, "D": 26, "E": 24, "F": 16, "G": 13, "H": 13, "I": 13, "J": 9}
COLS = "ABCDEFGHIJ"                   # the printed width of the Calculation sheet
TABLE_ROOM = (13, 10)                 # rows x columns of a table held one formula per cell
BLOCK_ROOM = (11, 4)                  # ... and of an SF_FIGURES block
SCI = "0.0E+00"                       # tiny deviations (self-check)
ENG = "##0.00E+0"                     # engineering notation: exponent a multiple of 3 (424.63E-6)
#: scientific formats of the builders shown in engineering notation instead
_ENGINEERING = {"0.000E+00": ENG, "0.00E+00": ENG, "0.0000E+00": ENG}
LINE = 15                             # points per line of wrapped text

# Response sheet: start/step cells, header row, first data row, number of rows
R_START, R_STEP, R_HEAD, R_FIRST, N_ROWS = "B3", "B4", 6, 7, 201

_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=14)
_CAUTION_FILL = PatternFill("solid", fgColor="FFF2CC")
_SECTION_FILL = PatternFill("solid", fgColor="DDEBF7")
_INPUT_FILL = PatternFill("solid", fgColor="E2EFDA")
_WRAP = Alignment(wrap_text=True, vertical="top")
_CENTER = Alignment(horizontal="center", vertical="top")
_TOP = Alignment(vertical="top")
_RIGHT = Alignment(horizontal="right", vertical="top")          # numbers and complex texts alike
_LEFT = Alignment(horizontal="left", vertical="top")
_THIN = Side(style="thin", color="A6A6A6")
_BOX = Border(left=_THIN, right=_THIN, top=_THIN, bottom=_THIN)

#: styles of the cells a table spills into, by column offset from its anchor
#: (a style is a number format, an Alignment, or a tuple of both); the header row is bold and wrapped
POLES_STYLE = {0: _LEFT, 2: ENG, 3: ENG, 4: "0.0000", 5: ENG, 6: ENG, 7: ENG, 8: ENG, 9: _CENTER}
PARTFRAC_STYLE = {0: _WRAP, 1: _WRAP, 2: _TOP, 3: ("General", _RIGHT), 4: _CENTER, 5: ("General", _RIGHT)}
BLOCK_STYLE = {1: ENG, 2: _CENTER}
#: rows of a spilled table that get room for wrapped text (header, then data rows), in lines
HEAD_LINES, BODY_LINES, BODY_TALL_ROWS = 2, 3, 4


def _split_args(text: str) -> list[str]:
    """Top-level comma-separated arguments of a formula's call (quotes and brackets kept)."""
    out, depth, quote, cur = [], 0, False, ""
    for ch in text:
        if ch == '"':
            quote = not quote
        elif not quote and ch == "(":
            depth += 1
        elif not quote and ch == ")":
            depth -= 1
        elif not quote and depth == 0 and ch == ",":
            out.append(cur)
            cur = ""
            continue
        cur += ch
    out.append(cur)
    return [a.strip() for a in out] if text.strip() else []


def cell_form(formula: str, row: int, col: int) -> str:
    """'=SF_POLES(G,P)' -> '=SF_POLES(G,P,"",row,col)': the per-cell form of a table function."""
    from .cellfuncs import describe
    m = re.fullmatch(r"=(SF_[A-Z_]+)\((.*)\)", formula.strip(), re.S)
    if not m:
        raise ValueError(f"not a table function call: {formula}")
    name, args = m.group(1), _split_args(m.group(2))
    names = [a.name for a in describe(name).args]
    at = names.index("row")
    if len(args) > at:
        raise ValueError(f"{formula}: arguments past row/col")
    args += ['""'] * (at - len(args))
    return f"={name}({','.join(args + [str(row), str(col)])})"


def _abs(cell: str) -> str:
    """'B14' -> '$B$14'."""
    m = re.fullmatch(r"([A-Z]+)(\d+)", cell)
    return f"${m.group(1)}${m.group(2)}"


# ------------------------------------------------------------------ Calculation sheet
class _Calc:
    """Writes the Calculation sheet top to bottom and records where things are."""

    def __init__(self, wb: Workbook, title: str, purpose: str):
        self.wb, self.ws = wb, wb.active
        self.ws.title = "Calculation"
        self.layout: list[tuple[str, str]] = []     # (what, where) for the README and the report
        self.figures: list[dict] = []
        ws = self.ws
        ws["A1"], ws["A1"].font = title, _TITLE
        ws["A2"] = purpose
        ws["A3"] = CAUTION
        ws["A3"].font, ws["A3"].fill, ws["A3"].alignment = _BOLD, _CAUTION_FILL, _WRAP
        ws.merge_cells(f"A3:{COLS[-1]}3")
        ws.row_dimensions[3].height = 30
        ws["A4"], ws["A4"].font = FILL_NOTE, Font(italic=True, size=9)
        for col, w in WIDTHS.items():
            ws.column_dimensions[col].width = w
        self.row = 6

    def note(self, what: str, where: str) -> str:
        self.layout.append((what, where))
        return where

    def section(self, text: str, right: str | None = None) -> int:
        r = self.row
        for col in COLS:
            self.ws[f"{col}{r}"].fill = _SECTION_FILL
        self.ws[f"A{r}"], self.ws[f"A{r}"].font = text, _BOLD
        if right:
            self.ws[f"E{r}"], self.ws[f"E{r}"].font = right, _BOLD
        self.row += 1
        return r

    def heads(self, *names: str) -> None:
        for col, name in zip("ABCDEFG", names):
            self.ws[f"{col}{self.row}"], self.ws[f"{col}{self.row}"].font = name, _BOLD
        self.row += 1

    def inputs(self, how: str, items, *, names: bool = False, unit_col: bool = True) -> str:
        """Inputs block; items: (name, value, unit, meaning, number format).
        Returns the name/value range 'A8:B11'."""
        first = self.row + 2
        rng = f"A{first}:B{first + len(items) - 1}"
        self.section(f"Inputs ({how.format(range=rng)})")
        self.heads(*(("name", "value", "unit", "meaning") if unit_col else ("name [unit]", "value", "meaning")))
        ws = self.ws
        for name, value, unit, meaning, fmt in items:
            r = self.row
            ws[f"A{r}"], ws[f"B{r}"] = name, value
            ws[f"B{r}"].number_format, ws[f"B{r}"].fill, ws[f"B{r}"].border = \
                _ENGINEERING.get(fmt, fmt), _INPUT_FILL, _BOX
            if unit_col:
                ws[f"C{r}"], ws[f"D{r}"] = unit, meaning
            else:
                ws[f"C{r}"] = meaning
            if names:
                self.wb.defined_names[name] = DefinedName(name, attr_text=f"Calculation!$B${r}")
            self.row += 1
        self.row += 1
        return rng

    def text(self, label: str, content: str, what: str | None = None, *, height: float = 32) -> str:
        """A label and a long text (expression or formula) over B:G, wrapped; returns '$B$n'."""
        r, ws = self.row, self.ws
        ws[f"A{r}"], ws[f"B{r}"] = label, content
        ws[f"A{r}"].alignment = ws[f"B{r}"].alignment = _WRAP
        ws.merge_cells(f"B{r}:{COLS[-1]}{r}")
        ws.row_dimensions[r].height = height
        self.row += 1
        if what:
            self.note(what, f"B{r}")
        return f"$B${r}"

    def value(self, label: str, formula, unit: str = "", fmt: str = "General",
              what: str | None = None) -> str:
        r, ws = self.row, self.ws
        ws[f"A{r}"], ws[f"B{r}"], ws[f"C{r}"] = label, formula, unit
        ws[f"B{r}"].number_format = _ENGINEERING.get(fmt, fmt)
        ws[f"A{r}"].alignment = _WRAP
        ws[f"B{r}"].alignment = ws[f"C{r}"].alignment = _TOP
        lines = -(-len(label) // int(WIDTHS["A"] * 1.05))               # characters per line, roughly
        if lines > 1:
            ws.row_dimensions[r].height = lines * LINE
        self.row += 1
        if what:
            self.note(what, f"B{r}")
        return f"B{r}"

    def figure(self, label: str, formula: str, unit: str, fmt: str, **check) -> str:
        cell = self.value(label, formula, unit, fmt)
        self.figures.append({"sheet": "Calculation", "cell": cell, "label": label, "unit": unit, **check})
        return cell

    def spill(self, what: str, formula: str, *, col: str = "A", at: int | None = None,
              room: tuple = TABLE_ROOM, style: dict | None = None) -> int:
        """A table as one per-cell formula (row, col of the table) over its room; returns the top row.

        The array form (one anchor that spills) stays for interactive use; a book holds the
        per-cell form so that Excel shows no spill error, LibreOffice leaves no stale
        neighbours, and a program without the functions shows the cached values."""
        r = self.row if at is None else at
        rows, cols = room
        for dr in range(rows):          # one formula per cell: recomputed in place by any program
            for dc in range(cols):
                self.ws.cell(row=r + dr, column=ord(col) - 64 + dc).value = cell_form(formula, dr + 1, dc + 1)
        for off in range(cols):                # header row: bold, over its column's alignment
            cell = self.ws.cell(row=r, column=ord(col) - 64 + off)
            cell.font = _BOLD
            parts = (style or {}).get(off, ())
            parts = parts if isinstance(parts, tuple) else (parts,)
            side = next((a.horizontal for a in parts if isinstance(a, Alignment) and a.horizontal), None)
            if side is None and any(isinstance(a, str) and a != "General" for a in parts):
                side = "right"                                       # a number column
            cell.alignment = Alignment(wrap_text=cols > 4, vertical="top", horizontal=side)
        for off, fmt in (style or {}).items():
            for rr in range(r + 1, r + rows):
                cell = self.ws.cell(row=rr, column=ord(col) - 64 + off)
                for f in (fmt if isinstance(fmt, tuple) else (fmt,)):
                    if isinstance(f, Alignment):
                        cell.alignment = f
                    else:
                        cell.number_format = f
        if cols > 4 and self.ws.row_dimensions[r].height is None:   # a table (not a figures block)
            self.ws.row_dimensions[r].height = HEAD_LINES * LINE
            if any(isinstance(v, Alignment) and v.wrap_text for v in (style or {}).values()):
                for rr in range(r + 1, r + 1 + BODY_TALL_ROWS):
                    self.ws.row_dimensions[rr].height = BODY_LINES * LINE
        if at is None:
            self.row += rows
        end = chr(ord(col) + cols - 1)
        self.note(what, f"{col}{r}:{end}{r + rows - 1} (one cell of the table per formula)")
        return r

    def key_figures(self, title: str, block_title: str, block: str, specs) -> None:
        """Single SF_FIGURE cells in A:C and an SF_FIGURES block at E, side by side.
        specs: (label, formula, unit, number format, check dict)."""
        self.section(title, block_title)
        top = self.row
        for label, formula, unit, fmt, check in specs:
            self.figure(label, formula, unit, fmt, **check)
        self.spill("figures block (SF_FIGURES)", block, col="E", at=top, room=BLOCK_ROOM, style=BLOCK_STYLE)
        self.row = max(self.row, top + BLOCK_ROOM[0]) + 1
        self.ws.row_breaks.append(Break(id=self.row - 1))          # the tables start a new page


def _fit_page(ws, landscape: bool = False) -> None:
    """A4, one page wide.  Calculation: landscape, as many pages tall as it needs, print area
    A:J.  Response: portrait, the header row repeated on every page (a 201-row table on ~5
    pages, not squeezed onto one).  Chart: one page."""
    ws.sheet_properties.pageSetUpPr = PageSetupProperties(fitToPage=True)
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 1 if ws.title == "Chart" else 0
    if ws.title == "Calculation":
        landscape = True
        ws.print_area = f"A1:{COLS[-1]}{ws.max_row}"
    if ws.title == "Response":
        last = chr(64 + max(ws.max_column, 6))
        ws.print_title_rows = f"{R_HEAD}:{R_HEAD}"
        ws.print_area = f"A1:{last}{ws.max_row}"                            # room for the title
        note = str(ws["A2"].value or "")
        width = sum(ws.column_dimensions[c].width or 8.43 for c in "ABCDEFGHIJ"[:ord(last) - 64])
        ws.merge_cells(f"A2:{last}2")                                        # the note wraps on the page
        ws["A2"].alignment = _WRAP
        ws.row_dimensions[2].height = LINE * max(1, -(-len(note) // int(width)))
    ws.page_setup.orientation = "landscape" if landscape else "portrait"
    ws.page_setup.paperSize = ws.PAPERSIZE_A4
    ws.print_options.gridLines = False
    ws.page_margins.left = ws.page_margins.right = 0.5
    ws.page_margins.top = ws.page_margins.bottom = 0.6
    ws.oddFooter.center.text = "&F, sheet &A"


# ------------------------------------------------------------------ Response and Chart
def _response(wb: Workbook, title: str, note: str, start, step, columns) -> tuple[int, dict]:
    """Sheet 'Response': t in A from start/step, then one column per (head, formula, format);
    formula is a str.format template with {r} (the row) and {t} (the row's t cell).
    Returns the last data row and {column: head}."""
    ws = wb.create_sheet("Response")
    ws["A1"], ws["A1"].font = title, _TITLE
    ws["A2"] = note
    for cell, label, value in ((R_START, "start time", start), (R_STEP, "time step", step)):
        r = cell[1:]
        ws[f"A{r}"], ws[cell], ws[f"C{r}"] = label, value, "s"
        ws[cell].fill, ws[cell].border, ws[cell].number_format = _INPUT_FILL, _BOX, ENG
    ws.column_dimensions["A"].width = 14
    ws[f"A{R_HEAD}"], ws[f"A{R_HEAD}"].font = "t [s]", _BOLD
    for i, (head, _f, _fmt) in enumerate(columns):
        col = chr(ord("B") + i)
        ws[f"{col}{R_HEAD}"], ws[f"{col}{R_HEAD}"].font = head, _BOLD
        ws.column_dimensions[col].width = max(16, len(head) + 2)
    for k in range(N_ROWS):
        r = R_FIRST + k
        ws[f"A{r}"] = f"={_abs(R_START)}+{k}*{_abs(R_STEP)}"
        ws[f"A{r}"].number_format = ENG
        for i, (_h, formula, fmt) in enumerate(columns):
            ws.cell(row=r, column=2 + i, value=formula.format(r=r, t=f"A{r}")).number_format = fmt
    ws.freeze_panes = f"A{R_FIRST}"
    _fit_page(ws)
    return R_FIRST + N_ROWS - 1, {chr(ord("B") + i): head for i, (head, _f, _fmt) in enumerate(columns)}


def _chart(wb: Workbook, title: str, x_title: str, y_title: str, series, last: int) -> None:
    """Sheet 'Chart' (second) with a scatter chart of Response columns ``series`` [(col, name)]."""
    ws = wb.create_sheet("Chart", 1)
    ws["A1"], ws["A1"].font = title, _TITLE
    resp = wb["Response"]
    ch = ScatterChart()
    ch.title, ch.style = title, 2
    ch.x_axis.title, ch.y_axis.title = x_title, y_title
    ch.x_axis.delete = ch.y_axis.delete = False
    ch.x_axis.number_format = ch.y_axis.number_format = "General"     # not the cells' formats
    ch.width, ch.height = 26, 15
    ch.legend.position = "b"
    x = Reference(resp, min_col=1, min_row=R_FIRST, max_row=last)
    for col, name in series:
        y = Reference(resp, min_col=ord(col) - 64, min_row=R_FIRST, max_row=last)
        s = Series(y, x, title=name)
        s.marker.symbol = "none"
        s.smooth = False
        s.graphicalProperties.line.width = 22000
        ch.series.append(s)
    ws.add_chart(ch, "A3")
    _fit_page(ws, landscape=True)


def _book(title: str) -> Workbook:
    wb = Workbook()
    p = wb.properties
    p.creator = p.lastModifiedBy = "sheetfuncs"
    p.title = title
    p.created = p.modified = FIXED_TIME
    return wb


def _info(c: _Calc, name: str, title: str, response: dict, sampled: tuple) -> dict:
    last, heads = sampled
    for col, spec in response.items():
        spec["head"] = heads[col]
    return {"name": name, "file": f"{name}.xlsx", "title": title, "figures": c.figures,
            "layout": c.layout, "response": {"sheet": "Response", "t": "A", "first_row": R_FIRST,
                                             "last_row": last, "y": response}}


def _step_specs(G: str, P: str, rows) -> list:
    """Key-figure specs for SF_FIGURE(G, key, "step", P); rows: (label, key, attr, unit, format)."""
    args = f",{P}" if P else ""
    return [(label, f'=SF_FIGURE({G},"{key}","step"{args})', unit, fmt,
             {"expr": G.replace("$", ""), "params": P.replace("$", "") or None, "input": "step", "attr": attr})
            for label, key, attr, unit, fmt in rows]


# ------------------------------------------------------------------ 1 RLC
def build_rlc() -> tuple[Workbook, dict]:
    """Series RLC network, capacitor voltage after a step of V volts."""
    title = "Series RLC network: capacitor voltage after a voltage step"
    wb = _book(title)
    c = _Calc(wb, title, "Purpose: voltage across C of a series R-L-C loop when the source "
                         "steps from 0 to V volts at t = 0 (capacitor initially uncharged).")
    rng = c.inputs("parameter range {range}: names in column A, values in column B", [
        ("R", 20.0, "ohm", "series resistance (coil + damping resistor)", "0.0"),
        ("L", 0.01, "H", "series inductance (10 mH)", "0.000"),
        ("C", 1.0e-5, "F", "capacitance (10 uF)", "0.00E+00"),
        ("V", 24.0, "V", "height of the source voltage step", "0.0")])
    c.note("parameter range (name, value; unit in C, meaning in D)", rng)
    P = ":".join(_abs(x) for x in rng.split(":"))
    c.section("Model")
    G = c.text("G(s) = V Vc(s)/Vin(s), driven by a unit step", "V/(L C s^2 + R C s + 1)",
               "G(s), network scaled by V (used with input 'step')")
    Y = c.text("Vc(s) after the step of V volts", "V/(s (L C s^2 + R C s + 1))", "Vc(s)")
    c.row += 1
    c.section("Results")
    c.text("vc(t) [V], t in s", f"=SF_INVERSE({Y},{P})", "vc(t) text (SF_INVERSE)")
    c.text("vc(t) as a native formula of a time in cell A7", f'=SF_SHEETFORMULA({Y},"A7",{P})',
           "native formula text (SF_SHEETFORMULA)", height=45)
    c.value("self-check (max deviation)", f"=SF_SELFCHECK({Y},{P})", "V", "0.0E+00", "self-check")
    c.text("stability of G(s)", f"=SF_STABILITY({G},{P})", "stability", height=16)
    c.row += 1
    c.key_figures("Key figures of the step response (2 % settling band)", "All figures (SF_FIGURES block)",
                  f'=SF_FIGURES({G},"step",{P})', _step_specs(G, P, [
                      ("final value", "final value", "final_value", "V", "0.000"),
                      ("peak value", "peak value", "peak_value", "V", "0.000"),
                      ("overshoot", "overshoot", "overshoot_percent", "%", "0.00"),
                      ("rise time (10-90 %)", "rise time", "rise_time", "s", "0.000E+00"),
                      ("peak time", "peak time", "peak_time", "s", "0.000E+00"),
                      ("settling time (2 %)", "settling time", "settling_time", "s", "0.000E+00")]))
    c.section("Partial fractions of Vc(s)")
    c.spill("partial-fraction table (SF_PARTFRAC)", f"=SF_PARTFRAC({Y},{P})", style=PARTFRAC_STYLE)
    c.section("Poles of G(s)")
    c.spill("poles table (SF_POLES)", f"=SF_POLES({G},{P})", style=POLES_STYLE)
    _fit_page(c.ws)
    sampled = _response(wb, "Sampled response: capacitor voltage vc(t)",
                     "t = start + k * step (k = 0 ... 200); vc by SF_RESPONSE of G(s) to a unit step.",
                     0.0, 5.0e-5,
                     [("vc [V]", f'=SF_RESPONSE(Calculation!{G},{{t}},"step",Calculation!{P})', "0.000000")])
    _chart(wb, "Capacitor voltage after the step of V volts", "time t [s]", "capacitor voltage vc [V]",
           [("B", "vc(t)")], sampled[0])
    return wb, _info(c, "rlc_step_response", title, {
        "B": {"expr": G.replace("$", ""), "params": rng, "input": "step"}}, sampled)


# ------------------------------------------------------------------ 2 mount
def build_mount() -> tuple[Workbook, dict]:
    """Equipment isolation mount released from an initial displacement (ODE route)."""
    title = "Isolation mount: free vibration after release"
    wb = _book(title)
    c = _Calc(wb, title, "Purpose: motion of a machine on a spring-damper mount, held at "
                         "xstart and released at t = 0: mass x'' + damp x' + stiff x = 0.")
    rng = c.inputs("DEFINED NAMES mass, damp, stiff, xstart, vstart: the value cells", [
        ("mass", 45.0, "kg", "mass carried by the mount", "0.0"),
        ("damp", 600.0, "N s/m", "viscous damping coefficient", "0.0"),
        ("stiff", 180000.0, "N/m", "spring stiffness (180 kN/m)", "0"),
        ("xstart", 0.005, "m", "displacement when released (5 mm)", "0.0000"),
        ("vstart", 0.0, "m/s", "velocity when released", "0.000")], names=True)
    first = int(rng.split(":")[0][1:])
    coeffs, init = f"$B${first}:$B${first + 2}", f"$B${first + 3}:$B${first + 4}"
    c.note("inputs (defined names on the value cells)", rng)
    # the inputs range is passed as well, so that spreadsheet programs see the dependency
    P = ":".join(_abs(x) for x in rng.split(":"))
    c.note("coefficients mass, damp, stiff (highest derivative first)", coeffs.replace("$", ""))
    c.note("initial values xstart, vstart", init.replace("$", ""))
    c.section("Model")
    H = c.text("H(s) = X(s)/F(s), force to displacement", "1/(mass s^2 + damp s + stiff)", "H(s)")
    X = c.text("X(s) of the free motion after release",
               "(mass xstart s + damp xstart + mass vstart)/(mass s^2 + damp s + stiff)", "X(s) of the release")
    c.row += 1
    c.section("Results")
    c.text("X(s) by the ODE route (SF_ODE part Y(s))", f'=SF_ODE({coeffs},{init},"","","Y(s)")',
           "X(s) by SF_ODE", height=16)
    c.text("x(t) [m] by the ODE route (SF_ODE)", f"=SF_ODE({coeffs},{init})", "x(t) by SF_ODE")
    c.text("x(t) [m] from X(s) (SF_INVERSE)", f"=SF_INVERSE({X},{P})", "x(t) text (SF_INVERSE)")
    c.text("x(t) as a native formula of a time in cell A7", f'=SF_SHEETFORMULA({X},"A7",{P})',
           "native formula text (SF_SHEETFORMULA)", height=45)
    c.value("self-check (max deviation)", f"=SF_SELFCHECK({X},{P})", "m", "0.0E+00", "self-check")
    c.row += 1
    h, x = H.replace("$", ""), X.replace("$", "")
    c.key_figures("Key figures", "Suddenly applied steady force (SF_FIGURES of H)", f'=SF_FIGURES({H},"step",{P})', [
        ("displacement at release (initial value)", f'=SF_FIGURE({X},"initial value","impulse",{P})', "m",
         "0.0000", {"expr": x, "params": None, "input": "impulse", "attr": "initial_value"}),
        *_step_specs(H, P, [
            ("static compliance 1/stiff (DC gain of H)", "dc gain", "dc_gain", "m/N", "0.000E+00"),
            ("overshoot under a suddenly applied force", "overshoot", "overshoot_percent", "%", "0.0"),
            ("settling time (2 %) under that force", "settling time", "settling_time", "s", "0.000")])])
    c.section("Poles of H(s): damping ratio in E, natural frequency in F (second data row)")
    pr = c.spill("poles table (SF_POLES)", f"=SF_POLES({H},{P})", style=POLES_STYLE)
    for col, label, attr, unit in (("E", "damping ratio (poles table)", "damping_ratio", ""),
                                   ("F", "natural frequency (poles table)", "natural_frequency", "rad/s")):
        c.figures.append({"sheet": "Calculation", "cell": f"{col}{pr + 1}", "label": label, "unit": unit,
                          "expr": h, "params": None, "input": "impulse", "attr": attr, "pole": 0})
    c.section("Partial fractions of X(s) (4 digits)")
    c.spill("partial-fraction table (SF_PARTFRAC)", f'=SF_PARTFRAC({X},{P},4)', style=PARTFRAC_STYLE)
    _fit_page(c.ws)
    sampled = _response(wb, "Sampled response: mount displacement x(t)",
                     "t = start + k * step (k = 0 ... 200); x by SF_ODE_AT from the coefficient "
                     "and initial-value ranges; x [mm] = x [m] * 1000.",
                     0.0, 0.005,
                     [("x [m]", f"=SF_ODE_AT(Calculation!{coeffs},Calculation!{init},{{t}})", "0.000000000"),
                      ("x [mm]", "=B{r}*1000", "0.0000")])
    _chart(wb, "Mount displacement after release", "time t [s]", "displacement x [mm]", [("C", "x(t)")],
           sampled[0])
    return wb, _info(c, "mount_release", title, {
        "B": {"expr": x, "params": None, "input": "impulse", "scale": 1.0},
        "C": {"expr": x, "params": None, "input": "impulse", "scale": 1000.0}}, sampled)


# ------------------------------------------------------------------ 3 dead time
def build_dead_time() -> tuple[Workbook, dict]:
    """Two-lag process with dead time, step in the controller output."""
    title = "Process with dead time: response to a controller output step"
    wb = _book(title)
    c = _Calc(wb, title, "Purpose: outlet temperature of a steam-heated exchanger after the "
                         "controller output steps by du at t = 0 (two lags plus transport delay).")
    rng = c.inputs("parameter range {range}: 'name [unit]' in column A, values in column B", [
        ("gain [degC/%]", 0.8, "", "process gain: outlet temperature per % valve", "0.00"),
        ("tau1 [s]", 90.0, "", "main lag (exchanger shell)", "0.0"),
        ("tau2 [s]", 25.0, "", "second lag (sensor well and valve)", "0.0"),
        ("theta [s]", 15.0, "", "dead time (transport delay)", "0.0"),
        ("du [%]", 5.0, "", "size of the controller output step", "0.0")], unit_col=False)
    c.note("parameter range ('name [unit]', value; meaning in C)", rng)
    P = ":".join(_abs(x) for x in rng.split(":"))
    c.section("Model")
    G = c.text("G(s) = du gain e^(-theta s)/((tau1 s + 1)(tau2 s + 1)), unit step in",
               "du gain exp(-theta s)/((tau1 s + 1)(tau2 s + 1))", "G(s) (used with input 'step')")
    Y = c.text("Y(s), temperature change after the step of du",
               "du gain exp(-theta s)/(s (tau1 s + 1)(tau2 s + 1))", "Y(s)")
    c.row += 1
    c.section("Results")
    c.text("y(t) [degC], t in s", f"=SF_INVERSE({Y},{P})", "y(t) text (SF_INVERSE)")
    c.text("y(t) as a native formula of a time in cell A7", f'=SF_SHEETFORMULA({Y},"A7",{P})',
           "native formula text (SF_SHEETFORMULA)", height=45)
    c.value("self-check (max deviation)", f"=SF_SELFCHECK({Y},{P})", "degC", "0.0E+00", "self-check")
    c.text("stability of G(s)", f"=SF_STABILITY({G},{P})", "stability", height=16)
    c.row += 1
    c.key_figures("Key figures of the step response (2 % band, times from the step)",
                  "All figures (SF_FIGURES block)", f'=SF_FIGURES({G},"step",{P})', _step_specs(G, P, [
                      ("final value", "final value", "final_value", "degC", "0.000"),
                      ("DC gain (final value per unit step)", "dc gain", "dc_gain", "degC", "0.000"),
                      ("rise time (10-90 %)", "rise time", "rise_time", "s", "0.0"),
                      ("settling time (2 %)", "settling time", "settling_time", "s", "0.0"),
                      ("overshoot", "overshoot", "overshoot_percent", "%", "0.00")]))
    c.section("Poles of G(s) (the delay adds none)")
    c.spill("poles table (SF_POLES)", f"=SF_POLES({G},{P})", style=POLES_STYLE)
    _fit_page(c.ws)
    sampled = _response(wb, "Sampled response: outlet temperature change y(t)",
                     "t = start + k * step (k = 0 ... 200); y by SF_RESPONSE of G(s) to a unit step.",
                     0.0, 3.0,
                     [("y [degC]", f'=SF_RESPONSE(Calculation!{G},{{t}},"step",Calculation!{P})', "0.000000")])
    _chart(wb, "Outlet temperature after the controller output step", "time t [s]",
           "temperature change y [degC]", [("B", "y(t)")], sampled[0])
    return wb, _info(c, "dead_time_process", title, {
        "B": {"expr": G.replace("$", ""), "params": rng, "input": "step"}}, sampled)


# ------------------------------------------------------------------ 4 slab
def build_slab() -> tuple[Workbook, dict]:
    """Slab heated on one face, far face insulated: numerical inversion (non-rational)."""
    title = "Slab heating: far-face temperature after a face temperature step"
    wb = _book(title)
    c = _Calc(wb, title, "Purpose: a slab of thickness thick, face x = 0 raised by dtemp at t = 0, "
                         "far face insulated; far-face rise vs the semi-infinite-solid estimate.")
    rng = c.inputs("DEFINED NAMES thick, alpha, dtemp: the value cells", [
        ("thick", 0.04, "m", "slab thickness L (40 mm concrete)", "0.000"),
        ("alpha", 5.0e-7, "m^2/s", "thermal diffusivity of the slab", "0.00E+00"),
        ("dtemp", 30.0, "K", "temperature step applied to face x = 0", "0.0")], names=True)
    c.note("inputs (defined names on the value cells)", rng)
    # the inputs range is passed as well, so that spreadsheet programs see the dependency
    P = ":".join(_abs(x) for x in rng.split(":"))
    c.section("Model (Laplace domain, temperature rise at x = L)")
    A = c.text("slab, far face insulated (no closed form: Talbot inversion)",
               "dtemp/(s cosh(thick sqrt(s/alpha)))", "slab expression")
    B = c.text("semi-infinite solid at depth L (closed form: erfc)",
               "dtemp exp(-thick sqrt(s/alpha))/s", "semi-infinite expression")
    G = c.text("slab transfer, face to far face (for the step figures)",
               "1/cosh(thick sqrt(s/alpha))", "slab transfer G(s)")
    c.row += 1
    c.section("Results")
    c.text("slab: far-face rise f(t)", f"=SF_INVERSE({A},{P})", "slab f(t) text (SF_INVERSE)", height=16)
    c.text("semi-infinite: rise at depth L [K]", f"=SF_INVERSE({B},{P})", "semi-infinite f(t) text", height=16)
    c.text("semi-infinite as a native formula of a time in cell A7", f'=SF_SHEETFORMULA({B},"A7",{P})',
           "native formula text (SF_SHEETFORMULA)")
    c.value("self-check of the erfc form", f"=SF_SELFCHECK({B},{P})", "K", "0.0E+00", "self-check")
    c.row += 1
    c.section("Key figures")
    T = _abs(c.value("time scale thick^2/alpha", "=thick^2/alpha", "s", "0", "time scale (native)"))
    a, b = A.replace("$", ""), B.replace("$", "")
    c.figure("slab far-face rise at t = thick^2/alpha", f'=SF_RESPONSE({A},{T},"",{P})', "K", "0.000",
             expr=a, time_factor=1, kind="slab")
    c.figure("semi-infinite estimate at t = thick^2/alpha", f'=SF_RESPONSE({B},{T},"",{P})', "K", "0.000",
             expr=b, time_factor=1, kind="semi")
    c.figure("slab far-face rise at t = 4 thick^2/alpha", f'=SF_RESPONSE({A},4*{T},"",{P})', "K", "0.000",
             expr=a, time_factor=4, kind="slab")
    g = G.replace("$", "")
    c.figure("far face within 2 % of dtemp after (settling time)", f'=SF_FIGURE({G},"settling time","step",{P})',
             "s", "0", expr=g, params=None, input="step", attr="settling_time", kind="slab_level",
             level=0.98)
    c.figure("far face 10 % to 90 % of dtemp (rise time)", f'=SF_FIGURE({G},"rise time","step",{P})',
             "s", "0", expr=g, params=None, input="step", attr="rise_time")
    c.row += 1
    c.section("Slab modes: poles of 1/cosh(L sqrt(s/alpha)) at s_n = -(2n+1)^2 pi^2 alpha/(4 L^2)")
    c.heads("mode n", "pole s_n [1/s]", "time constant [s]")
    top = c.row
    for n in range(5):
        r = c.row
        c.ws[f"A{r}"] = n
        c.ws[f"C{r}"] = f"=4*thick^2/((2*A{r}+1)^2*PI()^2*alpha)"
        c.ws[f"B{r}"] = f"=-1/C{r}"
        c.ws[f"B{r}"].number_format, c.ws[f"C{r}"].number_format = "0.000E+00", "0.0"
        c.row += 1
    c.note("mode table (native formulas)", f"A{top}:C{c.row - 1}")
    c.figures.append({"sheet": "Calculation", "cell": f"C{top}", "label": "slowest mode time constant",
                      "unit": "s", "kind": "mode", "mode": 0})
    _fit_page(c.ws)
    sampled = _response(wb, "Sampled response: far-face temperature rise",
                     "t = start + k * step, step = 4 thick^2/alpha / 200; SF_RESPONSE (impulse of the "
                     "expressions = step response); column D is the spreadsheet's own ERFC as a check.",
                     0.0, "=4*thick^2/alpha/200",
                     [("slab far face [K]", f'=SF_RESPONSE(Calculation!{A},{{t}},"",Calculation!{P})', "0.000000"),
                      ("semi-infinite [K]", f'=SF_RESPONSE(Calculation!{B},{{t}},"",Calculation!{P})', "0.000000"),
                      ("ERFC check [K]", "=IF({t}<=0,0,dtemp*ERFC(thick/(2*SQRT(alpha*{t}))))", "0.000000")])
    _chart(wb, "Temperature rise at depth L (far face)", "time t [s]", "temperature rise [K]",
           [("B", "slab, far face insulated"), ("C", "semi-infinite solid")], sampled[0])
    return wb, _info(c, "slab_heating", title, {
        "B": {"expr": a, "kind": "slab"}, "C": {"expr": b, "kind": "semi"},
        "D": {"expr": b, "kind": "semi", "native": True}}, sampled)


# ------------------------------------------------------------------ building
TEMPLATES: dict[str, Callable[[], tuple[Workbook, dict]]] = {
    "rlc_step_response": build_rlc,
    "mount_release": build_mount,
    "dead_time_process": build_dead_time,
    "slab_heating": build_slab,
}


def describe() -> list[dict]:
    """Per template: name, file, title, ``figures`` (dicts with sheet, cell, label, unit and
    what the value is), ``layout`` ((what, cell or range) on Calculation) and ``response``
    (sheet, t column, first/last row, y columns)."""
    return [builder()[1] for builder in TEMPLATES.values()]


def save_deterministic(wb: Workbook, path) -> Path:
    """Save with fixed properties and zip entry times (same workbook, same bytes)."""
    buf = io.BytesIO()
    wb.save(buf)
    stamp = FIXED_TIME.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    src = zipfile.ZipFile(io.BytesIO(buf.getvalue()))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename == "docProps/core.xml":        # openpyxl stamps 'now' on save
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)",
                              rb"\g<1>" + stamp + rb"\g<2>", data)
            info = zipfile.ZipInfo(item.filename, date_time=FIXED_TIME.timetuple()[:6])
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            dst.writestr(info, data)
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(out.getvalue())
    return path


def readme(infos: list[dict]) -> str:
    """README.md text for the generated folder."""
    intro = ("Generated by `python -m sheetfuncs.templates` (do not edit by hand).  The files hold "
             "formulas only: fill them with `sheetfuncs fill BOOK.xlsx -o OUT.xlsx`, then open the "
             "output in Excel or LibreOffice.")
    sheets = ("Every workbook has the sheets **Calculation** (inputs, model, results, tables), **Chart** "
              f"(the sampled response) and **Response** (t in column A from the start time in {R_START} "
              f"and the step in {R_STEP}; {N_ROWS} rows from row {R_FIRST}, one plain formula per cell).  "
              "Spilling tables have empty room below/right; keep it empty.  Every sheet prints on one page.")
    lines = ["# Calculation workbooks", "", intro, "", f"> {CAUTION}", "", sheets, ""]
    for info in infos:
        lines += [f"## {info['file']}", "", info["title"] + ".", "", "Sheet Calculation:", "",
                  "| what | where |", "|---|---|"]
        lines += [f"| {w} | {where} |" for w, where in info["layout"]]
        lines += ["", "Key figures:", "", "| label | cell | unit |", "|---|---|---|"]
        lines += [f"| {f['label']} | {f['sheet']}!{f['cell']} | {f['unit']} |" for f in info["figures"]]
        r = info["response"]
        cols = "; ".join(f"{col}{r['first_row']}:{col}{r['last_row']} {spec['head']}" for col, spec in r["y"].items())
        lines += ["", f"Sheet Response: t [s] in A{r['first_row']}:A{r['last_row']}; {cols}.", ""]
    return "\n".join(lines)


def write_books(outdir, templates: dict, describe_all, readme_name: str) -> list[Path]:
    """Build every template into outdir with its README (``describe_all(infos)`` gives the
    text); returns the workbook paths.  Shared by the generators of the example books."""
    outdir = Path(outdir)
    paths, infos = [], []
    for name, builder in templates.items():
        wb, info = builder()
        paths.append(save_deterministic(wb, outdir / f"{name}.xlsx"))
        infos.append(info)
    (outdir / readme_name).write_text(describe_all(infos), encoding="utf-8")
    return paths


def generator_main(argv, prog: str, build) -> int:
    """Command line of a book generator: ``python -m PROG [OUTDIR]``."""
    args = sys.argv[1:] if argv is None else list(argv)
    if len(args) > 1 or (args and args[0].startswith("-")):
        print(f"usage: python -m {prog} [OUTDIR]", file=sys.stderr)
        return 2
    try:
        for p in build(args[0] if args else "workbooks"):
            print(p)
    except OSError as exc:
        print(f"{prog}: cannot write: {exc}", file=sys.stderr)
        return 1
    return 0


def build_all(outdir="workbooks") -> list[Path]:
    """Write the four workbooks and README.md into outdir; returns the workbook paths."""
    return write_books(outdir, TEMPLATES, readme, "README.md")


def main(argv=None) -> int:
    return generator_main(argv, "sheetfuncs.templates", build_all)


if __name__ == "__main__":
    sys.exit(main())
