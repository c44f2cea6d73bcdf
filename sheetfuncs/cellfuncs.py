"""The cell functions as plain Python: Excel-shaped values in, cell values out.

Arguments arrive as a spreadsheet passes them: numbers as float, text as
str, empty cells as None, ranges as 2-D lists of rows.  Results are a number,
a text or a 2-D list (an array that spills down and right).  Bad input never
raises: the cell shows ``ERROR_MARK`` followed by the reason.  An empty
expression gives an empty result.

Both adapters call these: ``cells.py`` (xlwings, live in Excel) and
``fill.py`` (headless).  ``FUNCTIONS`` maps each cell name to its function.

Parameters come from a two-column name/value range, or from the workbook's
defined names (``name_values``, set by the adapter); the range wins.
"""
from __future__ import annotations

import contextlib
import contextvars
import dataclasses
import functools
import inspect
import math
import re
from typing import Callable

from . import api, units
from ._lazy import LazyModule
from ._lazy import sympy as sp

np = LazyModule("numpy")          # imported when a response is sampled (a warm refill needs none)
from .engine import cache
from .engine.parse import CONSTANTS, TIME_FUNCTIONS
from . import report


def pair(x):
    """A number as [re, im] (the general route's converter, imported on first use)."""
    from .engine.results import pair as convert
    return convert(x)
from .errors import ParameterError, SamplingError, SheetfuncsError, UnsupportedExpressionError

PREFIX = "SF_"
ERROR_MARK = "#SF!"
MAX_TABLE_ROWS = 100_000

_names: contextvars.ContextVar[dict] = contextvars.ContextVar("sheetfuncs_names", default={})


@contextlib.contextmanager
def name_values(values: dict):
    """Defined names (name -> number) visible to the cell functions."""
    clean = {}
    for k, v in (values or {}).items():
        if (isinstance(k, str) and re.fullmatch(r"[A-Za-z][A-Za-z0-9]*", k) and k not in ("s", "t")
                and k.lower() not in CONSTANTS and k.lower() not in TIME_FUNCTIONS
                and isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)):
            clean[k] = v
    token = _names.set(clean)
    try:
        yield
    finally:
        _names.reset(token)


def error_text(exc: Exception) -> str:
    """The one way an error is shown in a cell."""
    if isinstance(exc, SheetfuncsError):
        return f"{ERROR_MARK} {exc}"
    if isinstance(exc, TypeError) and "argument" in str(exc):
        return f"{ERROR_MARK} wrong number of arguments ({exc})"
    return f"{ERROR_MARK} internal error ({type(exc).__name__}: {exc})"


class _Empty(Exception):
    pass


#: the most characters a cell holds (Excel's limit; fill, xlwings and LibreOffice results keep to it)
CELL_TEXT_LIMIT = 32_767


def cap_text(text: str) -> str:
    """The text itself, or a clear message when it is longer than a cell holds."""
    if len(text) <= CELL_TEXT_LIMIT:
        return text
    return (f"{ERROR_MARK} the result has {len(text):,} characters, more than the {CELL_TEXT_LIMIT:,} "
            f"a cell holds (fewer digits or parameter values as numbers may shorten it)")


def _capped(value):
    if isinstance(value, str):
        return cap_text(value)
    if isinstance(value, list):
        return [[cap_text(c) if isinstance(c, str) else c for c in row] if isinstance(row, list) else row
                for row in value]
    return value


def cell(func: Callable) -> Callable:
    """Turn errors into cell text, empty input into an empty result, and cap long texts."""
    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return _capped(func(*args, **kwargs))
        except _Empty:
            return ""
        except Exception as exc:  # noqa: BLE001 - a cell shows every failure as text
            return error_text(exc)
    wrapper.plain = func
    return wrapper


# ---------------------------------------------------------------- metadata
# One place for what the adapters show about a function (xlwings wrappers, the VBA-name
# check, the LibreOffice extension's IDL and CalcAddIns.xcu): the signature, and the docstring
# in this form: first line a one-line description, then a Google-style ``Args:`` section with
# one ``name: description`` line per argument (``name (range): ...`` for an argument that
# takes a range of cells).
@dataclasses.dataclass(frozen=True)
class ArgInfo:
    name: str
    description: str
    is_range: bool
    required: bool


@dataclasses.dataclass(frozen=True)
class FunctionInfo:
    name: str            # cell name, e.g. SF_INVERSE
    summary: str         # the docstring's first line
    args: tuple          # of ArgInfo, in signature order


_ARG_LINE = re.compile(r"^\s+([A-Za-z_][A-Za-z0-9_]*)\s*(?:\(([^)]*)\))?\s*:\s*(.*\S)\s*$")


def describe(name: str, func: Callable | None = None) -> FunctionInfo:
    """Metadata of one cell function from its signature and docstring (missing text stays empty)."""
    func = func if func is not None else FUNCTIONS[name]
    doc = inspect.getdoc(func) or ""
    lines = doc.splitlines()
    summary = lines[0].strip() if lines else ""
    described: dict[str, tuple[str, bool]] = {}
    in_args = False
    for line in lines[1:]:
        if line.strip() == "Args:":
            in_args = True
            continue
        if in_args:
            m = _ARG_LINE.match(line)
            if m:
                described[m.group(1)] = (m.group(3), "range" in (m.group(2) or "").lower())
            elif line.strip() and not line.startswith(" "):
                in_args = False                      # the next section
            elif line.strip() and described:       # a continuation line
                last = list(described)[-1]
                text, rng = described[last]
                described[last] = (f"{text} {line.strip()}", rng)
    args = []
    for p in inspect.signature(func).parameters.values():
        if p.kind not in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD):
            continue
        text, rng = described.get(p.name, ("", False))
        args.append(ArgInfo(p.name, text, rng, p.default is p.empty))
    return FunctionInfo(name, summary, tuple(args))


