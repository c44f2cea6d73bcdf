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

import numpy as np
import sympy as sp

from . import api
from .engine import cache
from .engine.invert import pair_time_term
from .engine.parse import CONSTANTS, TIME_FUNCTIONS
from .engine.partfrac import PairTerm
from .engine.results import pair
from .report import complex_text
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


def params_of(value) -> dict:
    """Parameters from a two-column name/value range (blank rows skipped),
    over the workbook's defined names."""
    out = dict(_names.get())
    rows = _rows(value)
    if len(rows) == 1 and len(rows[0]) > 2 and len(rows[0]) % 2 == 0:
        rows = [rows[0][i:i + 2] for i in range(0, len(rows[0]), 2)]     # a row of pairs
    for i, row in enumerate(rows):
        cells = [c for c in row]
        if all(c is None or (isinstance(c, str) and not c.strip()) for c in cells):
            continue
        if len(cells) < 2:
            raise ParameterError(f"parameter row {i + 1} needs a name and a value (two columns)")
        name, val = cells[0], cells[1]
        if not isinstance(name, str) or not name.strip():
            raise ParameterError(f"parameter row {i + 1}: the name must be text, got {name!r}")
        name = name.strip().split(" ")[0].split("[")[0]      # 'R [ohm]' -> 'R'
        if val is None or (isinstance(val, str) and not val.strip()):
            raise ParameterError(f"parameter '{name}' has no value", name)
        out[name] = val
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


def _fmt(x, digits):
    if x is None:
        return ""
    if isinstance(x, bool):
        return x
    if isinstance(x, str):
        return x
    return float(f"{x:.{digits}g}") if digits else float(x)


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
    if res.f_t is None:
        return f"(no closed form: numerical by {res.method.split('(')[-1].rstrip(')')})"
    if form == "text":
        return to_display(res.f_t, digits=nd or 6)
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


@cell
def partfrac_table(expr, params=None, digits=None, row=None, col=None):
    """Partial-fraction table: pole, order, coefficient, real-form term, time term.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
        digits: significant digits of the numbers (default 6)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    from .printing import to_display
    nd = _number(digits, "digits", 6, integer=True)
    res = api.invert(_expr(expr), params_of(params))
    if not res.pieces or len(res.pieces) != 1 or res.pieces[0].delay != 0:
        raise UnsupportedExpressionError("a partial-fraction table needs a rational F(s) without delay")
    dec = res.pieces[0].decomposition
    rows = [["pole", "order", "coefficient", "real-form term", "time term"]]
    s = sp.Symbol("s")
    for i, c in enumerate(dec.direct):
        if c != 0:
            rows.append(["(polynomial part)", i, complex_text(pair(c), nd), to_display(c * s ** i, digits=nd),
                         to_display(c * (sp.DiracDelta(sp.Symbol("t")) if i == 0 else sp.DiracDelta(sp.Symbol("t"), i)), digits=nd)])
    for pt in dec.pair_terms:
        real_form, time_term = _real_form(pt), pair_time_term(pt)
        for j, term in enumerate(_terms_of(pt)):
            rows.append([complex_text(pair(term.pole), nd), term.order, complex_text(pair(term.coefficient), nd),
                         to_display(real_form, digits=nd) if j == 0 else "(with the row above)",
                         to_display(time_term, digits=nd) if j == 0 else "(with the row above)"])
    return _pick(rows, row, col)


def _terms_of(pt: PairTerm):
    from .engine.partfrac import pair_to_terms
    return pair_to_terms(pt)


def _real_form(pt: PairTerm):
    """The pair's two complex terms as one real fraction N(s)/D(s)^k."""
    s = sp.Symbol("s")
    terms = _terms_of(pt)
    if len(terms) == 1:
        t = terms[0]
        return t.coefficient / (s - t.pole) ** t.order
    a, b = terms
    num = sp.expand(a.coefficient * (s - b.pole) ** pt.order + b.coefficient * (s - a.pole) ** pt.order)
    den = sp.expand((s - a.pole) * (s - b.pole))
    return num / den ** pt.order


