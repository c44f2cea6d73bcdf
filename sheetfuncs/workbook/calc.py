"""The small evaluator's arithmetic: cell values, + - * / ^ %, and native functions.

``_num`` reads a value as a number the way a cell formula does; ``_binop`` and
``_elementwise`` apply operators to scalars or item by item to rows; ``_NATIVE``
lists the few native functions fill computes itself (PI, SQRT, EXP, LN, ABS ...).
``_normalise`` turns what one of our functions returned into a cell value or rows.
"""
from __future__ import annotations

import inspect
import math
import numbers
from typing import Any, Callable, cast

from sheetfuncs.errors import WorkbookError


class _Located(WorkbookError):
    """An error whose message already names the cell it is about."""


class _Unsupported(WorkbookError):
    """Something the small evaluator does not compute."""


def _arity_text(sig: inspect.Signature) -> str:
    kinds = (inspect.Parameter.POSITIONAL_ONLY, inspect.Parameter.POSITIONAL_OR_KEYWORD)
    params = [p for p in sig.parameters.values() if p.kind in kinds]
    need = sum(1 for p in params if p.default is inspect.Parameter.empty)
    if any(p.kind is inspect.Parameter.VAR_POSITIONAL for p in sig.parameters.values()):
        return f"at least {need} argument{'s' if need != 1 else ''}"
    if need == len(params):
        return "no arguments" if need == 0 else f"{need} argument{'s' if need != 1 else ''}"
    return f"{need} to {len(params)} arguments"


def _cell_value(v: Any) -> Any:
    return float(v) if type(v) is int else v


def _scalar(v: Any, name: str) -> Any:
    if v is None or isinstance(v, (bool, str, int, float)):
        return v
    if hasattr(v, "item") and getattr(v, "shape", None) == ():     # numpy scalar
        return _scalar(v.item(), name)
    if isinstance(v, numbers.Real):
        return float(v)
    raise WorkbookError(f"{name} returned a value of type {type(v).__name__}, which a cell cannot hold")


def _normalise(result: Any, name: str) -> Any:
    """A function's result as a cell value or rows of cell values (1-D = one row, as xlwings)."""
    if hasattr(result, "tolist") and not isinstance(result, (str, bytes)):
        result = result.tolist()
    if not isinstance(result, (list, tuple)):
        return _scalar(result, name)
    if not result:
        raise WorkbookError(f"{name} returned an empty array")
    if all(isinstance(row, (list, tuple)) for row in result):
        rows = [[_scalar(v, name) for v in row] for row in result]
        if len({len(row) for row in rows}) != 1 or not rows[0]:
            raise WorkbookError(f"{name} returned rows of different lengths")
        return rows
    return [[_scalar(v, name) for v in result]]


def _num(v: Any) -> float:
    t = type(v)
    if t is float:
        return cast(float, v)
    if v is None:
        return 0.0
    if t is bool:
        return 1.0 if v else 0.0
    if t is int:
        return float(v)
    if t is str:
        try:
            x = float(v)
        except ValueError:
            x = math.nan
        if math.isfinite(x):
            return x
        raise WorkbookError(f"the text {v!r} is used as a number")
    if isinstance(v, numbers.Real):
        return float(v)
    raise WorkbookError(f"a value of type {t.__name__} is used as a number")


def _finite(x: float) -> float:
    if math.isfinite(x):
        return x
    raise WorkbookError("a result is too large to be a number")


def _pow(a: Any, b: Any) -> float:
    x, y = _num(a), _num(b)
    if x == 0 and y <= 0:
        raise WorkbookError("division by zero" if y < 0 else "0^0 is undefined")
    if x < 0 and y != int(y):
        raise WorkbookError("a negative number raised to a fractional power")
    try:
        return _finite(x ** y)
    except OverflowError:
        raise WorkbookError("a result is too large to be a number") from None


def _div(a: Any, b: Any) -> float:
    y = _num(b)
    if y == 0:
        raise WorkbookError("division by zero")
    return _finite(_num(a) / y)


_OPS: dict[str, Callable[[Any, Any], float]] = {
    "+": lambda a, b: _finite(_num(a) + _num(b)),
    "-": lambda a, b: _finite(_num(a) - _num(b)),
    "*": lambda a, b: _finite(_num(a) * _num(b)),
    "/": _div,
    "^": _pow,
}


def _binop(op: str, a: Any, b: Any) -> Any:
    fn = _OPS.get(op)
    if fn is None:
        what = {",": "the range union ','", " ": "the range intersection ' '"}.get(op, f"the operator {op}")
        raise _Unsupported(f"{what} is not supported by fill")
    return _elementwise(fn, [a, b])


def _neg(a: Any) -> float:
    return 0.0 - _num(a)


def _percent(a: Any) -> float:
    return _num(a) / 100.0


def _elementwise(fn: Callable[..., Any], values: list[Any]) -> Any:
    """``fn`` on scalars, or item by item on rows (a single row or column is repeated)."""
    if not any(type(v) is list for v in values):
        return fn(*values)
    grids = [v if type(v) is list else [[v]] for v in values]
    shapes = [(len(g), len(g[0])) for g in grids]
    m = max(s[0] for s in shapes)
    n = max(s[1] for s in shapes)
    if any(s[0] not in (1, m) or s[1] not in (1, n) for s in shapes):
        sizes = " and ".join(f"{a}x{b}" for a, b in shapes)
        raise WorkbookError(f"ranges of different sizes ({sizes}) in one calculation")
    return [[fn(*(g[i if s[0] > 1 else 0][j if s[1] > 1 else 0] for g, s in zip(grids, shapes, strict=True)))
             for j in range(n)] for i in range(m)]


def _checked(name: str, fn: Callable[[float], float], ok: Callable[[float], bool],
             why: str) -> Callable[[Any], float]:
    def apply(v: Any) -> float:
        x = _num(v)
        if not ok(x):
            raise WorkbookError(f"{name} of {x:g}: {why}")
        try:
            return _finite(fn(x))
        except OverflowError:
            raise WorkbookError("a result is too large to be a number") from None
    return apply


def _any(x: float) -> bool:
    return True


_NATIVE: dict[str, tuple[int, int, Callable[..., Any]]] = {
    "PI": (0, 0, lambda: math.pi),
    "SQRT": (1, 1, _checked("SQRT", math.sqrt, lambda x: x >= 0, "the number is negative")),
    "EXP": (1, 1, _checked("EXP", math.exp, _any, "")),
    "LN": (1, 1, _checked("LN", math.log, lambda x: x > 0, "the number is not positive")),
    "LOG10": (1, 1, _checked("LOG10", math.log10, lambda x: x > 0, "the number is not positive")),
    "ABS": (1, 1, _checked("ABS", abs, _any, "")),
    "SIN": (1, 1, _checked("SIN", math.sin, _any, "")),
    "COS": (1, 1, _checked("COS", math.cos, _any, "")),
    "TAN": (1, 1, _checked("TAN", math.tan, _any, "")),
    "ATAN": (1, 1, _checked("ATAN", math.atan, _any, "")),
    "POWER": (2, 2, _pow),
    "SINGLE": (1, 1, lambda v: v),      # implicit intersection '@'; handled in _call
}
