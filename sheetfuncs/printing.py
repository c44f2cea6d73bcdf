"""Printers: SymPy expressions f(t) -> text, display text, LaTeX, spreadsheet formula.

The engine builds SymPy expressions only; these printers turn them into text.
Each output format is a SymPy printer subclass with one ``_print_<Class>`` method
per node type.

* :func:`to_sympy_text` -- SymPy syntax read back by ``sympy.sympify`` (pass the
  symbols with their assumptions as ``locals``, e.g. ``{"t": T, "tau": ...}``).
* :func:`to_display`    -- short readable text, ``u(t - 2)`` steps, ``δ(t)`` impulses.
* :func:`to_latex`      -- LaTeX for reports.
* :func:`to_excel`      -- a formula for Excel and LibreOffice Calc.
"""
from __future__ import annotations

import keyword
import re
from decimal import Decimal

import sympy as sp
from sympy.printing.latex import LatexPrinter
from sympy.printing.precedence import PRECEDENCE
from sympy.printing.printer import Printer
from sympy.printing.str import StrPrinter

from sheetfuncs._types import T
from sheetfuncs.errors import LimitError, ParameterError, UnsupportedExpressionError

__all__ = ["round_numbers", "to_sympy_text", "to_display", "to_latex", "to_excel",
           "display_result", "excel_result", "EXCEL_FORMULA_MAX_CHARS"]

#: Excel refuses formulas longer than this (LibreOffice accepts the same).
EXCEL_FORMULA_MAX_CHARS = 8192


# ----------------------------------------------------------------- helpers

def _check_expr(expr) -> sp.Basic:
    """Accept SymPy objects and plain numbers; refuse text (it would be executed)."""
    if isinstance(expr, sp.Basic):
        return expr
    if isinstance(expr, (int, float)) and not isinstance(expr, bool):
        return sp.sympify(expr)
    raise TypeError(f"expected a SymPy expression, got {type(expr).__name__}")


def _check_digits(digits, name: str = "digits", high: int = 50, allow_none: bool = True):
    if digits is None and allow_none:
        return None
    if isinstance(digits, bool) or not isinstance(digits, int) or not 1 <= digits <= high:
        raise ParameterError(f"{name} must be a whole number from 1 to {high}, got {digits!r}", name)
    return digits


def _rounded_float(value: sp.Expr, digits: int) -> sp.Float:
    """``value`` (a real number) rounded to ``digits`` significant decimal digits."""
    v = sp.Float(value.evalf(digits + 10), digits + 10)
    if v == 0:
        return sp.Float(0)
    text = format(Decimal(sp.sstr(v, full_prec=True)), f".{digits - 1}e")
    return sp.Float(text, max(15, digits))


def round_numbers(expr: sp.Basic, digits: int) -> sp.Basic:
    """Round every number that is not a whole number to ``digits`` significant digits.

    Floats, rationals, surds, pi, E and other numeric sub-expressions become
    Floats; integers, symbols, exact exponents (``t**(-1/2)`` stays) and the
    order of ``DiracDelta(t, k)`` are kept.  Numeric factors of a product
    (terms of a sum) are combined before rounding, so ``3*sqrt(2)*t`` gives
    ``4.24264*t``, not ``3*1.41421*t``.
    """
    digits = _check_digits(digits, allow_none=False)
    return _round(_check_expr(expr), digits)


def _round(e: sp.Basic, n: int) -> sp.Basic:
    if not e.args:
        if e.is_Integer or not e.is_number:
            return e
        done = _round_number(e, n)
        return e if done is None else done
    if isinstance(e, sp.Expr) and e.is_number and not e.free_symbols:
        done = _round_number(e, n)
        if done is not None:
            return done
    if isinstance(e, (sp.Heaviside, sp.DiracDelta)):     # keep H0 / derivative order
        return e.func(_round(e.args[0], n), *e.args[1:])
    if e.is_Pow:
        exp = e.exp if e.exp.is_Rational else _round(e.exp, n)
        return sp.Pow(_round(e.base, n), exp)
    if e.is_Mul or e.is_Add:
        numeric = [a for a in e.args if a.is_number and not a.free_symbols]
        other = [_round(a, n) for a in e.args if not (a.is_number and not a.free_symbols)]
        if numeric:
            const = e.func(*numeric)
            other.insert(0, const if const.is_Integer else (_round_number(const, n) or const))
        return e.func(*other)
    return e.func(*[_round(a, n) for a in e.args])