def catalogue() -> list[FunctionInfo]:
    """Metadata of every function in FUNCTIONS, in their order."""
    return [describe(n, f) for n, f in FUNCTIONS.items()]


# ---------------------------------------------------------------- converters
def _scalar(value):
    """A single value from a cell or a 1x1 range."""
    while isinstance(value, (list, tuple)):
        if len(value) != 1:
            raise ParameterError("expected a single cell, got a range")
        value = value[0]
    return value


def _expr(value, what="expression") -> str:
    value = _scalar(value)
    if value is None or (isinstance(value, str) and not value.strip()):
        raise _Empty()
    if isinstance(value, bool):
        raise ParameterError(f"the {what} is TRUE/FALSE, not an expression")
    if isinstance(value, float):
        return repr(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, int):
        return str(value)
    if not isinstance(value, str):
        raise ParameterError(f"the {what} must be text, got {type(value).__name__}")
    text = value.strip()
    return text[1:].strip() if text.startswith("=") else text


def _number(value, what, default=None, *, integer=False):
    value = _scalar(value)
    if value is None or (isinstance(value, str) and not value.strip()):
        if default is None:
            raise ParameterError(f"{what} is empty")
        return default
    if isinstance(value, bool):
        raise ParameterError(f"{what} must be a number, got TRUE/FALSE")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{what} must be a number, got '{value}'") from None
    if not math.isfinite(x):
        raise ParameterError(f"{what} must be a finite number")
    if integer:
        if not x.is_integer():
            raise ParameterError(f"{what} must be a whole number, got {x:g}")
        return int(x)
    return x


def _text(value, default):
    value = _scalar(value)
    if value is None or (isinstance(value, str) and not value.strip()):
        return default
    return str(value).strip()


def _rows(value) -> list[list]:
    if value is None:
        return []
    if not isinstance(value, (list, tuple)):
        return [[value]]
    if value and not isinstance(value[0], (list, tuple)):
        return [list(value)]
    return [list(r) for r in value]


def _blank(c) -> bool:
    return c is None or (isinstance(c, str) and not c.strip())


#: value-column headings that mark a header row above a two-column name/value range
_VALUE_HEADINGS = {"value", "values", "val", "number", "setting"}


def _is_label(c) -> bool:
    if not isinstance(c, str) or not c.strip():
        return False
    try:
        units.label_of(c)
    except ParameterError:
        return False
    return True


def _is_value(c) -> bool:
    """A cell that reads as a number (not a label): 1000.0, '10k', '4.7'."""
    if isinstance(c, bool):
        return False
    if isinstance(c, (int, float)):
        return True
    if not isinstance(c, str):
        return False
    try:
        return units.prefixed_number(c) is not None or bool(float(c.strip()) == float(c.strip()))
    except (ParameterError, ValueError):
        return False


def _param(out: dict, where: dict, label, value, place: str) -> None:
    """One labelled value into ``out``: the unit in the label converts the value to SI."""
    if not isinstance(label, str) or not label.strip():
        raise ParameterError(f"parameter {place}: the name must be text, got {label!r}")
    name, unit = units.label_of(label)
    if _blank(value):
        raise ParameterError(f"parameter '{name}' has no value ({place})", name)
    if name in where:
        raise ParameterError(f"parameter '{name}' is given twice ({where[name]} and {place})", name)
    where[name] = place
    try:
        out[name] = units.to_si(value, unit)
    except ParameterError as exc:
        raise ParameterError(f"parameter '{label.strip()}': {exc}", name) from None


def params_of(value) -> dict:
    """Parameters from a range, over the workbook's defined names.

    Layouts (blank rows skipped):
    - two columns, a name (``R`` or ``R [kohm]``) and a value in each row; a header row whose value
      cell reads ``value`` is skipped;
    - one row of name, value pairs;
    - a header row of names over rows of values: the LAST row of the range gives the values, so a
      sweep row passes ``$B$9:$D12`` (header fixed, its own row last) and fills down.
    A unit in brackets converts the value to SI (``C [nF]`` = 22 is 22e-9); a unit pint cannot read
    is an error.  Values may carry SI prefixes (``10k``, ``22n``, ``4.7u``, ``1.5meg``)."""
    out = dict(_names.get())
    rows = _rows(value)
    where: dict = {}
    filled = [(i, r) for i, r in enumerate(rows) if not all(_blank(c) for c in r)]
    if not filled:
        return out
    if len(rows) == 1 and len(rows[0]) > 2 and len(rows[0]) % 2 == 0 and not all(map(_is_label, rows[0])):
        row = rows[0]                                                       # a row of pairs
        for k in range(0, len(row), 2):
            if not (_blank(row[k]) and _blank(row[k + 1])):
                _param(out, where, row[k], row[k + 1], f"pair {k // 2 + 1}")
        return out
    head_i, head = filled[0]
    last = rows[-1]
    wide = (len(rows) > 1 and head_i < len(rows) - 1 and all(_blank(c) or _is_label(c) for c in head)
            and not (last and _is_label(last[0])))
    if wide:
        if all(_blank(c) for c in last):
            raise ParameterError(f"parameter range: the values row (the last row, {len(rows)}) is empty")
        for j, label in enumerate(head):
            v = last[j] if j < len(last) else None
            if _blank(label):
                if not _blank(v):
                    raise ParameterError(f"parameter range: column {j + 1} has a value but no name above it")
                continue
            _param(out, where, label, v, f"column {j + 1}")
        return out
    for i, row in filled:
        if len(row) < 2:
            raise ParameterError(f"parameter row {i + 1} needs a name and a value (two columns)")
        if (i, row) == (head_i, head) and isinstance(row[1], str) \
                and row[1].strip().lower().split("[")[0].strip() in _VALUE_HEADINGS:
            continue                                                        # header row
        _param(out, where, row[0], row[1], f"row {i + 1}")
    return out


