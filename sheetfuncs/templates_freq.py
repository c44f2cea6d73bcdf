"""Two calculation-workbook templates of the frequency half, built with the
helpers of ``sheetfuncs.templates``:

* ``filter_design``: a unity-gain active low-pass filter (two resistors, two
  capacitors) for the anti-aliasing stage of a vibration logger: f0, Q,
  -3 dB bandwidth, peaking, a Bode chart on a logarithmic frequency axis;
* ``loop_tuning``: a PI temperature loop on a drying-oven zone with transport
  delay and a sensor lag: loop algebra with its cancellation check, margins,
  Nyquist-based stability, the closed-loop step and the Bode chart of L.

``python -m sheetfuncs.templates_freq [OUTDIR]`` writes them (default
``workbooks/``); ``sheetfuncs fill`` computes the SF_ cells.
"""
from __future__ import annotations

import sys
from pathlib import Path

from openpyxl.chart import Reference, ScatterChart, Series
from openpyxl.styles import Alignment, Font

from .templates import CAUTION, SCI, _abs, _book, _Calc, _fit_page, generator_main, write_books

_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=14)
F_HEAD, F_FIRST = 6, 7          # frequency sheet: header row, first data row
PER_DECADE = 30
GENERAL = {1: "0.0000"}


def _tidy(c: _Calc) -> None:
    """Purpose text wrapped over A:G; room for the block labels in E."""
    ws = c.ws
    ws.merge_cells("A2:G2")
    ws["A2"].alignment = Alignment(wrap_text=True, vertical="top")
    ws.row_dimensions[2].height = 30
    ws.column_dimensions["E"].width = 36


def _frequency_sheet(wb, title, note, start, decades, columns, *, unit="Hz"):
    """Sheet 'Frequency': log-spaced frequency in A (start in B3, points a decade in B4), then one
    column per (head, formula template with {f} the row's frequency cell, number format)."""
    ws = wb.create_sheet("Frequency")
    ws["A1"], ws["A1"].font = title, _TITLE
    ws["A2"] = note
    ws["A3"], ws["B3"], ws["C3"] = "first frequency", start, unit
    ws["A4"], ws["B4"] = "points a decade", PER_DECADE
    for c in ("B3", "B4"):
        ws[c].number_format = "General"
    ws.column_dimensions["A"].width = 16
    ws[f"A{F_HEAD}"], ws[f"A{F_HEAD}"].font = f"f [{unit}]", _BOLD
    for i, (head, _f, _fmt) in enumerate(columns):
        col = chr(ord("B") + i)
        ws[f"{col}{F_HEAD}"], ws[f"{col}{F_HEAD}"].font = head, _BOLD
        ws.column_dimensions[col].width = max(16, len(head) + 2)
    n = decades * PER_DECADE + 1
    for k in range(n):
        r = F_FIRST + k
        ws[f"A{r}"] = f"=$B$3*10^({k}/$B$4)"
        ws[f"A{r}"].number_format = "0.000E+00"
        for i, (_h, formula, fmt) in enumerate(columns):
            ws.cell(row=r, column=2 + i, value=formula.format(f=f"A{r}", r=r)).number_format = fmt
    ws.freeze_panes = f"A{F_FIRST}"
    _fit_page(ws)
    return F_FIRST + n - 1


def _log_chart(ws, src, anchor, title, y_title, col, last, name, x_title="frequency f [Hz]"):
    ch = ScatterChart()
    ch.title, ch.style = title, 2
    ch.x_axis.title, ch.y_axis.title = x_title, y_title
    ch.x_axis.scaling.logBase = 10
    ch.x_axis.delete = ch.y_axis.delete = False
    ch.x_axis.number_format = ch.y_axis.number_format = "General"
    ch.x_axis.majorGridlines = ch.y_axis.majorGridlines
    ch.x_axis.crosses = "min"                 # frequency labels below the plot, not at 0 dB
    ch.width, ch.height = 24, 9
    ch.legend = None
    x = Reference(src, min_col=1, min_row=F_FIRST, max_row=last)
    y = Reference(src, min_col=ord(col) - 64, min_row=F_FIRST, max_row=last)
    s = Series(y, x, title=name)
    s.marker.symbol = "none"
    s.smooth = False
    s.graphicalProperties.line.width = 22000
    ch.series.append(s)
    ws.add_chart(ch, anchor)


