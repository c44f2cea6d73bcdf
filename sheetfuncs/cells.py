"""Cell functions for Excel through xlwings (the only module importing xlwings).

Each function converts nothing itself: it hands the cell values to the plain
function of the same name in ``cellfuncs`` and returns what that gives
(a number, a text or an array that spills).  The hidden ``caller`` argument
(xlwings passes the calling range on Windows) gives access to the workbook's
defined names, used as parameter values.  Off Windows xlwings' decorators
pass through, so these functions are callable anywhere with Excel-shaped
values (floats, None, 2-D lists).

Set-up in Excel: docs/excel.md.
"""
from __future__ import annotations

from . import cellfuncs as _cf

try:
    import xlwings as xw
except ImportError:  # pragma: no cover - the [excel] extra is not installed
    class _Passthrough:
        @staticmethod
        def func(f=None, **_):
            return f if f is not None else (lambda g: g)

        @staticmethod
        def arg(*_, **__):
            return lambda g: g

        @staticmethod
        def ret(*_, **__):
            return lambda g: g
    xw = _Passthrough()


def _book_names(caller) -> dict:
    """Numeric single-cell defined names of the calling workbook."""
    if caller is None:
        return {}
    out = {}
    try:
        for name in caller.sheet.book.names:
            try:
                rng = name.refers_to_range
                value = rng.value
            except Exception:  # noqa: BLE001 - names to constants, #REF! ...
                continue
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                out[name.name.split("!")[-1]] = value
    except Exception:  # noqa: BLE001 - no book access: just no names
        return {}
    return out


def _call(plain, caller, *args):
    with _cf.name_values(_book_names(caller)):
        return plain(*args)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_INVERSE(expr, params=None, form=None, digits=None, caller=None):
    """f(t) for t >= 0 of F(s): form 'text' (default), 'sympy' or 'latex'."""
    return _call(_cf.inverse, caller, expr, params, form, digits)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_SHEETFORMULA(expr, tref=None, params=None, digits=None, caller=None):
    """A native spreadsheet formula of f(t) using the cell named in tref (text, e.g. "A5")."""
    return _call(_cf.sheet_formula, caller, expr, tref, params, digits)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_PARTFRAC(expr, params=None, digits=None, caller=None):
    """Partial-fraction table: pole, order, coefficient, real-form term, time term."""
    return _call(_cf.partfrac_table, caller, expr, params, digits)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_POLES(expr, params=None, digits=None, caller=None):
    """Poles and zeros with damping ratio, natural frequency, time constant; stability."""
    return _call(_cf.poles_table, caller, expr, params, digits)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_STABILITY(expr, params=None, caller=None):
    """Stability verdict from the poles."""
    return _call(_cf.stability, caller, expr, params)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_RESPONSE(expr, t, input=None, params=None, caller=None):
    """Response at one time t to input: impulse (default), step, ramp or U(s)."""
    return _call(_cf.response, caller, expr, t, input, params)


@xw.func(category="sheetfuncs")
@xw.arg("times", ndim=2)
@xw.arg("params", ndim=2)
def SF_RESPONSE_TABLE(expr, times, stop=None, n=None, input=None, params=None, caller=None):
    """t and y columns: over a column of times, or from start to stop in n points."""
    return _call(_cf.response_table, caller, expr, times, stop, n, input, params)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_FIGURE(expr, which, input=None, params=None, band=None, caller=None):
    """One figure: final value, initial value, DC gain, rise/peak/settling time, peak value, overshoot."""
    return _call(_cf.figure, caller, expr, which, input, params, band)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_FIGURES(expr, input=None, params=None, band=None, caller=None):
    """Labelled two-column block of the response figures."""
    return _call(_cf.figures_block, caller, expr, input, params, band)


@xw.func(category="sheetfuncs")
@xw.arg("coeffs", ndim=2)
@xw.arg("initial", ndim=2)
@xw.arg("params", ndim=2)
def SF_ODE(coeffs, initial=None, input_s=None, params=None, part=None, caller=None):
    """y(t), Y(s), free or forced part of a_n y^(n) + ... + a_0 y = u(t)."""
    return _call(_cf.ode, caller, coeffs, initial, input_s, params, part)


@xw.func(category="sheetfuncs")
@xw.arg("coeffs", ndim=2)
@xw.arg("initial", ndim=2)
@xw.arg("params", ndim=2)
def SF_ODE_AT(coeffs, initial, t, input_s=None, params=None, caller=None):
    """y(t) of the ODE solution at one time t."""
    return _call(_cf.ode_at, caller, coeffs, initial, t, input_s, params)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_TRANSFORM(signal, params=None, caller=None):
    """F(s) of a time signal (t^n, exp, sin, cos, u(t - T), delta(t - T) ...)."""
    return _call(_cf.transform, caller, signal, params)


@xw.func(category="sheetfuncs")
@xw.arg("params", ndim=2)
def SF_SELFCHECK(expr, params=None, caller=None):
    """Largest deviation of f(t) from an independent numerical inversion."""
    return _call(_cf.self_check, caller, expr, params)


#: the exported cell functions, by name
CELL_FUNCTIONS = {name: obj for name, obj in globals().items() if name.startswith(_cf.PREFIX)}