def _input(value):
    text = _text(value, "")
    return text or None


def _vector(value, what) -> list[float]:
    out = []
    for row in _rows(value):
        for c in row:
            if c is None or (isinstance(c, str) and not c.strip()):
                continue
            out.append(c)
    if not out:
        raise ParameterError(f"{what} is empty")
    return out


#: what the per-cell form of a table gives past the table's end: it shows as nothing, and is
#: not the empty text that LibreOffice 7.4 recomputes on load (#NAME? without the extension)
PAST_TABLE = "\u00a0"      # a no-break space (an XML reader keeps it; a plain space is dropped)


def _pick(rows, row, col):
    """The whole table, or its one cell at (row, col), 1-based; PAST_TABLE past its end.

    The per-cell form lets a workbook hold a table as one formula per cell, which every
    spreadsheet program recomputes in place (no spill range, no stale neighbours)."""
    if (row is None or row == "") and (col is None or col == ""):
        return rows
    r = _number(row, "row", integer=True)
    c = _number(col, "col", integer=True)
    if r < 1 or c < 1:
        raise ParameterError(f"row and col count from 1, got {r}, {c}")
    if r > len(rows) or c > len(rows[r - 1]):
        return PAST_TABLE
    value = rows[r - 1][c - 1]
    return PAST_TABLE if value == "" or value is None else value


# ---------------------------------------------------------------- functions
FORMS = ("text", "sympy", "latex")


@cell
def inverse(expr, params=None, form=None, digits=None):
    """f(t) for t >= 0 of F(s), as display text, SymPy text or LaTeX.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
        form: output form: text (default), sympy or latex
        digits: significant digits of the numbers (empty: full precision)
    """
    from .printing import to_display, to_latex, to_sympy_text
    res = api.invert(_expr(expr), params_of(params))
    form = _text(form, "text").lower()
    nd = _number(digits, "digits", 0, integer=True) or None
    if getattr(res, "series", None) is not None:
        return "(no finite closed form: a loop around a dead time, exact by the dead-time series; " \
               "sample it with SF_RESPONSE)"
    if res.f_t is None:
        return f"(no closed form: numerical by {res.method.split('(')[-1].rstrip(')')})"
    if form == "text":
        from .printing import display_result
        return display_result(res, digits=nd or 6)
    if form == "sympy":
        return to_sympy_text(res.f_t, digits=nd)
    if form == "latex":
        return to_latex(res.f_t, digits=nd)
    raise ParameterError(f"form must be one of {', '.join(FORMS)}, got '{form}'")


@cell
def sheet_formula(expr, tref=None, params=None, digits=None):
    """A native spreadsheet formula of f(t) in terms of the time in cell tref.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        tref: address of the time cell as text, e.g. "A7" (default A1)
        params (range): two-column range of parameter names and values (blank rows skipped)
        digits: significant digits of the constants (default 15)
    """
    res = api.invert(_expr(expr), params_of(params))
    ref = _text(tref, "A1")
    return api.excel_formula(res, ref, digits=_number(digits, "digits", 15, integer=True))


def _num(x, digits=None):
    """A real number for a table cell (rounded only when digits are asked for); None stays empty."""
    if x is None:
        return None
    return float(f"{x:.{digits}g}") if digits else float(x)


PARTFRAC_HEADS = ["term in s", "f(t) term, t >= 0", "kind", "pole", "power", "coefficient"]


@cell
def partfrac_table(expr, params=None, digits=None, row=None, col=None):
    """Partial fractions, one row per piece: term in s, f(t) term, kind, pole, power, coefficient.

    A complex pair is one row, given by its pole with Im > 0; poles and coefficients are
    numbers, or complex text such as -1+2i (header row first).

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
        digits: significant digits of the numbers (empty: full precision)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    from .printing import to_display
    nd = _number(digits, "digits", 0, integer=True) or None
    res = api.invert(_expr(expr), params_of(params))
    if not res.pieces or len(res.pieces) != 1 or res.pieces[0].delay != 0:
        raise UnsupportedExpressionError("a partial-fraction table needs a rational F(s) without delay")
    piece = res.pieces[0]
    rows = [list(PARTFRAC_HEADS)]
    for r in report.fraction_rows(piece.decomposition, piece.gain):
        rows.append([to_display(r.s_term, digits=nd or 6), to_display(r.t_term, digits=nd or 6), r.kind,
                     None if r.pole is None else report.cell_number(pair(r.pole), nd), r.power,
                     report.cell_number(pair(r.coefficient), nd)])
    return _pick(rows, row, col)


POLES_HEADS = ["mode", "behaviour", "sigma = Re p [1/s]", "omega_d = |Im p| [rad/s]", "damping ratio",
               "natural frequency [rad/s]", "period [s]", "time constant [s]", "2 % decay time [s]",
               "poles in mode"]


@cell
def poles_table(expr, params=None, digits=None, row=None, col=None):
    """Modes of F(s), slowest first: behaviour, sigma, omega_d, damping, frequencies, decay.

    One row per mode (a real pole or a complex pair sigma +- j omega_d): behaviour, sigma,
    omega_d, damping ratio, natural frequency, period, time constant, time for the envelope to
    fall to 2 %, number of poles; then the zeros; last row the stability verdict.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
        digits: significant digits of the numbers (empty: full precision)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    nd = _number(digits, "digits", 0, integer=True) or None
    f = api.figures(_expr(expr), params_of(params), input="impulse")
    rows = [list(POLES_HEADS)]
    for k, m in enumerate(report.modes(f.poles)):
        count = m.poles * m.multiplicity
        rows.append([k + 1, m.behaviour + (f" (repeated x{m.multiplicity})" if m.multiplicity > 1 else ""),
                     _num(m.sigma, nd), _num(m.omega_d, nd), _num(m.damping_ratio, nd),
                     _num(m.natural_frequency, nd), _num(m.period, nd), _num(m.time_constant, nd),
                     _num(m.decay_time, nd), count])
    for k, (a, b, n) in enumerate(report.zero_modes(f.zeros)):
        rows.append([f"zero {k + 1}", "zero pair" if b else "zero", _num(a, nd), _num(b, nd),
                     None, None, None, None, None, n * (2 if b else 1)])
    verdict, _, why = f.stability.partition(" (")
    rows.append(["stability", verdict, why.rstrip(")") or None] + [None] * 7)
    return _pick(rows, row, col)