# ------------------------------------------------------------------ filter design
def build_filter() -> tuple:
    title = "Active low-pass filter: anti-aliasing stage of a vibration logger"
    wb = _book(title)
    c = _Calc(wb, title, "Purpose: unity-gain two-pole low-pass (op-amp follower, resistors R1, R2 in series, "
                         "C1 from their junction to the output, C2 from the op-amp input to ground) ahead of "
                         "an ADC sampling at 8 kHz: corner, Q, peaking and -3 dB bandwidth.")
    rng = c.inputs("DEFINED NAMES R1, R2, C1, C2: the value cells", [
        ("R1", 10000.0, "ohm", "first series resistor", "0"),
        ("R2", 10000.0, "ohm", "second series resistor", "0"),
        ("C1", 22e-9, "F", "feedback capacitor (22 nF)", "0.00E+00"),
        ("C2", 10e-9, "F", "capacitor to ground (10 nF)", "0.00E+00")], names=True)
    c.note("inputs (defined names on the value cells)", rng)
    c.section("Model")
    H = c.text("H(s) = Vout(s)/Vin(s)", "1/(R1 R2 C1 C2 s^2 + C2 (R1 + R2) s + 1)", "H(s)", height=16)
    c.row += 1
    c.section("Frequency figures (root finding on |H(jw)|; frequencies in Hz)", "All figures, Hz (SF_FREQ_FIGURES)")
    top = c.row
    specs = [("corner (natural) frequency f0", "natural frequency", "Hz", "0.0"),
             ("quality factor Q", "q", "", "0.000"),
             ("damping ratio", "damping ratio", "", "0.000"),
             ("-3 dB bandwidth", "bandwidth", "Hz", "0.0"),
             ("resonant peak", "peak db", "dB", "0.000"),
             ("peak frequency", "peak frequency", "Hz", "0.0"),
             ("DC gain", "dc gain db", "dB", "0.000"),
             ("high-frequency slope", "rolloff", "dB/decade", "0")]
    for label, key, unit, fmt in specs:
        c.figure(label, f'=SF_FREQ_FIGURE({H},"{key}","","Hz")', unit, fmt, expr=H.replace("$", ""),
                 key=key, unit_arg="Hz")
    c.spill("frequency figures block (SF_FREQ_FIGURES)", f'=SF_FREQ_FIGURES({H},"","Hz")', col="E", at=top,
            room=(12, 2), style=GENERAL)
    c.row = max(c.row, top + 12) + 1
    c.section("Cross-checks with native formulas (unity-gain two-pole formulas)")
    c.value("f0 = 1/(2 pi sqrt(R1 R2 C1 C2))", "=1/(2*PI()*SQRT(R1*R2*C1*C2))", "Hz", "0.0", "native f0")
    c.value("Q = sqrt(R1 R2 C1 C2)/(C2 (R1 + R2))", "=SQRT(R1*R2*C1*C2)/(C2*(R1+R2))", "", "0.000", "native Q")
    c.value("attenuation at the ADC's half sampling rate (4 kHz)", f'=SF_GAIN_DB({H},4000,"","Hz")', "dB",
            "0.00", "gain at 4 kHz")
    c.row += 1
    c.section("Poles of H(s)")
    c.spill("poles table (SF_POLES)", f"=SF_POLES({H})", room=(5, 7),
            style={1: SCI, 2: SCI, 4: "0.0000", 5: SCI, 6: SCI})
    _tidy(c)
    _fit_page(c.ws)
    last = _frequency_sheet(wb, "Frequency response of H(jw)",
                            "f = first frequency * 10^(k / points a decade), k = 0 ... 120; "
                            "magnitude by SF_GAIN_DB, phase by SF_PHASE_DEG (unit Hz).", 10.0, 4,
                            [("|H| [dB]", f'=SF_GAIN_DB(Calculation!{H},{{f}},"","Hz")', "0.000"),
                             ("phase [deg]", f'=SF_PHASE_DEG(Calculation!{H},{{f}},"","Hz")', "0.00")])
    ws = wb.create_sheet("Chart", 1)
    ws["A1"], ws["A1"].font = "Bode chart of the anti-aliasing filter", _TITLE
    src = wb["Frequency"]
    _log_chart(ws, src, "A3", "Magnitude |H(jf)|", "magnitude [dB]", "B", last, "|H|")
    _log_chart(ws, src, "A22", "Phase of H(jf)", "phase [deg]", "C", last, "phase")
    _fit_page(ws, landscape=False)
    return wb, {"name": "filter_design", "file": "filter_design.xlsx", "title": title, "figures": c.figures,
                "layout": c.layout, "frequency": {"sheet": "Frequency", "first_row": F_FIRST, "last_row": last}}


