"""sheetfuncs: s-domain (Laplace) toolkit for spreadsheets.

Results support engineering judgement; safety-relevant designs follow local
codes and licensed review.
"""
__version__ = "0.1.0"

from .api import excel_formula as excel_formula
from .api import figures as figures
from .api import invert as invert
from .api import latex as latex
from .api import sample as sample
from .api import self_check as self_check
from .api import solve_ode as solve_ode
from .api import transform as transform
from .engine.parse import parse as parse
from .errors import (ExpressionSyntaxError as ExpressionSyntaxError, LimitError as LimitError,
                     ParameterError as ParameterError, SamplingError as SamplingError,
                     SheetfuncsError as SheetfuncsError,
                     UnsupportedExpressionError as UnsupportedExpressionError,
                     WorkbookError as WorkbookError)

__all__ = ["__version__", "invert", "figures", "sample", "solve_ode", "transform", "self_check",
           "excel_formula", "latex", "parse", "SheetfuncsError", "ExpressionSyntaxError",
           "ParameterError", "LimitError", "UnsupportedExpressionError", "SamplingError",
           "WorkbookError"]