@cell
def stability(expr, params=None):
    """Stability verdict of F(s) from its poles.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
    """
    return api.figures(_expr(expr), params_of(params), input="impulse").stability


@cache.memo
def _response_result(expr: str, input, params: dict):
    """The inverted response Y(s) = F(s) U(s), shared by every row of a sampled column."""
    from .engine.sample import response_result
    return response_result(expr, params, input or "impulse")


@cell
def response(expr, t, excitation=None, params=None):
    """Response y(t) of F(s) to an input signal at one time t.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        t: the time (a number, t >= 0 for a causal response)
        excitation: input signal: impulse, step, ramp or U(s) as text (default impulse)
        params (range): two-column range of parameter names and values (blank rows skipped)
    """
    from .engine.sample import sample_result
    res = _response_result(_expr(expr), _input(excitation), params_of(params))
    tt = _number(t, "t")
    y = float(sample_result(res, np.array([tt])).y[0])
    if not math.isfinite(y):
        raise SamplingError(f"the response is not finite at t = {tt:g}")
    return y


@cell
def response_table(expr, times, t_end=None, n=None, excitation=None, params=None, row=None, col=None):
    """Table of t and y: over a column of times, or from a start time to t_end in n points.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        times (range): a column of times, or one start time
        t_end: last time, when times is one start time
        n: number of points from start to t_end (default 101)
        excitation: input signal: impulse, step, ramp or U(s) as text (default impulse)
        params (range): two-column range of parameter names and values (blank rows skipped)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    from .engine.sample import sample_result, time_grid
    e = _expr(expr)
    if isinstance(times, (list, tuple)) and len(_vector(times, "times")) > 1:
        grid = time_grid([_number(x, "a time") for x in _vector(times, "times")])
    else:
        start = _number(times, "start time")
        grid = time_grid(None, start, _number(t_end, "end time t_end"), _number(n, "number of points", 101, integer=True))
    if grid.size > MAX_TABLE_ROWS:
        raise SamplingError(f"{grid.size} rows is above the limit of {MAX_TABLE_ROWS}")
    res = _response_result(e, _input(excitation), params_of(params))
    out = sample_result(res, grid)
    rows = [["t [s]", f"y, {report.input_words(_input(excitation))}"]]
    rows += [[float(a), float(b) if math.isfinite(b) else None] for a, b in zip(out.t, out.y)]
    return _pick(rows, row, col)


FIGURE_NAMES = {
    "final value": "final_value", "initial value": "initial_value", "dc gain": "dc_gain",
    "rise time": "rise_time", "peak time": "peak_time", "peak value": "peak_value",
    "overshoot": "overshoot_percent", "overshoot %": "overshoot_percent",
    "settling time": "settling_time", "stable": "stable", "stability": "stability",
    # of the slowest (dominant) mode, as in the poles table
    "damping ratio": "mode.damping_ratio", "natural frequency": "mode.natural_frequency",
    "damped frequency": "mode.omega_d", "time constant": "mode.time_constant",
    "decay time": "mode.decay_time",
}
#: what each figure is measured in (for an output unit in brackets: 'settling time [ms]')
FIGURE_KINDS = {"final_value": units.VALUE, "initial_value": units.VALUE, "dc_gain": units.VALUE,
                "peak_value": units.VALUE, "rise_time": units.TIME, "peak_time": units.TIME,
                "settling_time": units.TIME, "overshoot_percent": units.PERCENT,
                "mode.natural_frequency": units.FREQUENCY, "mode.omega_d": units.FREQUENCY,
                "mode.time_constant": units.TIME, "mode.decay_time": units.TIME}
_STEP_ONLY = ("rise_time", "peak_time", "peak_value", "overshoot_percent", "settling_time")
_WHICH = re.compile(r"\s*([^\[\]]*?)\s*(?:\[([^\[\]]*)\])?\s*")


def _figures(expr, input, params, band):
    return api.figures(_expr(expr), params_of(params), input=_text(input, "step"),
                       band=_number(band, "settling band", 0.02))


def _missing_reason(f, attr) -> str:
    """Why a figure has no value, in a few words."""
    if attr in _STEP_ONLY and f.input != "step":
        return f"step figures only (this is the {report.input_words(f.input)})"
    if attr == "final_value":
        return f.final_value_note or "no final value"
    if attr in ("peak_time", "peak_value") and f.overshoot_percent == 0:
        return "no peak: no overshoot"
    if attr == "initial_value":
        return "no initial value (the response starts with an impulse)"
    if f.notes:
        return f.notes[0]
    return "does not exist for this response"


@cell
def figure(expr, which, excitation=None, params=None, band=None):
    """One response figure by name: final value, overshoot, rise, peak or settling time ...

    Also damping ratio, natural frequency, damped frequency, time constant and decay time of
    the slowest mode; a unit in brackets converts the figure: 'settling time [ms]',
    'final value [mV]', 'natural frequency [Hz]'.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        which: name of the figure, e.g. "overshoot", "settling time [ms]", "final value"
        excitation: input signal: impulse, step, ramp or U(s) as text (default step)
        params (range): two-column range of parameter names and values (blank rows skipped)
        band: settling band as a fraction of the final value (default 0.02)
    """
    m = _WHICH.fullmatch(_text(which, ""))
    key = (m.group(1) if m else _text(which, "")).lower().replace("_", " ")
    unit = m.group(2).strip() if m and m.group(2) and m.group(2).strip() else None
    if key not in FIGURE_NAMES:
        raise ParameterError(f"unknown figure '{which}'; use one of: {', '.join(sorted(set(FIGURE_NAMES)))}")
    attr = FIGURE_NAMES[key]
    if unit is not None and attr not in FIGURE_KINDS:
        raise ParameterError(f"the figure '{key}' takes no unit")
    f = _figures(expr, excitation, params, band)
    if attr.startswith("mode."):
        ms = report.modes(f.poles)
        if not ms:
            return f"{ERROR_MARK} no poles, so no {key}"
        value = getattr(ms[0], attr[5:])
        if value is None:
            return f"none: the slowest mode ({ms[0].behaviour}) has no {key}"
    else:
        value = getattr(f, attr)
    if value is None:
        reason = _missing_reason(f, attr)
        return f"{ERROR_MARK} {reason}" if key == "final value" else f"none: {reason}"
    if isinstance(value, bool):
        return 1 if value else 0
    if unit is not None:
        return units.convert_out(value, FIGURE_KINDS[attr], unit)
    return value


_BLOCK = [("DC gain", "dc_gain", ""), ("initial value", "initial_value", ""),
          ("final value", "final_value", ""), ("rise time ({lo:.0%} to {hi:.0%})", "rise_time", "s"),
          ("peak time", "peak_time", "s"), ("peak value", "peak_value", ""),
          ("overshoot", "overshoot_percent", "%"), ("settling time ({band:.0%} band)", "settling_time", "s")]


@cell
def figures_block(expr, excitation=None, params=None, band=None, row=None, col=None):
    """Block of the response figures: label, value, unit, note; stability last.

    A header row names the response; a figure that does not exist has an empty value and
    the reason as its note.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        excitation: input signal: impulse, step, ramp or U(s) as text (default step)
        params (range): two-column range of parameter names and values (blank rows skipped)
        band: settling band as a fraction of the final value (default 0.02)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    f = _figures(expr, excitation, params, band)
    lo, hi = f.rise_band
    rows = [[report.input_words(f.input), "value", "unit", "note"]]
    for label, attr, unit in _BLOCK:
        if attr in _STEP_ONLY and f.input != "step":
            continue
        v = getattr(f, attr)
        rows.append([label.format(lo=lo, hi=hi, band=f.settling_band), None if v is None else float(v),
                     unit or None, _missing_reason(f, attr) if v is None else None])
    verdict, _, why = f.stability.partition(" (")
    rows.append(["stability", verdict, None, why.rstrip(")") or None])
    return _pick(rows, row, col)


