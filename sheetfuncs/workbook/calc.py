"""The small evaluator's arithmetic: cell values, + - * / ^ %, and native functions.

``_num`` reads a value as a number the way a cell formula does; ``_binop`` and
``_elementwise`` apply operators (arithmetic, ``&``, comparisons) to scalars or item
by item to rows; ``_NATIVE`` lists the native functions fill computes item by item
(PI, SQRT, EXP, LN, ATAN2, ROUND, ERFC ...), ``_AGGREGATE`` those over whole ranges
(SUM, MAX, MIN, AVERAGE, COUNT, AND, OR, SUMPRODUCT); IF and IFERROR are evaluated
lazily by the run.
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


def _text(v: Any) -> str:
    """A value as text, as ``&`` turns it into text: up to 15 significant digits."""
    if v is None:
        return ""
    if type(v) is bool:
        return "TRUE" if v else "FALSE"
    if isinstance(v, str):
        return v
    x = _num(v)
    if x == int(x) and abs(x) < 1e15:
        return str(int(x))
    text = format(x, ".15g")
    if "e" in text:
        mant, exp = text.split("e")
        text = f"{mant}E{'-' if exp.startswith('-') else '+'}{exp.lstrip('+-').lstrip('0').zfill(2)}"
    return text


def _concat(a: Any, b: Any) -> str:
    return _text(a) + _text(b)


def _rank(v: Any) -> tuple[int, Any]:
    # Excel orders numbers < text < logical values; text compares without case
    if type(v) is bool:
        return 2, v
    if isinstance(v, str):
        return 1, v.casefold()
    return 0, _num(v)


def _compare(op: str) -> Callable[[Any, Any], bool]:
    def apply(a: Any, b: Any) -> bool:
        if a is None:                   # an empty cell is 0, "" or FALSE, as the other side needs
            a = "" if isinstance(b, str) else (False if type(b) is bool else 0.0)
        if b is None:
            b = "" if isinstance(a, str) else (False if type(a) is bool else 0.0)
        x, y = _rank(a), _rank(b)
        return {"=": x == y, "<>": x != y, "<": x < y, ">": x > y, "<=": x <= y, ">=": x >= y}[op]
    return apply


_OPS: dict[str, Callable[[Any, Any], Any]] = {
    "+": lambda a, b: _finite(_num(a) + _num(b)),
    "-": lambda a, b: _finite(_num(a) - _num(b)),
    "*": lambda a, b: _finite(_num(a) * _num(b)),
    "/": _div,
    "^": _pow,
    "&": _concat,
    **{op: _compare(op) for op in ("=", "<>", "<", ">", "<=", ">=")},
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


def _truth(v: Any) -> bool:
    """A condition the way IF, AND and NOT read it."""
    if type(v) is bool:
        return v
    if v is None:
        return False
    if isinstance(v, str):
        if v.upper() in ("TRUE", "FALSE"):
            return v.upper() == "TRUE"
        raise WorkbookError(f"the text {v!r} is used as a condition")
    return _num(v) != 0


def _numbers(values: list[Any], name: str) -> list[float]:
    """The numbers SUM, MAX, MIN, AVERAGE and COUNT see: in ranges only numbers count;
    typed arguments are read as numbers (TRUE is 1, numeric text its number)."""
    out: list[float] = []
    for v in values:
        if type(v) is list:
            out += [float(x) for row in v for x in row
                    if isinstance(x, (int, float)) and type(x) is not bool]
        elif v is not None:
            out.append(_num(v))
    return out


def _average(values: list[Any]) -> float:
    xs = _numbers(values, "AVERAGE")
    if not xs:
        raise WorkbookError("AVERAGE of no numbers (division by zero)")
    return _finite(math.fsum(xs) / len(xs))


def _count(values: list[Any]) -> float:
    n = 0
    for v in values:
        if type(v) is list:
            n += sum(1 for row in v for x in row if isinstance(x, (int, float)) and type(x) is not bool)
        elif isinstance(v, (int, float)):
            n += 1
        elif isinstance(v, str):
            try:
                float(v)
                n += 1
            except ValueError:
                pass
    return float(n)


def _logical(values: list[Any], name: str) -> list[bool]:
    out: list[bool] = []
    for v in values:
        if type(v) is list:
            out += [bool(x) for row in v for x in row if isinstance(x, (bool, int, float))]
        elif v is not None:
            out.append(_truth(v))
    if not out:
        raise WorkbookError(f"{name} has no logical values to look at")
    return out


def _sumproduct(values: list[Any]) -> float:
    grids = [v if type(v) is list else [[v]] for v in values]
    shape = (len(grids[0]), len(grids[0][0]))
    if any((len(g), len(g[0])) != shape for g in grids):
        raise WorkbookError("SUMPRODUCT of ranges of different sizes")
    total = []
    for i in range(shape[0]):
        for j in range(shape[1]):
            p = 1.0
            for g in grids:
                x = g[i][j]
                p *= float(x) if isinstance(x, (int, float)) and type(x) is not bool else 0.0
            total.append(p)
    return _finite(math.fsum(total))


def _round(x: Any, digits: Any = 0.0) -> float:
    """Half away from zero on the shortest decimal form of x, as spreadsheets round."""
    from decimal import ROUND_HALF_UP, Decimal
    n = int(_num(digits))
    d = Decimal(repr(_num(x)))
    return float(d.quantize(Decimal(1).scaleb(-n), rounding=ROUND_HALF_UP))


def _mod(a: Any, b: Any) -> float:
    x, y = _num(a), _num(b)
    if y == 0:
        raise WorkbookError("MOD by zero (division by zero)")
    return _finite(x - y * math.floor(x / y))


def _atan2(x: Any, y: Any) -> float:
    a, b = _num(x), _num(y)
    if a == 0 and b == 0:
        raise WorkbookError("ATAN2(0, 0) (division by zero)")
    return math.atan2(b, a)             # the spreadsheet order is ATAN2(x, y)


def _log(x: Any, base: Any = 10.0) -> float:
    a, b = _num(x), _num(base)
    if a <= 0 or b <= 0 or b == 1:
        raise WorkbookError(f"LOG of {a:g} to base {b:g}: the number or the base is not valid")
    return math.log(a) / math.log(b)


def _erf(lo: Any, hi: Any = None) -> float:
    return math.erf(_num(lo)) if hi is None else math.erf(_num(hi)) - math.erf(_num(lo))


#: functions over their whole argument list (ranges are not taken item by item)
_AGGREGATE: dict[str, tuple[int, int, Callable[[list[Any]], Any]]] = {
    "SUM": (1, 255, lambda vs: _finite(math.fsum(_numbers(vs, "SUM")))),
    "MAX": (1, 255, lambda vs: max(_numbers(vs, "MAX"), default=0.0)),
    "MIN": (1, 255, lambda vs: min(_numbers(vs, "MIN"), default=0.0)),
    "AVERAGE": (1, 255, _average),
    "COUNT": (1, 255, _count),
    "AND": (1, 255, lambda vs: all(_logical(vs, "AND"))),
    "OR": (1, 255, lambda vs: any(_logical(vs, "OR"))),
    "SUMPRODUCT": (1, 255, _sumproduct),
}

_NATIVE: dict[str, tuple[int, int, Callable[..., Any]]] = {
    "ATAN2": (2, 2, _atan2),
    "LOG": (1, 2, _log),
    "ROUND": (2, 2, _round),
    "INT": (1, 1, lambda v: float(math.floor(_num(v)))),
    "MOD": (2, 2, _mod),
    "SIGN": (1, 1, lambda v: float((_num(v) > 0) - (_num(v) < 0))),
    "ERF": (1, 2, _erf),
    "ERFC": (1, 1, lambda v: math.erfc(_num(v))),
    "NOT": (1, 1, lambda v: not _truth(v)),
    "CONCATENATE": (1, 255, lambda *vs: "".join(_text(v) for v in vs)),
    "LEN": (1, 1, lambda v: float(len(_text(v)))),
    "ASIN": (1, 1, _checked("ASIN", math.asin, lambda x: -1 <= x <= 1, "outside -1..1")),
    "ACOS": (1, 1, _checked("ACOS", math.acos, lambda x: -1 <= x <= 1, "outside -1..1")),
    "SINH": (1, 1, _checked("SINH", math.sinh, _any, "")),
    "COSH": (1, 1, _checked("COSH", math.cosh, _any, "")),
    "TANH": (1, 1, _checked("TANH", math.tanh, _any, "")),
    "DEGREES": (1, 1, _checked("DEGREES", math.degrees, _any, "")),
    "RADIANS": (1, 1, _checked("RADIANS", math.radians, _any, "")),
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