def _round_number(e: sp.Expr, n: int):
    """Rounded Float (or complex Float pair) for a numeric ``e``; None if not finite."""
    if e.is_Integer:
        return e
    v = e.evalf(n + 10)
    if v.is_Float:
        return _rounded_float(v, n)
    re_, im_ = v.as_real_imag()
    if re_.is_Number and im_.is_Number and re_.is_finite and im_.is_finite:
        re_r = re_ if re_.is_zero else _rounded_float(re_, n)
        im_r = im_ if im_.is_zero else _rounded_float(im_, n)
        return re_r + im_r * sp.I
    return None


def _short_float(x: float, digits: int) -> str:
    """Shortest decimal text of ``x`` to ``digits`` significant digits, no trailing zeros."""
    text = format(x, f".{digits}g")
    if text in ("-0", "-0.0"):
        text = "0"
    return text


# ----------------------------------------------------------------- SymPy text

class _SympyTextPrinter(StrPrinter):
    """StrPrinter whose output ``sympify`` reads back exactly."""

    def _print_Float(self, expr):
        if expr._prec == 53:                      # a double: shortest round-trip text
            text = repr(float(expr))
            # sympify reads more than 15 digits at a higher precision: pin it
            return text if sp.Float(text)._prec == 53 else f"Float('{text}', 15)"
        return super()._print_Float(expr)

    def _print_Symbol(self, expr):
        name = expr.name
        if not name.isidentifier() or keyword.iskeyword(name):
            return sp.srepr(expr)                 # e.g. Symbol('lambda', positive=True)
        return name


def to_sympy_text(expr, digits: int | None = None) -> str:
    """SymPy syntax for ``expr`` (the ``f_t`` field).

    ``sympify(text, locals={name: symbol, ...}) == expr`` when ``digits`` is None;
    with ``digits`` the non-whole numbers are rounded first (:func:`round_numbers`).
    """
    expr = _check_expr(expr)
    digits = _check_digits(digits)
    if digits is not None:
        expr = _round(expr, digits)
    return _SympyTextPrinter().doprint(expr)


# ----------------------------------------------------------------- display text

class _DisplayPrinter(StrPrinter):
    """Readable one-line text: ``^`` powers, ``u(..)`` steps, ``δ(..)`` impulses."""

    _default_settings = dict(StrPrinter._default_settings, digits=6)

    def _print_Float(self, expr):
        if self._settings["digits"] > 17:
            return sp.sstr(expr, full_prec=False)
        return re.sub(r"e([+-])0*(\d)", lambda m: "e" + m.group(1).replace("+", "") + m.group(2),
                      _short_float(float(expr), self._settings["digits"]))

    def _print_Pow(self, expr, rational=False):
        b, e = expr.base, expr.exp
        if e is sp.S.Half:
            return f"sqrt({self._print(b)})"
        if e.is_Number and e.is_negative:
            if e == -1:
                return "1/" + self.parenthesize(b, PRECEDENCE["Pow"], strict=False)
            return "1/" + self._print(sp.Pow(b, -e, evaluate=False))
        base = self.parenthesize(b, PRECEDENCE["Pow"], strict=True)
        if e.is_Integer and not e.is_negative or e.is_Symbol or e.is_Float and e > 0:
            exp = self._print(e)
        else:
            exp = f"({self._print(e)})"
        return f"{base}^{exp}"

    def _print_Heaviside(self, expr):
        return f"u({self._print(expr.args[0])})"

    def _print_DiracDelta(self, expr):
        k = int(expr.args[1]) if len(expr.args) > 1 else 0
        mark = "'" * k if k <= 2 else f"^({k})"
        return f"δ{mark}({self._print(expr.args[0])})"

    def _print_Exp1(self, expr):
        return "e"

    def _print_ImaginaryUnit(self, expr):
        return "i"


def to_display(expr, digits: int = 6) -> str:
    """Short readable text, numbers to ``digits`` significant digits."""
    expr = _check_expr(expr)
    digits = _check_digits(digits, allow_none=False)
    return _DisplayPrinter({"digits": digits}).doprint(_round(expr, digits))


# ----------------------------------------------------------------- LaTeX

class _LatexPrinter(LatexPrinter):
    """SymPy's LaTeX with ``u(..)`` for the unit step and ``\\delta(..)`` impulses."""

    def _print_Heaviside(self, expr, exp=None):
        tex = r"u\left(%s\right)" % self._print(expr.args[0])
        return r"\left(%s\right)^{%s}" % (tex, exp) if exp else tex

    def _print_DiracDelta(self, expr, exp=None):
        k = int(expr.args[1]) if len(expr.args) > 1 else 0
        mark = "'" * k if k <= 2 else "^{(%d)}" % k
        tex = r"\delta%s\left(%s\right)" % (mark, self._print(expr.args[0]))
        return r"\left(%s\right)^{%s}" % (tex, exp) if exp else tex