def _ode(coeffs, initial, input_s, params):
    a = tuple(_vector(coeffs, "coefficients"))
    y0 = () if initial is None else tuple(c for row in _rows(initial) for c in row
                                          if c is not None and not (isinstance(c, str) and not c.strip()))
    return _ode_solution(a, y0, _input(input_s), params_of(params))


@cache.memo
def _ode_solution(coeffs: tuple, initial: tuple, input_s, params: dict):
    return api.solve_ode(list(coeffs), list(initial), input_s, params)


ODE_PARTS = {"y": "y", "y(t)": "y", "y(s)": "Y", "free": "free", "forced": "forced"}


@cell
def ode(coeffs, initial=None, input_s=None, params=None, part=None):
    """y(t), Y(s), or the free or forced part of a_n y^(n) + ... + a_0 y = u(t).

    Args:
        coeffs (range): coefficients a_n ... a_0, highest derivative first
        initial (range): initial values y(0), y'(0), ... (empty: all zero)
        input_s: U(s), the transform of the forcing u(t), as text (empty: no forcing)
        params (range): two-column range of parameter names and values (blank rows skipped)
        part: y(t) (default), Y(s), free or forced
    """
    from .printing import to_display
    key = _text(part, "y(t)").lower()
    if key not in ODE_PARTS:
        raise ParameterError(f"part must be one of y(t), Y(s), free, forced; got '{part}'")
    sol = _ode(coeffs, initial, input_s, params)
    which = ODE_PARTS[key]
    if which == "Y":
        return sp.sstr(sol.Y_s)
    res = {"y": sol.y, "free": sol.free, "forced": sol.forced}[which]
    return to_display(res.f_t, digits=6) if res.f_t is not None else "(numerical only)"


@cell
def ode_at(coeffs, initial, t, input_s=None, params=None):
    """y(t) of the solution of a_n y^(n) + ... + a_0 y = u(t) at one time t.

    Args:
        coeffs (range): coefficients a_n ... a_0, highest derivative first
        initial (range): initial values y(0), y'(0), ... (empty: all zero)
        t: the time (a number)
        input_s: U(s), the transform of the forcing u(t), as text (empty: no forcing)
        params (range): two-column range of parameter names and values (blank rows skipped)
    """
    from .engine.sample import sample_result
    sol = _ode(coeffs, initial, input_s, params)
    return float(sample_result(sol.y, np.array([_number(t, "t")])).y[0])


