"""Read expressions as engineers type them, without ever executing them.

The text is split into allow-listed tokens and read by a small recursive-
descent parser that builds SymPy objects directly; nothing is handed to
Python's ``eval`` or SymPy's string parser.

Accepted: numbers (``4.7``, ``4.7e-6``; decimals are exact rationals), the
variable (``s`` or ``t``), ``e`` and ``pi``, the functions in ``FUNCTIONS``,
operators ``+ - * / ^ **``, parentheses, implicit products (``2s``,
``(s+1)(s+2)``, ``4.7e-6s``), and other names as parameters.

Safety caps: ``MAX_LENGTH`` characters, ``MAX_EXPONENT`` for powers of
expressions holding the variable, ``MAX_NUMBER_EXPONENT`` for powers of plain
numbers, and ``MAX_DEGREE`` for the polynomial degree an expression can reach.
"""
from __future__ import annotations

import keyword
import re
from fractions import Fraction
from typing import Mapping

import sympy as sp

from .._types import S, T, param_symbol
from ..errors import ExpressionSyntaxError, LimitError, ParameterError

MAX_LENGTH = 2000
MAX_EXPONENT = 60
MAX_NUMBER_EXPONENT = 400
MAX_DEGREE = 60
MAX_DIGITS = 60

_SHARED_FUNCTIONS = {
    "exp": sp.exp, "sqrt": sp.sqrt, "sin": sp.sin, "cos": sp.cos, "tan": sp.tan,
    "sinh": sp.sinh, "cosh": sp.cosh, "tanh": sp.tanh, "log": sp.log, "ln": sp.log,
    "atan": sp.atan, "arctan": sp.atan, "erf": sp.erf, "erfc": sp.erfc,
}
#: functions that may appear in an s-domain expression
FUNCTIONS = dict(_SHARED_FUNCTIONS)
#: extra functions of time-domain signals: unit step and unit impulse
TIME_FUNCTIONS = dict(_SHARED_FUNCTIONS, u=sp.Heaviside, step=sp.Heaviside,
                      heaviside=sp.Heaviside, delta=sp.DiracDelta, dirac=sp.DiracDelta,
                      ramp=lambda x: x * sp.Heaviside(x))
CONSTANTS = {"pi": sp.pi, "e": sp.E}

_TOKEN = re.compile(r"""
    (?P<ws>\s+)
  | (?P<num>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)
  | (?P<name>[A-Za-z][A-Za-z0-9]*)
  | (?P<op>\*\*|[-+*/^(),])
""", re.VERBOSE)

_FORBIDDEN_HINTS = {
    "_": "underscores are not allowed in names",
    ".": "attribute access is not allowed",
    "[": "indexing is not allowed", "]": "indexing is not allowed",
    "'": "text in quotes is not allowed", '"': "text in quotes is not allowed",
    "=": "'=' is not allowed (type only the expression)",
    ";": "';' is not allowed", ":": "':' is not allowed",
    "@": "'@' is not allowed", "!": "'!' is not allowed (no factorials)",
    "{": "braces are not allowed", "}": "braces are not allowed",
    "\\": "backslashes are not allowed", "`": "backticks are not allowed",
    "#": "'#' is not allowed", "$": "'$' is not allowed", "&": "'&' is not allowed",
    "|": "'|' is not allowed", "%": "'%' is not allowed", "~": "'~' is not allowed",
    "<": "comparisons are not allowed", ">": "comparisons are not allowed",
}


def tokenize(text: str) -> list[tuple[str, str, int]]:
    """Split ``text`` into ``(kind, value, position)`` tokens or raise."""
    if len(text) > MAX_LENGTH:
        raise LimitError("expression length", len(text), MAX_LENGTH)
    tokens = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m:
            ch = text[pos]
            reason = _FORBIDDEN_HINTS.get(ch, f"character '{ch}' is not allowed")
            raise ExpressionSyntaxError(reason, text, pos)
        kind = m.lastgroup
        if kind != "ws":
            value = m.group()
            if kind == "name" and m.end() < len(text) and text[m.end()] in "_.":
                ch = text[m.end()]
                raise ExpressionSyntaxError(_FORBIDDEN_HINTS[ch], text, m.end())
            if kind == "num" and m.end() < len(text) and text[m.end()] == ".":
                raise ExpressionSyntaxError("malformed number", text, pos)
            tokens.append((kind, value, pos))
        pos = m.end()
    return tokens


def exact_number(text: str) -> sp.Rational:
    """A decimal string as an exact rational: '4.7' -> 47/10."""
    frac = Fraction(text)
    return sp.Rational(frac.numerator, frac.denominator)