# ------------------------------------------------------------------ loop tuning
def build_loop() -> tuple:
    title = "Loop tuning: PI temperature control of a drying-oven zone"
    wb = _book(title)
    c = _Calc(wb, title, "Purpose: air temperature of one oven zone, burner valve driven by a PI controller; "
                         "transport delay of the air path and a thermocouple lag in the feedback path. "
                         "Check the loop before commissioning: margins, stability, closed-loop step.")
    rng = c.inputs("parameter range {range}: names in column A, values in column B", [
        ("Kproc", 1.6, "degC/%", "zone gain: temperature per % valve", "0.00"),
        ("tau", 40.0, "s", "zone lag", "0.0"),
        ("theta", 6.0, "s", "transport delay of the air path", "0.0"),
        ("Tsens", 2.0, "s", "thermocouple lag", "0.0"),
        ("Kc", 1.2, "%/degC", "controller gain", "0.00"),
        ("Ti", 40.0, "s", "integral time", "0.0")])
    c.note("parameter range (name, value; unit in C, meaning in D)", rng)
    P = ":".join(_abs(x) for x in rng.split(":"))
    c.section("Model")
    G = c.text("plant G(s)", "Kproc exp(-theta s)/(tau s + 1)", "G(s)", height=16)
    C = c.text("controller C(s) (PI)", "Kc (1 + 1/(Ti s))", "C(s)", height=16)
    Hs = c.text("sensor H(s)", "1/(Tsens s + 1)", "H(s)", height=16)
    c.row += 1
    c.section("Loop algebra (SF_CLOSE_LOOP, values put in)")
    L = c.text("open loop L = C G H", f'=SF_CLOSE_LOOP({G},{C},{Hs},"loop",{P})', "L(s) text")
    T = c.text("closed loop T = C G/(1 + L), setpoint to temperature",
               f'=SF_CLOSE_LOOP({G},{C},{Hs},"closed",{P})', "T(s) text", height=45)
    c.text("disturbance G/(1 + L), valve-side upset to temperature",
           f'=SF_CLOSE_LOOP({G},{C},{Hs},"disturbance",{P})', "disturbance text", height=45)
    c.section("Loop checks (SF_LOOP_WARNINGS)")
    c.spill("loop checks (SF_LOOP_WARNINGS)", f"=SF_LOOP_WARNINGS({G},{C},{Hs},{P})", room=(4, 1))
    c.section("Loop figures of L (Nyquist count with the delay exact)", "All loop figures (SF_LOOP_FIGURES)")
    top = c.row
    for label, key, unit, fmt in [("gain crossover", "gain crossover", "rad/s", "0.0000"),
                                  ("phase margin", "phase margin", "deg", "0.0"),
                                  ("phase crossover", "phase crossover", "rad/s", "0.0000"),
                                  ("gain margin", "gain margin", "dB", "0.00"),
                                  ("delay margin", "delay margin", "s", "0.0"),
                                  ("peak sensitivity", "peak sensitivity", "", "0.000"),
                                  ("closed loop stable (1 yes, 0 no)", "stable", "", "0")]:
        c.figure(label, f'=SF_LOOP_FIGURE({L},"{key}")', unit, fmt, expr=L.replace("$", ""), key=key)
    c.spill("loop figures block (SF_LOOP_FIGURES)", f"=SF_LOOP_FIGURES({L})", col="E", at=top,
            room=(10, 2), style=GENERAL)
    c.row = max(c.row, top + 10) + 1
    c.section("Closed-loop setpoint step of T (exact with the dead time: series in the delay)")
    for label, key, unit, fmt in [("final value", "final value", "degC", "0.0000"),
                                  ("overshoot", "overshoot", "%", "0.00"),
                                  ("peak time", "peak time", "s", "0.00"),
                                  ("rise time (10% to 90%)", "rise time", "s", "0.00"),
                                  ("settling time (2% band)", "settling time", "s", "0.0")]:
        c.figure(f"closed-loop {label}", f'=SF_FIGURE({T},"{key}")', unit, fmt, expr=T.replace("$", ""),
                 key=key)
    c.row += 1
    _tidy(c)
    _fit_page(c.ws)
    # Response sheet: closed-loop step
    ws = wb.create_sheet("Response")
    ws["A1"], ws["A1"].font = "Closed-loop step response (setpoint +1 degC)", _TITLE
    ws["A2"] = "t = start + k * step (k = 0 ... 200); y by SF_RESPONSE of T(s) to a unit step."
    ws["A3"], ws["B3"], ws["C3"] = "start time", 0.0, "s"
    ws["A4"], ws["B4"], ws["C4"] = "time step", 0.75, "s"
    ws["A6"], ws["B6"] = "t [s]", "y [degC]"
    ws["A6"].font = ws["B6"].font = _BOLD
    ws.column_dimensions["B"].width = 16
    for k in range(201):
        r = 7 + k
        ws[f"A{r}"] = f"=$B$3+{k}*$B$4"
        ws[f"B{r}"] = f'=SF_RESPONSE(Calculation!{T},A{r},"step")'
        ws[f"B{r}"].number_format = "0.0000"
    ws.freeze_panes = "A7"
    _fit_page(ws)
    last_t = 207
    # Frequency sheet: Bode of L in rad/s
    last = _frequency_sheet(wb, "Frequency response of the open loop L(jw)",
                            "w = first frequency * 10^(k / points a decade), k = 0 ... 120; "
                            "SF_GAIN_DB and SF_PHASE_DEG of L (rad/s).", 0.001, 4,
                            [("|L| [dB]", f"=SF_GAIN_DB(Calculation!{L},{{f}})", "0.000"),
                             ("phase of L [deg]", f"=SF_PHASE_DEG(Calculation!{L},{{f}})", "0.0")], unit="rad/s")
    ch_ws = wb.create_sheet("Chart", 1)
    ch_ws["A1"], ch_ws["A1"].font = "Loop charts", _TITLE
    src = wb["Frequency"]
    _log_chart(ch_ws, src, "A3", "Open-loop magnitude |L(jw)|", "magnitude [dB]", "B", last, "|L|",
               x_title="frequency w [rad/s]")
    _log_chart(ch_ws, src, "A22", "Open-loop phase of L(jw)", "phase [deg]", "C", last, "phase",
               x_title="frequency w [rad/s]")
    step = ScatterChart()
    step.title, step.style = "Closed-loop setpoint step", 2
    step.x_axis.title, step.y_axis.title = "time t [s]", "temperature change [degC]"
    step.x_axis.delete = step.y_axis.delete = False
    step.x_axis.number_format = step.y_axis.number_format = "General"
    step.width, step.height, step.legend = 24, 9, None
    resp = wb["Response"]
    s = Series(Reference(resp, min_col=2, min_row=7, max_row=last_t), Reference(resp, min_col=1, min_row=7,
                                                                                 max_row=last_t), title="y(t)")
    s.marker.symbol = "none"
    s.graphicalProperties.line.width = 22000
    step.series.append(s)
    ch_ws.add_chart(step, "A41")
    _fit_page(ch_ws)
    return wb, {"name": "loop_tuning", "file": "loop_tuning.xlsx", "title": title, "figures": c.figures,
                "layout": c.layout, "frequency": {"sheet": "Frequency", "first_row": F_FIRST, "last_row": last},
                "response": {"sheet": "Response", "first_row": 7, "last_row": last_t}}