@cell
def transform(signal, params=None):
    """F(s) of a time signal such as exp(-2t) sin(3t) or u(t) - u(t-1).

    Args:
        signal: f(t) as text, or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
    """
    return api.s_text(api.transform(_expr(signal, "signal"), params_of(params)))


@cell
def self_check(expr, params=None):
    """Largest deviation of the closed-form f(t) from an independent numerical inversion.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
    """
    res = api.invert(_expr(expr), params_of(params))
    if res.f_t is None:
        raise UnsupportedExpressionError("a numerical result has nothing to check against")
    return api.self_check(res).max_abs_deviation


#: cell name -> plain function (what fill and the xlwings module expose)
FUNCTIONS = {
    "SF_INVERSE": inverse,
    "SF_SHEETFORMULA": sheet_formula,
    "SF_PARTFRAC": partfrac_table,
    "SF_POLES": poles_table,
    "SF_STABILITY": stability,
    "SF_RESPONSE": response,
    "SF_RESPONSE_TABLE": response_table,
    "SF_FIGURE": figure,
    "SF_FIGURES": figures_block,
    "SF_ODE": ode,
    "SF_ODE_AT": ode_at,
    "SF_TRANSFORM": transform,
    "SF_SELFCHECK": self_check,
}


# ---------------------------------------------------------------- frequency, loops, response shape
# (frequency half: sheetfuncs.engine.frequency / loops / shape; frequencies in rad/s unless unit is "Hz")
_TWO_PI = 2.0 * math.pi


def _unit(value) -> float:
    """Frequency unit factor to rad/s: 'rad/s' (default) or 'Hz'."""
    u = _text(value, "rad/s").lower().replace(" ", "")
    if u in ("rad/s", "rad", "radps", "w"):
        return 1.0
    if u in ("hz", "f"):
        return _TWO_PI
    raise ParameterError(f"unit must be rad/s or Hz, got '{value}'")


def _frequency_model(expr, params):
    from .engine import frequency
    return frequency.model(_expr(expr), params_of(params))


def _one_frequency(w, unit):
    k = _unit(unit)
    x = _number(w, "frequency")
    if x < 0:
        raise ParameterError("the frequency must not be negative")
    return np.array([x * k])


@cell
def gain_db(expr, w, params=None, unit=None):
    """Magnitude of F(jw) in dB at one frequency.

    Args:
        expr: F(s) as text, e.g. '4/(s^2+1.2s+4)'.
        w: the frequency (rad/s, or Hz when unit is 'Hz').
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz'.
    """
    m = _frequency_model(expr, params)
    v = float(m.magnitude_db(_one_frequency(w, unit))[0])
    if not math.isfinite(v):
        raise SamplingError("the magnitude is zero or infinite at this frequency")
    return v


@cell
def phase_deg(expr, w, params=None, unit=None):
    """Phase of F(jw) in degrees at one frequency, continuous from w -> 0+ (a delay keeps turning).

    Args:
        expr: F(s) as text.
        w: the frequency (rad/s, or Hz when unit is 'Hz').
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz'.
    """
    m = _frequency_model(expr, params)
    v = float(np.degrees(m.phase(_one_frequency(w, unit))[0]))
    if not math.isfinite(v):
        raise SamplingError("the phase is not defined at this frequency")
    return v