def to_latex(expr, digits: int | None = None) -> str:
    """LaTeX for ``expr``; with ``digits`` the non-whole numbers are rounded first."""
    expr = _check_expr(expr)
    digits = _check_digits(digits)
    if digits is not None:
        expr = _round(expr, digits)
    return _LatexPrinter().doprint(expr)


# ----------------------------------------------------------------- spreadsheet formula

# precedence levels of printed Excel fragments (higher binds tighter).  Excel's
# unary minus binds tighter than ^ (=-2^2 is 4), so a negated fragment is
# weaker than everything but + and -.
_REL, _ADD, _NEG, _MUL, _POW, _ATOM = range(6)

_SHEET = r"(?:'(?:[^'\[\]:*?/\\]|'')+'|[^\W\d][\w.]*)!"
_A1 = r"\$?[A-Za-z]{1,3}\$?[1-9][0-9]*"
_NAME = r"[^\W\d][\w.]*"
_REF_RE = re.compile(rf"(?:{_SHEET})?(?:{_A1}|{_NAME})")
_CELL_LIKE = re.compile(r"[A-Za-z]{1,3}[0-9]+|[Rr][0-9]*[Cc]?[0-9]*|[Cc][0-9]*", re.ASCII)

_EXCEL_FUNCS = {
    "exp": "EXP", "sin": "SIN", "cos": "COS", "tan": "TAN", "sinh": "SINH",
    "cosh": "COSH", "tanh": "TANH", "log": "LN", "Abs": "ABS", "erf": "ERF",
    "erfc": "ERFC", "Max": "MAX", "Min": "MIN",
}


def _is_excel_name(name: str) -> bool:
    """True if ``name`` can be a defined name (not a cell reference, not TRUE/FALSE)."""
    return (bool(re.fullmatch(_NAME, name)) and len(name) <= 255
            and not _CELL_LIKE.fullmatch(name) and name.upper() not in ("TRUE", "FALSE"))


def _check_ref(ref, what: str) -> str:
    if not isinstance(ref, str) or not _REF_RE.fullmatch(ref):
        raise ParameterError(f"{what} must be a cell reference or defined name "
                             f"such as A2, $B$3, Sheet2!C5 or rate, got {ref!r}", what)
    local = ref.rsplit("!", 1)[-1]
    if not re.fullmatch(_A1, local) and not _is_excel_name(local):
        raise ParameterError(f"{what} {ref!r} is neither a cell reference nor a valid name", what)
    return ref