class _Parser:
    def __init__(self, text: str, var: sp.Symbol, functions: Mapping, params: Mapping):
        self.text = text
        self.tokens = tokenize(text)
        self.i = 0
        self.var = var
        self.functions = functions
        self.params = params
        self.names: set[str] = set()

    # token helpers -------------------------------------------------------
    def peek(self):
        return self.tokens[self.i] if self.i < len(self.tokens) else None

    def error(self, reason, tok=None):
        pos = tok[2] if tok else len(self.text)
        raise ExpressionSyntaxError(reason, self.text, pos)

    def take(self, value=None):
        tok = self.peek()
        if tok is None:
            self.error("the expression ends too early" if value is None
                       else f"missing '{value}' at the end")
        if value is not None and tok[1] != value:
            self.error(f"expected '{value}' but found '{tok[1]}'", tok)
        self.i += 1
        return tok

    # grammar -------------------------------------------------------------
    def parse(self):
        if not self.tokens:
            raise ExpressionSyntaxError("the expression is empty", self.text)
        expr = self.sum()
        tok = self.peek()
        if tok is not None:
            if tok[1] == ")":
                self.error("unmatched ')'", tok)
            self.error(f"unexpected '{tok[1]}'", tok)
        return expr

    def sum(self):
        expr = self.product()
        while (tok := self.peek()) and tok[1] in "+-" and tok[0] == "op":
            self.i += 1
            rhs = self.product()
            expr = expr + rhs if tok[1] == "+" else expr - rhs
        return expr

    def _starts_factor(self, tok):
        return tok is not None and (tok[0] in ("num", "name") or tok[1] == "(")

    def product(self):
        expr = self.unary()
        while True:
            tok = self.peek()
            if tok and tok[1] in ("*", "/"):
                self.i += 1
                rhs = self.unary()
                if tok[1] == "*":
                    expr = expr * rhs
                else:
                    if rhs == 0:
                        self.error("division by zero", tok)
                    expr = expr / rhs
            elif self._starts_factor(tok):
                expr = expr * self.power()     # implicit product: 2s, (s+1)(s+2)
            else:
                return expr

    def unary(self):
        tok = self.peek()
        if tok and tok[1] in "+-" and tok[0] == "op":
            self.i += 1
            operand = self.unary()
            return -operand if tok[1] == "-" else operand
        return self.power()

    def power(self):
        base = self.primary()
        tok = self.peek()
        if tok and tok[1] in ("^", "**"):
            self.i += 1
            exponent = self.unary()          # right-associative, allows s^-1
            return self.make_power(base, exponent, tok)
        return base

    def make_power(self, base, exponent, tok):
        if base is sp.E:
            return sp.exp(exponent)
        if exponent.is_Number:
            limit = MAX_EXPONENT if base.free_symbols else MAX_NUMBER_EXPONENT
            if abs(exponent) > limit:
                raise LimitError(f"the exponent at position {tok[2] + 1}", abs(exponent), limit)
        elif base.is_Number and not exponent.free_symbols:
            value = exponent.evalf(15)
            if value.is_real and abs(value) > MAX_NUMBER_EXPONENT:
                raise LimitError("exponent", value, MAX_NUMBER_EXPONENT)
        return sp.Pow(base, exponent)

    def primary(self):
        tok = self.take()
        kind, value, pos = tok
        if kind == "num":
            if len(value) > MAX_DIGITS:
                raise LimitError("number length", len(value), MAX_DIGITS)
            return exact_number(value)
        if kind == "name":
            nxt = self.peek()
            low = value.lower()
            if keyword.iskeyword(value) or keyword.issoftkeyword(value):
                self.error(f"'{value}' is a reserved word and cannot be used", tok)
            if nxt and nxt[1] == "(" and low in self.functions:
                return self.call(self.functions[low], value, tok)
            if low in self.functions:
                self.error(f"function '{value}' needs its argument in parentheses", tok)
            if value == self.var.name:
                return self.var
            if low in CONSTANTS:
                return CONSTANTS[low]
            return self.name(value, tok)
        if value == "(":
            inner = self.sum()
            closing = self.peek()
            if closing is None:
                self.error("missing ')'", None)
            self.take(")")
            return inner
        if value == ")":
            self.error("unexpected ')'", tok)
        self.error(f"unexpected '{value}'", tok)

    def call(self, func, name, tok):
        self.take("(")
        args = [self.sum()]
        while (nxt := self.peek()) and nxt[1] == ",":
            self.i += 1
            args.append(self.sum())
        if self.peek() is None:
            self.error(f"missing ')' after the argument of {name}", None)
        self.take(")")
        nargs = 2 if func in (sp.DiracDelta,) and len(args) == 2 else 1
        if len(args) != nargs:
            self.error(f"{name} takes one argument, got {len(args)}", tok)
        if func is sp.DiracDelta and len(args) == 2 and not (args[1].is_Integer and args[1] >= 0):
            self.error("the order of delta must be a whole number", tok)
        return func(*args)

    def name(self, value, tok):
        reserved = {"s", "t"} - {self.var.name}
        if value in reserved:
            self.error(f"'{value}' cannot appear here (the variable is '{self.var.name}')", tok)
        self.names.add(value)
        if value in self.params:
            return self.params[value]
        return param_symbol(value)