@cell
def frequency_table(expr, w_from, w_to=None, points=None, params=None, unit=None, row=None,
                    col=None):
    """Rows of frequency, |F|, |F| in dB, phase (deg), group delay (s), header first: over a column of frequencies or a log grid.

    Args:
        expr: F(s) as text.
        w_from: first frequency of the log grid, or a column of frequencies.
        w_to: last frequency of the log grid.
        points: number of grid points (default 101).
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz', for the frequencies given and shown.
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    from .engine import frequency
    e = _expr(expr)
    k = _unit(unit)
    if isinstance(w_from, (list, tuple)) and len(_vector(w_from, "frequencies")) > 1:
        w = frequency.grid([_number(x, "a frequency") for x in _vector(w_from, "frequencies")], hz=k != 1.0)
    else:
        w = frequency.grid(None, _number(w_from, "first frequency"), _number(w_to, "last frequency"),
                           _number(points, "number of points", 101, integer=True), hz=k != 1.0)
    if w.size > MAX_TABLE_ROWS:
        raise SamplingError(f"{w.size} rows is above the limit of {MAX_TABLE_ROWS}")
    m = frequency.model(e, params_of(params))
    _F, mag, db, ph, gd = frequency.evaluate(m, w)
    head = "f (Hz)" if k != 1.0 else "w (rad/s)"
    rows = [[head, "|F|", "|F| (dB)", "phase (deg)", "group delay (s)"]]
    for r in zip(w / k, mag, db, ph, gd):
        rows.append([float(x) if math.isfinite(x) else "" for x in r])
    return _pick(rows, row, col)


#: name typed in a cell -> (attribute of FrequencyFigures or a section figure, is a frequency)
FREQUENCY_FIGURES = {
    "dc gain": ("dc_gain", False), "dc gain db": ("dc_gain_db", False), "bandwidth": ("bandwidth", True),
    "peak": ("peak", False), "peak db": ("peak_db", False), "peak frequency": ("peak_frequency", True),
    "band low": ("band_low", True), "band high": ("band_high", True),
    "rolloff": ("hf_rolloff_db_per_decade", False), "natural frequency": ("natural_frequency", True),
    "damping ratio": ("damping_ratio", False), "q": ("q", False),
}
_FREQUENCY_LABELS = [("DC gain", "dc gain"), ("DC gain (dB)", "dc gain db"), ("-3 dB bandwidth", "bandwidth"),
                     ("resonant peak (dB)", "peak db"), ("peak frequency", "peak frequency"),
                     ("lower band edge", "band low"), ("upper band edge", "band high"),
                     ("high-frequency slope (dB/decade)", "rolloff"),
                     ("natural frequency (least damped pair)", "natural frequency"),
                     ("damping ratio (least damped pair)", "damping ratio"), ("Q (least damped pair)", "q")]


def _frequency_figure_value(f, key, k):
    attr, is_freq = FREQUENCY_FIGURES[key]
    if attr in ("band_low", "band_high"):
        v = f.band_edges[0 if attr == "band_low" else 1] if f.band_edges else None
    elif attr in ("natural_frequency", "damping_ratio", "q"):
        pairs = [s for s in f.sections if s.kind == "poles" and s.order == 2]
        least = min(pairs, key=lambda s: s.damping_ratio) if pairs else None
        v = getattr(least, attr) if least else None
    else:
        v = getattr(f, attr)
    if v is not None and is_freq:
        v = v / k
    return v


def _frequency_figures(expr, params):
    from .engine import frequency
    return frequency.frequency_figures(_frequency_model(expr, params))


@cell
def frequency_figure(expr, which, params=None, unit=None):
    """One frequency figure by name: dc gain, dc gain db, bandwidth, peak db, peak frequency, band low, band high, rolloff, natural frequency, damping ratio, q.

    Args:
        expr: F(s) as text.
        which: the name of the figure (see the list above).
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz', for figures that are frequencies.
    """
    key = _text(which, "").lower().replace("_", " ").replace("-", " ").strip()
    if key not in FREQUENCY_FIGURES:
        raise ParameterError(f"unknown frequency figure '{which}'; use one of: {', '.join(FREQUENCY_FIGURES)}")
    k = _unit(unit)
    v = _frequency_figure_value(_frequency_figures(expr, params), key, k)
    return "" if v is None else float(v)


@cell
def frequency_figures(expr, params=None, unit=None, row=None, col=None):
    """A labelled two-column block of the frequency figures (empty value where a figure does not exist).

    Args:
        expr: F(s) as text.
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz', for figures that are frequencies.
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    k = _unit(unit)
    f = _frequency_figures(expr, params)
    rows = []
    for label, key in _FREQUENCY_LABELS:
        v = _frequency_figure_value(f, key, k)
        rows.append([label, None if v is None else float(v)])
    return _pick(rows, row, col)


LOOP_FIGURES = {
    "gain crossover": ("gain_crossover", True), "phase margin": ("phase_margin_deg", False),
    "phase crossover": ("phase_crossover", True), "gain margin": ("gain_margin_db", False),
    "delay margin": ("delay_margin", False), "peak sensitivity": ("peak_sensitivity", False),
    "stable": ("closed_loop_stable", False), "open loop rhp poles": ("open_loop_rhp_poles", False),
    "closed loop rhp poles": ("closed_loop_rhp_poles", False), "encirclements": ("encirclements", False),
}
_LOOP_LABELS = [("gain crossover", "gain crossover"), ("phase margin (deg)", "phase margin"),
                ("phase crossover", "phase crossover"), ("gain margin (dB)", "gain margin"),
                ("delay margin (s)", "delay margin"), ("peak sensitivity", "peak sensitivity"),
                ("closed loop stable (1 yes, 0 no)", "stable"),
                ("open-loop RHP poles", "open loop rhp poles"),
                ("closed-loop RHP poles (Nyquist)", "closed loop rhp poles")]


@cache.memo
def _margins_cached(expr: str, params: dict):
    from .engine import loops
    return loops.margins(expr, params)


def _loop_value(mg, key, k):
    attr, is_freq = LOOP_FIGURES[key]
    v = getattr(mg, attr)
    if isinstance(v, bool):
        return 1 if v else 0
    if v is not None and is_freq:
        v = v / k
    return v


@cell
def loop_figure(expr, which, params=None, unit=None):
    """One loop figure of an open loop L(s) by name: gain crossover, phase margin, phase crossover, gain margin, delay margin, peak sensitivity, stable, open loop rhp poles, closed loop rhp poles, encirclements.

    Args:
        expr: the open loop L(s) as text, e.g. '2 exp(-s)/(s (3s+1))'.
        which: the name of the figure (see the list above).
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz', for the crossover frequencies.
    """
    key = _text(which, "").lower().replace("_", " ").replace("-", " ").strip()
    if key not in LOOP_FIGURES:
        raise ParameterError(f"unknown loop figure '{which}'; use one of: {', '.join(LOOP_FIGURES)}")
    k = _unit(unit)
    mg = _margins_cached(_expr(expr), params_of(params))
    v = _loop_value(mg, key, k)
    if v is None:
        if key == "stable":
            raise UnsupportedExpressionError("; ".join(mg.notes) or "closed-loop stability not decided")
        return ""
    return float(v) if not isinstance(v, int) else v