class _ExcelPrinter(Printer):
    """Formula text for Excel / LibreOffice Calc; unknown nodes raise."""

    printmethod = "_sheetfuncs_excel"
    _default_settings = {"cell": "A1", "digits": 15, "names": {}}

    # -- fragments and precedence
    def _level(self, e) -> int:
        if e.is_Add:
            return _ADD
        if e.is_Relational:
            return _REL
        if e.is_Mul:
            if any(isinstance(a, sp.Heaviside) for a in e.args):
                return _ATOM                                  # printed as IF(...)
            return _NEG if e.as_coeff_Mul()[0].is_negative else _MUL
        if e.is_Pow:
            if e.exp is sp.S.Half:
                return _ATOM
            return _MUL if e.exp.is_Number and e.exp.is_negative else _POW
        if e.is_Number:
            return _NEG if e.is_negative else _ATOM
        return _ATOM

    def _paren(self, e, level: int) -> str:
        s = self._print(e)
        return f"({s})" if self._level(e) < level else s

    def _number(self, x) -> str:
        x = sp.Float(x, 30) if not isinstance(x, sp.Float) else x
        if not x.is_finite:
            raise UnsupportedExpressionError(f"the number {x} has no spreadsheet form")
        return _short_float(float(x), self._settings["digits"]).upper()

    # -- atoms
    def _print_Symbol(self, expr):
        if expr.name == T.name:
            return self._settings["cell"]
        names = self._settings["names"]
        if expr.name in names:
            return names[expr.name]
        if not _is_excel_name(expr.name):
            raise UnsupportedExpressionError(
                f"parameter '{expr.name}' would read as a cell reference or is not a valid name",
                f"map it to a cell with names={{'{expr.name}': 'B1'}}")
        return expr.name

    def _print_Integer(self, expr):
        if abs(expr.p) < 10 ** 15:
            return str(expr.p)
        return self._number(expr)

    def _print_Rational(self, expr):
        return self._number(expr)

    def _print_Float(self, expr):
        return self._number(expr)

    def _print_Pi(self, expr):
        return "PI()"

    def _print_Exp1(self, expr):
        return "EXP(1)"

    def _print_ImaginaryUnit(self, expr):
        raise UnsupportedExpressionError(
            "the imaginary unit I has no spreadsheet form (the expression is complex)")

    def emptyPrinter(self, expr):
        """Numbers without a formula (gamma(1/3), EulerGamma ...) print as values."""
        if isinstance(expr, sp.Expr) and expr.is_number and not expr.has(sp.I):
            v = expr.evalf(self._settings["digits"] + 5)
            if v.is_Float and v.is_finite:
                return self._number(v)
        if isinstance(expr, sp.Function) or isinstance(expr, sp.core.function.AppliedUndef):
            what = f"{expr.func.__name__}()"
        elif isinstance(expr, sp.Basic) and not expr.args:
            what = str(expr)
        else:
            what = type(expr).__name__
        raise UnsupportedExpressionError(f"{what} has no spreadsheet formula")

    # -- operators
    def _print_Add(self, expr):
        terms = expr.as_ordered_terms()
        first = next((i for i, x in enumerate(terms) if not x.could_extract_minus_sign()), 0)
        terms.insert(0, terms.pop(first))         # start with a positive term if any
        out = [self._print(terms[0])]
        for term in terms[1:]:
            if term.could_extract_minus_sign():
                out.append("-" + self._paren(-term, _NEG + 1))
            else:
                out.append("+" + self._paren(term, _ADD + 1))
        return "".join(out)

    def _print_Mul(self, expr):
        steps = [a for a in expr.args if isinstance(a, sp.Heaviside)]
        if steps:
            text = self._print(sp.Mul(*[a for a in expr.args if not isinstance(a, sp.Heaviside)]))
            for h in reversed(steps):
                text = f"IF({self._step_condition(h.args[0])},{text},0)"
            return text
        coeff, rest = expr.as_coeff_Mul()
        negative = coeff.is_negative
        if negative:
            coeff = -coeff
        num, den = [], []
        for f in rest.as_ordered_factors():
            if f.is_Pow and f.exp.is_Number and f.exp.is_negative:
                den.append(sp.Pow(f.base, -f.exp))
            else:
                num.append(f)
        parts = [self._paren(f, _MUL) for f in num]
        if coeff != 1 or not parts:
            parts.insert(0, self._print(coeff))
        elif negative and self._level(num[0]) == _POW:
            parts[0] = f"({parts[0]})"                 # -(x^2), not -x^2 = (-x)^2
        text = "*".join(parts)
        if den:
            text += "/" + (self._paren(den[0], _POW) if len(den) == 1 else
                           "(" + "*".join(self._paren(d, _MUL) for d in den) + ")")
        return ("-" if negative else "") + text

    def _print_Pow(self, expr):
        b, e = expr.base, expr.exp
        if e.is_Number and e.is_negative:
            return "1/" + self._paren(sp.Pow(b, -e), _POW)
        if e is sp.S.Half:
            return f"SQRT({self._print(b)})"
        if e.is_Rational and e.q == 2:
            return f"SQRT({self._print(b)})^{e.p}"
        return f"{self._paren(b, _ATOM)}^{self._paren(e, _ATOM)}"

    # -- functions
    def _print_Function(self, expr):
        name = _EXCEL_FUNCS.get(expr.func.__name__)
        if name is None or (name == "LN" and len(expr.args) != 1):
            return self.emptyPrinter(expr)
        return f"{name}({','.join(self._print(a) for a in expr.args)})"

    def _print_Max(self, expr):
        return f"MAX({','.join(self._print(a) for a in expr.args)})"

    def _print_Min(self, expr):
        return f"MIN({','.join(self._print(a) for a in expr.args)})"

    def _print_Heaviside(self, expr):
        return f"IF({self._step_condition(expr.args[0])},1,0)"

    def _print_DiracDelta(self, expr):
        return "0"                  # impulses are reported separately, never sampled

    def _step_condition(self, arg) -> str:
        """Condition text for ``arg >= 0``, as ``cell>=T0`` when arg is linear in t."""
        t = next((s for s in arg.free_symbols if s.name == T.name), None)
        if t is not None:
            slope = arg.diff(t)
            if not slope.has(t) and (slope.is_positive or slope.is_negative):
                start = (slope * t - arg) / slope
                op = ">=" if slope.is_positive else "<="
                return f"{self._settings['cell']}{op}{self._print(start)}"
        return f"{self._print(arg)}>=0"

    def _print_Relational(self, expr):
        ops = {"==": "=", "!=": "<>", "<": "<", "<=": "<=", ">": ">", ">=": ">="}
        op = ops.get(expr.rel_op)
        if op is None:
            return self.emptyPrinter(expr)
        return f"{self._paren(expr.lhs, _ADD)}{op}{self._paren(expr.rhs, _ADD)}"

    def _print_And(self, expr):                  # TRUE*TRUE = 1 in both programs
        return "(" + "*".join(f"({self._print(a)})" for a in expr.args) + ")"

    def _print_Or(self, expr):
        return "((" + "+".join(f"({self._print(a)})" for a in expr.args) + ")>0)"

    def _print_Piecewise(self, expr):
        *pieces, (last_e, last_c) = expr.args
        if last_c is not sp.true:
            raise UnsupportedExpressionError("Piecewise without an 'otherwise' branch "
                                             "has no spreadsheet formula")
        text = self._print(last_e)
        for e, c in reversed(pieces):
            text = f"IF({self._print(c)},{self._print(e)},{text})"
        return text