def parse(text: str, params: Mapping[str, object] | None = None, *, var: str = "s") -> sp.Expr:
    """Read ``text`` into a SymPy expression in ``s`` (or ``t`` with ``var="t"``).

    ``params`` maps parameter names to values (numbers, or text such as
    ``"1/3"`` or ``"2*pi"``); names without a value stay symbolic.
    """
    if not isinstance(text, str):
        raise ExpressionSyntaxError("the expression must be text", str(text))
    symbol = S if var == "s" else T
    values = parse_params(params)
    functions = FUNCTIONS if var == "s" else TIME_FUNCTIONS
    parser = _Parser(text.strip(), symbol, functions, values)
    expr = parser.parse()
    check_degree(expr, symbol)
    return expr


def parse_params(params: Mapping[str, object] | None) -> dict[str, sp.Expr]:
    """Validate parameter names and turn their values into exact numbers."""
    out: dict[str, sp.Expr] = {}
    for name, value in (params or {}).items():
        name = str(name).strip()
        if not re.fullmatch(r"[A-Za-z][A-Za-z0-9]*", name) or keyword.iskeyword(name):
            raise ParameterError(f"parameter name '{name}' is not a plain name (letters and digits)", name)
        low = name.lower()
        if name in ("s", "t") or low in CONSTANTS or low in TIME_FUNCTIONS:
            raise ParameterError(f"'{name}' is reserved and cannot be a parameter", name)
        out[name] = param_value(name, value)
    return out


def param_value(name: str, value) -> sp.Expr:
    """One parameter value as an exact SymPy number.

    Text may be an SI-prefixed number (``'10k'``, ``'22n'``, ``'1.5meg'``: see ``sheetfuncs.units``)
    or a constant expression (``'1/3'``, ``'2*pi'``)."""
    if isinstance(value, bool) or value is None:
        raise ParameterError(f"parameter '{name}' has no numeric value", name)
    if isinstance(value, int):
        return sp.Integer(value)
    if isinstance(value, float):
        if value != value or value in (float("inf"), float("-inf")):
            raise ParameterError(f"parameter '{name}' is not a finite number", name)
        return exact_number(repr(value))
    if isinstance(value, Fraction):
        return sp.Rational(value.numerator, value.denominator)
    if isinstance(value, sp.Basic):
        if value.free_symbols or not value.is_number:
            raise ParameterError(f"parameter '{name}' must be a number", name)
        return value
    if isinstance(value, str):
        from ..units import prefixed_number          # '10k', '22n', '4.7u' (SI prefixes; values only)
        prefixed = prefixed_number(value)
        if prefixed is not None:
            return sp.Rational(prefixed.numerator, prefixed.denominator)
        try:
            expr = _Parser(value.strip(), sp.Symbol("_novar"), {"sqrt": sp.sqrt, "exp": sp.exp,
                                                            "ln": sp.log, "log": sp.log}, {}).parse()
        except ExpressionSyntaxError as exc:
            raise ParameterError(f"parameter '{name}': {exc.message}", name) from exc
        if expr.free_symbols:
            hint = ""
            if re.fullmatch(r"\s*[+-]?(\d+\.?\d*|\.\d+)\s*[A-Za-z\u00b5\u03bc\u03a9%/^ ]+\s*", value):
                hint = f" (a unit goes in the label: '{name} [unit]'; values take SI prefixes only: 22n, 10k)"
            raise ParameterError(f"parameter '{name}' value '{value}' is not a number{hint}", name)
        return expr
    try:
        return exact_number(repr(float(value)))
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"parameter '{name}' value {value!r} is not a number", name) from exc


def degree_bound(expr: sp.Expr, var: sp.Symbol) -> int:
    """An upper bound of the polynomial degree in ``var`` that expanding
    ``expr`` could reach (numerator or denominator), without expanding."""
    if not expr.has(var):
        return 0
    if expr == var:
        return 1
    if expr.is_Add:
        return max(degree_bound(a, var) for a in expr.args)
    if expr.is_Mul:
        return sum(degree_bound(a, var) for a in expr.args)
    if expr.is_Pow:
        base, exp = expr.args
        if exp.is_Number:
            return int(abs(exp) + 1) * degree_bound(base, var) if not exp.is_Integer \
                else abs(int(exp)) * degree_bound(base, var)
        return degree_bound(base, var)
    if isinstance(expr, sp.exp):
        return 0
    return max((degree_bound(a, var) for a in expr.args), default=0)


def check_degree(expr: sp.Expr, var: sp.Symbol) -> None:
    d = degree_bound(expr, var)
    if d > MAX_DEGREE:
        raise LimitError("polynomial degree", d, MAX_DEGREE)