@cell
def loop_figures(expr, params=None, unit=None, row=None, col=None):
    """A labelled two-column block of the loop figures of an open loop L(s).

    Args:
        expr: the open loop L(s) as text.
        params: two-column range of parameter names and values (optional).
        unit: 'rad/s' (default) or 'Hz', for the crossover frequencies.
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    k = _unit(unit)
    mg = _margins_cached(_expr(expr), params_of(params))
    rows = []
    for label, key in _LOOP_LABELS:
        v = _loop_value(mg, key, k)
        rows.append([label, "" if v is None else (float(v) if not isinstance(v, int) else v)])
    return _pick(rows, row, col)


@cache.memo
def _loop_cached(plant: str, controller, sensor, params: dict):
    from .engine import loops
    return loops.close_loop(plant, controller, sensor, params)


def _optional_expr(value, what):
    try:
        return _expr(value, what)
    except _Empty:
        return None


@cell
def close_loop(plant, controller=None, sensor=None, part=None, params=None):
    """One transfer function of the feedback loop as expression text: loop, closed, sensitivity, effort or disturbance.

    Args:
        plant: the plant G(s) as text.
        controller: the controller C(s) as text (default 1).
        sensor: the sensor H(s) in the feedback path (default 1).
        part: loop (C G H), closed (C G/(1+L), default), sensitivity (1/(1+L)), effort (C/(1+L)) or disturbance (G/(1+L)).
        params: two-column range of parameter names and values (optional; names without values stay in the text).
    """
    from .engine.loops import LOOP_PARTS
    key = _text(part, "closed").lower()
    if key not in LOOP_PARTS:
        raise ParameterError(f"part must be one of {', '.join(LOOP_PARTS)}; got '{part}'")
    a = _loop_cached(_expr(plant, "plant"), _optional_expr(controller, "controller"),
                     _optional_expr(sensor, "sensor"), params_of(params))
    return a.part(key)


@cell
def loop_warnings(plant, controller=None, sensor=None, params=None, row=None, col=None):
    """A one-column table (header first) of the exact cancellations and right-half-plane zeros of the loop.

    Args:
        plant: the plant G(s) as text.
        controller: the controller C(s) as text (default 1).
        sensor: the sensor H(s) in the feedback path (default 1).
        params: two-column range of parameter names and values (optional).
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    a = _loop_cached(_expr(plant, "plant"), _optional_expr(controller, "controller"),
                     _optional_expr(sensor, "sensor"), params_of(params))
    items = [f"cancellation: {c}" for c in a.cancellations] + [f"warning: {z}" for z in a.rhp_zeros]
    items += [f"note: {n}" for n in a.notes]
    return _pick([["loop checks"]] + [[x] for x in (items or ["no cancellation, no right-half-plane zero"])],
                 row, col)


SHAPE_FIGURES = {
    "extremum": "extremum_value", "extremum time": "extremum_time", "final value": "final_value",
    "undershoot": "undershoot", "undershoot %": "undershoot_percent", "decay time": "decay_time",
    "decrement": "decrement", "period": "period", "measured decrement": "measured_decrement",
    "measured period": "measured_period",
}
_SHAPE_LABELS = [("extremum", "extremum"), ("extremum time", "extremum time"), ("final value", "final value"),
                 ("undershoot", "undershoot"), ("undershoot %", "undershoot %"),
                 ("decay time (to the level)", "decay time"),
                 ("logarithmic decrement (dominant poles)", "decrement"), ("period (dominant poles)", "period"),
                 ("decrement measured on y(t)", "measured decrement"), ("period measured on y(t)", "measured period")]


@cache.memo
def _shape_cached(expr: str, excitation, params: dict, decay: float):
    from .engine import shape
    return shape.response_shape(expr, params, input=excitation, decay=decay)


def _shape(expr, excitation, params, decay):
    return _shape_cached(_expr(expr), _input(excitation), params_of(params), _number(decay, "decay level", 5.0))


@cell
def shape_figure(expr, which, excitation=None, params=None, decay=None):
    """One figure of the response shape by name: extremum, extremum time, final value, undershoot, undershoot %, decay time, decrement, period, measured decrement, measured period.

    Args:
        expr: F(s) as text.
        which: the name of the figure (see the list above).
        excitation: impulse (default: the expression is the response), step, ramp or U(s).
        params: two-column range of parameter names and values (optional).
        decay: the level of the decay time in % of the largest deviation from the final value (default 5).
    """
    key = _text(which, "").lower().replace("_", " ").strip()
    if key not in SHAPE_FIGURES:
        raise ParameterError(f"unknown shape figure '{which}'; use one of: {', '.join(SHAPE_FIGURES)}")
    f = _shape(expr, excitation, params, decay)
    v = getattr(f, SHAPE_FIGURES[key])
    return f"none: no {key} for this response" if v is None else float(v)


@cell
def shape_figures(expr, excitation=None, params=None, decay=None, row=None, col=None):
    """A labelled two-column block of the response-shape figures.

    Args:
        expr: F(s) as text.
        excitation: impulse (default: the expression is the response), step, ramp or U(s).
        params: two-column range of parameter names and values (optional).
        decay: the level of the decay time in % of the largest deviation from the final value (default 5).
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    f = _shape(expr, excitation, params, decay)
    rows = []
    for label, key in _SHAPE_LABELS:
        v = getattr(f, SHAPE_FIGURES[key])
        rows.append([label, None if v is None else float(v)])
    return _pick(rows, row, col)


FUNCTIONS.update({
    "SF_GAIN_DB": gain_db,
    "SF_PHASE_DEG": phase_deg,
    "SF_FREQ_TABLE": frequency_table,
    "SF_FREQ_FIGURE": frequency_figure,
    "SF_FREQ_FIGURES": frequency_figures,
    "SF_LOOP_FIGURE": loop_figure,
    "SF_LOOP_FIGURES": loop_figures,
    "SF_CLOSE_LOOP": close_loop,
    "SF_LOOP_WARNINGS": loop_warnings,
    "SF_SHAPE_FIGURE": shape_figure,
    "SF_SHAPE_FIGURES": shape_figures,
})
