"""Cell functions for Excel through xlwings (the only module importing xlwings).

The wrappers are generated from ``cellfuncs.FUNCTIONS`` and each function's
signature and docstring (``cellfuncs.describe``): same names and arguments,
the docstring's first line as the function wizard's description and the
``Args:`` lines as the argument descriptions, ``ndim=2`` for arguments that
take ranges.  A function added to ``cellfuncs`` is here after a restart of
the UDF server and *Import Functions*.

- ``call_in_wizard=False``: nothing heavy runs while a formula is typed.
- ``err_to_str=True`` on every argument: an error value in an input cell
  (``#N/A``, ``#VALUE!`` ...) arrives as its text and the cell answers
  ``#SF! input error ...`` instead of computing with an empty value.
- Parameters: pass the parameter range (name/value columns) as ``params``;
  then Excel sees the dependency and recomputes when a value changes.  Defined
  names of the workbook are read too (through xlwings' hidden ``caller``), as
  ``fill`` reads them: workbook-level names of one cell holding a number; a
  cell that uses such a name without its range needs a full recalculation
  (Ctrl+Alt+F9) after the value changes.
- Texts longer than the 32,767 characters a cell holds become a clear
  ``#SF!`` message (in ``cellfuncs``).

Off Windows xlwings' decorators pass through, so these functions are callable
anywhere with Excel-shaped values (floats, None, 2-D lists).  Set-up in
Excel: docs/excel.md.
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

CATEGORY = "sheetfuncs"

#: what Excel passes for an error value in a cell when the argument has err_to_str
EXCEL_ERRORS = frozenset({"#N/A", "#VALUE!", "#REF!", "#DIV/0!", "#NUM!", "#NAME?", "#NULL!",
                          "#SPILL!", "#CALC!", "#GETTING_DATA", "#FIELD!", "#BLOCKED!", "#CONNECT!",
                          "#BUSY!", "#UNKNOWN!"})

# names the fill planner keeps for itself (one place: workbook.refs)
_RESERVED_NAME_PREFIXES = ("_sfspill", "_xlnm")


def _book_names(caller) -> dict:
    """Workbook-level defined names of one cell holding a number (as ``fill`` reads them)."""
    if caller is None:
        return {}
    out = {}
    try:
        for name in caller.sheet.book.names:
            try:
                full = name.name
                if "!" in full or full.lower().startswith(_RESERVED_NAME_PREFIXES):
                    continue                        # sheet-level names are not parameters in fill
                rng = name.refers_to_range
                if rng.count != 1:
                    continue
                value = rng.value
            except Exception:  # noqa: BLE001 - names to constants, #REF! ...
                continue
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                out[full] = value
    except Exception:  # noqa: BLE001 - no book access: just no names
        return {}
    return out


def _input_error(names, args):
    for name, value in zip(names, args):
        cells = value if isinstance(value, (list, tuple)) else [value]
        for row in cells:
            for c in (row if isinstance(row, (list, tuple)) else [row]):
                if isinstance(c, str) and c.strip() in EXCEL_ERRORS:
                    return f"{_cf.ERROR_MARK} input error: {c.strip()} in argument {name}"
    return None


def _call(plain, names, caller, *args):
    bad = _input_error(names, args)
    if bad:
        return bad
    with _cf.name_values(_book_names(caller)):
        return plain(*args)


def wrapper(info, *, with_caller: bool = True, decorators=None):
    """An xlwings function with the cell function's exact argument list.

    ``with_caller``: add xlwings' hidden ``caller`` (classic xlwings on Windows) for the
    workbook's defined names; xlwings Lite has none (``sheetfuncs.lite``)."""
    deco = decorators if decorators is not None else xw
    args = [a.name for a in info.args]
    if not all(a.isidentifier() for a in args) or not info.name.isidentifier():
        raise ValueError(f"{info.name}: argument names must be identifiers")
    sig = ", ".join(a.name if a.required else f"{a.name}=None" for a in info.args)
    extra = ("caller=None", "caller") if with_caller else ("", "None")
    params = ", ".join(p for p in (sig, extra[0]) if p)
    src = (f"def {info.name}({params}):\n"
           f"    return _call(_plain, _names, {extra[1]}, {', '.join(args)})\n")
    scope = {"_call": _call, "_plain": _cf.FUNCTIONS[info.name], "_names": tuple(args)}
    exec(compile(src, f"<sheetfuncs.cells {info.name}>", "exec"), scope)   # our own identifiers only
    f = scope[info.name]
    f.__doc__ = info.summary
    f.__module__ = __name__
    for a in reversed(info.args):
        opts = {"doc": a.description, "err_to_str": True}
        if a.is_range:
            opts["ndim"] = 2
        f = deco.arg(a.name, **opts)(f)
    return deco.func(category=CATEGORY, call_in_wizard=False)(f)


#: the exported cell functions, by name
CELL_FUNCTIONS = {}
for _info in _cf.catalogue():
    CELL_FUNCTIONS[_info.name] = globals()[_info.name] = wrapper(_info)
del _info