def to_excel(expr, cell: str = "A1", digits: int = 15, causal: bool = True,
             *, names: dict[str, str] | None = None) -> str:
    """Spreadsheet formula ("=...") for ``expr`` with t read from ``cell``.

    Uses only functions found in both Excel and LibreOffice Calc.  A product
    with ``Heaviside(t - T0)`` becomes ``IF(cell>=T0,<rest>,0)``; impulses
    (``DiracDelta``) print as 0 and their terms are dropped; ``causal`` wraps
    the formula as ``IF(cell<0,0,...)``.  ``names`` maps parameter names to
    cell references; other parameters print as their names (defined names).
    Raises UnsupportedExpressionError for a node with no spreadsheet form.
    """
    expr = _check_expr(expr)
    digits = _check_digits(digits, high=17, allow_none=False)
    cell = _check_ref(cell, "cell")
    if not isinstance(causal, bool):
        raise ParameterError(f"causal must be True or False, got {causal!r}", "causal")
    if names is not None and not isinstance(names, dict):
        raise ParameterError("names must map parameter names to cell references", "names")
    names = dict(names or {})
    for key, ref in names.items():
        if not isinstance(key, str) or key == T.name:
            raise ParameterError(f"names: {key!r} cannot be mapped (t is given by cell=)", "names")
        _check_ref(ref, f"names[{key!r}]")
    expr = expr.replace(lambda e: isinstance(e, sp.DiracDelta), lambda e: sp.S.Zero)
    if causal:   # inside IF(cell<0,0,...) a step at t = 0 is always on
        expr = expr.replace(lambda e: isinstance(e, sp.Heaviside) and e.args[0].is_Symbol
                            and e.args[0].name == T.name, lambda e: sp.S.One)
    body = _ExcelPrinter({"cell": cell, "digits": digits, "names": names}).doprint(expr)
    if causal and expr != 0:
        body = f"IF({cell}<0,0,{body})"
    formula = "=" + body
    if len(formula) > EXCEL_FORMULA_MAX_CHARS:
        raise LimitError("formula length", len(formula), EXCEL_FORMULA_MAX_CHARS)
    return formula


# ----------------------------------------------------------------- results of the fast core

def display_result(result, digits: int = 6) -> str:
    """Human text of a result's f(t): printed from the modal terms when the fast core made
    it (delays kept visible, noise dropped), else from the SymPy expression."""
    digits = _check_digits(digits, allow_none=False)
    if getattr(result, "is_fast", False) and result.series is None:
        from sheetfuncs.engine.termtext import Display, time_text
        return time_text(result.modal_pieces, Display(digits))
    if result.f_t is None:
        return "(no closed form)"
    return to_display(result.f_t, digits=digits)


def excel_result(result, cell: str = "A1", *, names=None) -> str:
    """Spreadsheet formula ("=...") of a result's f(t) at full double precision (17
    significant digits whatever the display digits), t read from ``cell``."""
    cell = _check_ref(cell, "cell")
    if getattr(result, "is_fast", False) and result.series is None and not names:
        from sheetfuncs.engine.termtext import Excel, time_text
        body = time_text(result.modal_pieces, Excel(cell))
        formula = "=" + (f"IF({cell}<0,0,{body})" if body != "0" else "0")
        if len(formula) > EXCEL_FORMULA_MAX_CHARS:
            raise LimitError("formula length", len(formula), EXCEL_FORMULA_MAX_CHARS)
        return formula
    kw = {"names": names} if names else {}
    return to_excel(result.f_t, cell=cell, digits=17, **kw)
