"""sheetfuncs: s-domain (Laplace) toolkit for spreadsheets.

Results support engineering judgement; safety-relevant designs follow local
codes and licensed review.

Names are imported on first use, so ``import sheetfuncs`` (and the command
line) starts without SymPy, SciPy or openpyxl.
"""
__version__ = "0.1.0"

_API = {"invert", "figures", "sample", "solve_ode", "transform", "self_check", "excel_formula",
        "latex"}
_ERRORS = {"SheetfuncsError", "ExpressionSyntaxError", "ParameterError", "LimitError",
           "UnsupportedExpressionError", "SamplingError", "WorkbookError"}

__all__ = ["__version__", "invert", "figures", "sample", "solve_ode", "transform", "self_check",
           "excel_formula", "latex", "parse", "SheetfuncsError", "ExpressionSyntaxError",
           "ParameterError", "LimitError", "UnsupportedExpressionError", "SamplingError",
           "WorkbookError"]


def __getattr__(name):
    if name in _API:
        from . import api
        return getattr(api, name)
    if name in _ERRORS:
        from . import errors
        return getattr(errors, name)
    if name == "parse":
        from .engine.parse import parse
        return parse
    raise AttributeError(f"module 'sheetfuncs' has no attribute {name!r}")


def __dir__():
    return sorted(__all__)