@cell
def poles_table(expr, params=None, digits=None, row=None, col=None):
    """Poles and zeros with damping ratio, natural frequency and time constant; stability last.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        params (range): two-column range of parameter names and values (blank rows skipped)
        digits: significant digits of the numbers (empty: full precision)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    nd = _number(digits, "digits", 0, integer=True) or None
    f = api.figures(_expr(expr), params_of(params), input="impulse")
    rows = [["kind", "real part", "imaginary part", "multiplicity", "damping ratio",
             "natural frequency (rad/s)", "time constant"]]
    for p in f.poles:
        rows.append(["pole", _fmt(p.pole.real, nd), _fmt(p.pole.imag, nd), p.multiplicity,
                     _fmt(p.damping_ratio, nd), _fmt(p.natural_frequency, nd), _fmt(p.time_constant, nd)])
    for z in f.zeros:
        rows.append(["zero", _fmt(z.real, nd), _fmt(z.imag, nd), 1, "", "", ""])
    rows.append(["stability", f.stability, "", "", "", "", ""])
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
    from .engine import limits
    from .engine.invert import invert_expr
    from .engine.sample import response_expr
    Y = response_expr(expr, params, input or "impulse")
    with limits.deadline(None):
        return invert_expr(Y)


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
    rows = [["t", "y"]]
    rows += [[float(a), float(b) if math.isfinite(b) else ""] for a, b in zip(out.t, out.y)]
    return _pick(rows, row, col)


FIGURE_NAMES = {
    "final value": "final_value", "initial value": "initial_value", "dc gain": "dc_gain",
    "rise time": "rise_time", "peak time": "peak_time", "peak value": "peak_value",
    "overshoot": "overshoot_percent", "overshoot %": "overshoot_percent",
    "settling time": "settling_time", "stable": "stable", "stability": "stability",
}
_FIGURE_LABELS = [("DC gain", "dc_gain"), ("initial value", "initial_value"), ("final value", "final_value"),
                  ("rise time", "rise_time"), ("peak time", "peak_time"), ("peak value", "peak_value"),
                  ("overshoot %", "overshoot_percent"), ("settling time", "settling_time"),
                  ("stability", "stability")]


def _figures(expr, input, params, band):
    return api.figures(_expr(expr), params_of(params), input=_text(input, "step"),
                       settle=_number(band, "settling band", 0.02))


@cell
def figure(expr, which, excitation=None, params=None, band=None):
    """One response figure by name: final value, overshoot, rise, peak or settling time ...

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        which: name of the figure, e.g. "overshoot", "settling time", "final value"
        excitation: input signal: impulse, step, ramp or U(s) as text (default step)
        params (range): two-column range of parameter names and values (blank rows skipped)
        band: settling band as a fraction of the final value (default 0.02)
    """
    key = _text(which, "").lower().replace("_", " ")
    if key not in FIGURE_NAMES:
        raise ParameterError(f"unknown figure '{which}'; use one of: {', '.join(sorted(set(FIGURE_NAMES)))}")
    f = _figures(expr, excitation, params, band)
    value = getattr(f, FIGURE_NAMES[key])
    if value is None:
        return f"{ERROR_MARK} {f.final_value_note}" if key == "final value" else ""
    if isinstance(value, bool):
        return 1 if value else 0
    return value


@cell
def figures_block(expr, excitation=None, params=None, band=None, row=None, col=None):
    """Labelled two-column block of the response figures.

    Args:
        expr: F(s) as text, e.g. "(s+3)/(s^2+2s+5)", or a cell holding it
        excitation: input signal: impulse, step, ramp or U(s) as text (default step)
        params (range): two-column range of parameter names and values (blank rows skipped)
        band: settling band as a fraction of the final value (default 0.02)
        row: row of the table to give alone, 1 = the header (empty: the whole table)
        col: column of the table to give alone, 1 = the first (empty: the whole table)
    """
    f = _figures(expr, excitation, params, band)
    rows = []
    for label, attr in _FIGURE_LABELS:
        if attr in ("rise_time", "peak_time", "peak_value", "overshoot_percent", "settling_time") and f.input != "step":
            continue
        v = getattr(f, attr)
        rows.append([label, "" if v is None else v])
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