TEMPLATES = {"filter_design": build_filter, "loop_tuning": build_loop}


def describe() -> list[dict]:
    return [b()[1] for b in TEMPLATES.values()]


def readme(infos: list[dict]) -> str:
    """README_frequency.md for the generated folder."""
    lines = ["# Calculation workbooks of the frequency half", "",
             "Generated by `python -m sheetfuncs.templates_freq` (do not edit by hand).  Fill them with "
             "`sheetfuncs fill BOOK.xlsx -o OUT.xlsx`, then open the output in Excel or LibreOffice.  Sheets: "
             "**Calculation** (inputs, model, figures), **Chart** (native charts; frequency on a logarithmic "
             f"axis) and **Frequency** (frequency in A from the first frequency in B3 with B4 points a decade, "
             f"one plain formula per cell from row {F_FIRST}); the loop book also has **Response** (closed-loop "
             "step, t from B3 in steps of B4).", "", f"> {CAUTION}", ""]
    for info in infos:
        lines += [f"## {info['file']}", "", info["title"] + ".", "", "| what | where |", "|---|---|"]
        lines += [f"| {w} | {where} |" for w, where in info["layout"]]
        lines += ["", "| key figure | cell | unit |", "|---|---|---|"]
        lines += [f"| {f['label']} | {f['sheet']}!{f['cell']} | {f['unit']} |" for f in info["figures"]]
        fr = info["frequency"]
        lines += ["", f"Sheet Frequency: rows {fr['first_row']} to {fr['last_row']}.", ""]
    return "\n".join(lines)


def build_all(outdir="workbooks") -> list[Path]:
    """Write the two workbooks and README_frequency.md into outdir; returns the workbook paths."""
    return write_books(outdir, TEMPLATES, readme, "README_frequency.md")


def main(argv=None) -> int:
    return generator_main(argv, "sheetfuncs.templates_freq", build_all)


if __name__ == "__main__":
    sys.exit(main())
