"""The one error tree of sheetfuncs.

Every error a user can cause is a ``SheetfuncsError``; adapters (command line,
cells, fill) catch that one class and show its message.  Where it fits, an
error also inherits the matching builtin so ordinary ``except ValueError``
code keeps working::

    SheetfuncsError (Exception)
     +-- ExpressionSyntaxError (ValueError)   text that is not a valid expression
     +-- ParameterError (ValueError)          a parameter name or value is wrong or missing
     +-- LimitError (ValueError)              input too long / degree too high / too slow
     +-- UnsupportedExpressionError (ValueError)  valid, but outside what we can invert
     +-- SamplingError (ValueError)           bad time grid or an evaluation failure
     +-- WorkbookError                        a workbook cannot be read or written

Each class stores its fields and builds its message in one place.
"""
from __future__ import annotations


class SheetfuncsError(Exception):
    """Root of all errors raised on purpose by sheetfuncs."""

    def __init__(self, message: str):
        super().__init__(message)
        self.message = message

    def __str__(self) -> str:  # pragma: no cover - trivial
        return self.message


class ExpressionSyntaxError(SheetfuncsError, ValueError):
    """The text could not be read as an expression.

    ``position`` is 0-based; the message shows it 1-based as people count.
    """

    def __init__(self, reason: str, text: str = "", position: int | None = None):
        self.reason = reason
        self.text = text
        self.position = position
        if position is None:
            msg = f"{reason} in '{_clip(text)}'"
        else:
            frag = text[max(0, position - 8): position + 8]
            msg = f"{reason} at position {position + 1} (near '{frag}')"
        super().__init__(msg)


class ParameterError(SheetfuncsError, ValueError):
    """A parameter is missing, misnamed or has a value that is not a number."""

    def __init__(self, reason: str, name: str | None = None):
        self.reason = reason
        self.name = name
        super().__init__(reason)


class LimitError(SheetfuncsError, ValueError):
    """Input beyond a safety cap (length, degree, exponent, time)."""

    def __init__(self, what: str, value, limit):
        self.what = what
        self.value = value
        self.limit = limit
        super().__init__(f"{what} is {value}, above the limit of {limit}; simplify the expression")


class UnsupportedExpressionError(SheetfuncsError, ValueError):
    """A valid expression that this operation cannot handle."""

    def __init__(self, reason: str, hint: str = ""):
        self.reason = reason
        self.hint = hint
        super().__init__(reason + (f"; {hint}" if hint else ""))


class SamplingError(SheetfuncsError, ValueError):
    """The time grid is invalid or evaluation failed."""


class WorkbookError(SheetfuncsError):
    """A workbook could not be read, understood or written."""

    def __init__(self, reason: str, file: str | None = None, cell: str | None = None):
        self.reason = reason
        self.file = file
        self.cell = cell
        where = ", ".join(x for x in (file, cell) if x)
        super().__init__(f"{where}: {reason}" if where else reason)


def _clip(text: str, n: int = 60) -> str:
    return text if len(text) <= n else text[: n - 3] + "..."
