"""Read expressions as engineers type them, without ever executing them.

The text is split into allow-listed tokens and read by one small
recursive-descent grammar that hands every node to a *builder*:

* ``_SympyBuilder`` makes SymPy objects (``parse``; SymPy is imported only then);
* ``quasi.QuasiBuilder`` makes exact rational functions of s and delays
  ``e^{-sT}`` over the rationals (the fast core; no SymPy at all).

Nothing is handed to Python's ``eval`` or SymPy's string parser.

Accepted: numbers (``4.7``, ``4.7e-6``; decimals are exact rationals), the
imaginary unit written after a number (``2j``, ``0.5i``), the variable (``s``
or ``t``), ``e`` and ``pi``, the functions in ``FUNCTIONS``, operators
``+ - * / ^ **``, parentheses, implicit products (``2s``, ``(s+1)(s+2)``,
``4.7e-6s``), and other names as parameters.

Safety caps: ``MAX_LENGTH`` characters, ``MAX_EXPONENT`` for powers of
expressions holding the variable, ``MAX_NUMBER_EXPONENT`` for powers of plain
numbers, ``MAX_DEGREE`` for the polynomial degree an expression can reach,
and number literals within the range of double precision.
"""
from __future__ import annotations

import keyword
import re
from fractions import Fraction
from typing import Mapping

from ..errors import ExpressionSyntaxError, LimitError, ParameterError

MAX_LENGTH = 2000
MAX_EXPONENT = 60
MAX_NUMBER_EXPONENT = 400
MAX_DEGREE = 60
MAX_DIGITS = 60
#: number literals must lie within double precision's normal range
MAX_LITERAL_EXP10 = 300

_SHARED = ("exp", "sqrt", "sin", "cos", "tan", "sinh", "cosh", "tanh", "log", "ln", "atan",
           "arctan", "erf", "erfc")
#: functions that may appear in an s-domain expression
FUNCTIONS = frozenset(_SHARED)
#: extra functions of time-domain signals: unit step, unit impulse, ramp
TIME_FUNCTIONS = frozenset(_SHARED + ("u", "step", "heaviside", "delta", "dirac", "ramp"))
CONSTANTS = frozenset({"pi", "e"})
#: names refused as parameters: SymPy and spreadsheets read them as constants, infinities
#: or the imaginary unit, so a result printed with them would read back as something else
RESERVED_NAMES = frozenset({"nan", "inf", "infinity", "oo", "zoo", "true", "false", "none"})
RESERVED_EXACT = frozenset({"I", "E", "S", "N", "O", "Q"})

_TOKEN = re.compile(r"""
    (?P<ws>\s+)
  | (?P<imag>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[ij](?![A-Za-z0-9]))
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
    "²": "'²' is not allowed: write powers with ^ (s^2)",
    "³": "'³' is not allowed: write powers with ^ (s^3)",
    "·": "'·' is not allowed: write products with * or a space",
    "×": "'×' is not allowed: write products with *",
    "−": "'−' (a typographic minus) is not allowed: type the ASCII '-'",
    "π": "'π' is not allowed: write pi",
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
            if kind in ("num", "imag") and m.end() < len(text) and text[m.end()] == ".":
                raise ExpressionSyntaxError("malformed number", text, pos)
            tokens.append((kind, value, pos))
        pos = m.end()
    return tokens


def exact_fraction(text: str) -> Fraction:
    """A decimal literal as an exact fraction ('4.7' -> 47/10), refusing numbers outside
    double precision's normal range (1e999, 1e-320)."""
    if len(text) > MAX_DIGITS:
        raise LimitError("number length", len(text), MAX_DIGITS)
    mant, _, exp = text.lower().partition("e")
    out_of_range = LiteralRangeError(f"the number {text} is outside the range of double "
                                     f"precision (1e-{MAX_LITERAL_EXP10} to 1e{MAX_LITERAL_EXP10})")
    if exp and abs(int(exp)) > 2 * MAX_LITERAL_EXP10:          # before building a huge integer
        raise out_of_range
    frac = Fraction(text)
    if frac != 0:
        e10 = len(str(abs(frac.numerator))) - len(str(frac.denominator))
        if abs(e10) > MAX_LITERAL_EXP10:
            raise out_of_range
    return frac


class LiteralRangeError(ParameterError):
    """A number literal outside double precision's range."""

    def __init__(self, message):
        super().__init__(message, None)


def exact_number(text: str):
    """A decimal string as an exact SymPy rational: '4.7' -> 47/10."""
    import sympy as sp
    frac = exact_fraction(text)
    return sp.Rational(frac.numerator, frac.denominator)


class _Parser:
    """The grammar; every node is made by ``builder``."""

    def __init__(self, text: str, var: str, functions, builder):
        self.text = text
        self.tokens = tokenize(text)
        self.i = 0
        self.var = var
        self.functions = functions
        self.b = builder
        self.names: set[str] = set()

    # token helpers -------------------------------------------------------
    def peek(self, ahead: int = 0):
        try:
            return self.tokens[self.i + ahead]
        except IndexError:
            return None

    def error(self, reason, tok=None):
        pos = tok[2] if tok else len(self.text)
        raise ExpressionSyntaxError(reason, self.text, pos)

    def take(self, value=None):
        tok = self.peek()
        if tok is None:
            self.error("the expression ends too early" if value is None
                       else f"missing '{value}' at the end")
        if value is not None and tok[1] != value:
            self._comma_hint(tok)
            self.error(f"expected '{value}' but found '{tok[1]}'", tok)
        self.i += 1
        return tok

    def _comma_hint(self, tok):
        """'0,5' is a decimal comma: say so instead of a bare syntax error."""
        if tok[1] != "," or self.i == 0:
            return
        prev = self.tokens[self.i - 1]
        nxt = self.peek(1)
        if prev[0] == "num" and nxt is not None and nxt[0] in ("num", "imag") \
                and prev[2] + len(prev[1]) == tok[2] and tok[2] + 1 == nxt[2]:
            digits = re.match(r"\d+", nxt[1])
            frac = digits.group() if digits else nxt[1]
            self.error(f"'{prev[1]},{frac}': use a decimal point ({prev[1]}.{frac}); "
                       "commas only separate function arguments", tok)

    # grammar -------------------------------------------------------------
    def parse(self):
        if not self.tokens:
            raise ExpressionSyntaxError("the expression is empty", self.text)
        expr = self.sum()
        tok = self.peek()
        if tok is not None:
            if tok[1] == ")":
                self.error("unmatched ')'", tok)
            self._comma_hint(tok)
            self.error(f"unexpected '{tok[1]}'", tok)
        return expr

    def sum(self):
        expr = self.product()
        while (tok := self.peek()) and tok[1] in "+-" and tok[0] == "op":
            self.i += 1
            rhs = self.product()
            expr = self.b.add(expr, rhs) if tok[1] == "+" else self.b.sub(expr, rhs)
        return expr

    def _starts_factor(self, tok):
        return tok is not None and (tok[0] in ("num", "name", "imag") or tok[1] == "(")

    def product(self):
        expr = self.unary()
        while True:
            tok = self.peek()
            if tok and tok[1] in ("*", "/"):
                self.i += 1
                rhs = self.unary()
                if tok[1] == "*":
                    expr = self.b.mul(expr, rhs)
                else:
                    if self.b.is_zero(rhs):
                        self.error("division by zero", tok)
                    expr = self.b.div(expr, rhs)
            elif self._starts_factor(tok):
                expr = self.b.mul(expr, self.power())     # implicit product: 2s, (s+1)(s+2)
            else:
                return expr

    def unary(self):
        tok = self.peek()
        if tok and tok[1] in "+-" and tok[0] == "op":
            self.i += 1
            operand = self.unary()
            return self.b.neg(operand) if tok[1] == "-" else operand
        return self.power()

    def power(self):
        start = self.peek()
        base = self.primary()
        tok = self.peek()
        if tok and tok[1] in ("^", "**"):
            self.i += 1
            first = self.peek()
            exponent = self.unary()          # right-associative, allows s^-1
            after = self.peek()
            grouped = first is not None and first[1] == "("
            is_e = start is not None and start[0] == "name" and start[1].lower() == "e"
            signed = first is not None and first[1] in "+-"
            if not grouped and (is_e or signed) and self._starts_factor(after):
                shown = self.text[start[2]:after[2]].strip() + self.text[after[2]:after[2] + len(after[1])]
                self.error(f"'{shown}' is ambiguous: put the whole exponent in parentheses, "
                           f"e.g. e^(-2s) or exp(-2s)", after)
            return self.make_power(base, exponent, tok)
        return base

    def make_power(self, base, exponent, tok):
        return self.b.pow(base, exponent, tok, self)

    def primary(self):
        tok = self.take()
        kind, value, pos = tok
        if kind in ("num", "imag"):
            try:
                frac = exact_fraction(value if kind == "num" else value[:-1])
            except LiteralRangeError as exc:
                self.error(exc.reason, tok)
            return self.b.number(frac) if kind == "num" else self.b.imag(frac)
        if kind == "name":
            nxt = self.peek()
            low = value.lower()
            if keyword.iskeyword(value) or keyword.issoftkeyword(value):
                self.error(f"'{value}' is a reserved word and cannot be used", tok)
            if nxt and nxt[1] == "(" and low in self.functions:
                return self.call(low, value, tok)
            if low in self.functions:
                self.error(f"function '{value}' needs its argument in parentheses", tok)
            if value == self.var:
                return self.b.var()
            if low in CONSTANTS:
                return self.b.constant(low)
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

    def call(self, low, name, tok):
        self.take("(")
        args = [self.sum()]
        while (nxt := self.peek()) and nxt[1] == ",":
            self.i += 1
            args.append(self.sum())
        if self.peek() is None:
            self.error(f"missing ')' after the argument of {name}", None)
        self.take(")")
        is_delta = low in ("delta", "dirac")
        nargs = 2 if is_delta and len(args) == 2 else 1
        if len(args) != nargs:
            self.error(f"{name} takes one argument, got {len(args)}", tok)
        if is_delta and len(args) == 2 and not self.b.is_whole(args[1]):
            self.error("the order of delta must be a whole number", tok)
        return self.b.call(low, args, tok, self)

    def name(self, value, tok):
        reserved = {"s", "t"} - {self.var}
        if value in reserved:
            self.error(f"'{value}' cannot appear here (the variable is '{self.var}')", tok)
        if value in ("i", "j"):
            self.error(f"'{value}' alone is not a name here: the imaginary unit is written after "
                       f"a number (2j); pick another parameter name", tok)
        if value.lower() in RESERVED_NAMES or value in RESERVED_EXACT:
            self.error(f"'{value}' is reserved (a constant or infinity elsewhere) and cannot be "
                       "a parameter name", tok)
        self.names.add(value)
        return self.b.param(value, tok, self)


# ------------------------------------------------------------------ SymPy builder
class _SympyBuilder:
    """Grammar nodes as SymPy objects (the general, symbolic route)."""

    def __init__(self, params: Mapping, var_symbol):
        import sympy as sp
        self.sp = sp
        self.params = params
        self.var_symbol = var_symbol
        self.funcs = {
            "exp": sp.exp, "sqrt": sp.sqrt, "sin": sp.sin, "cos": sp.cos, "tan": sp.tan,
            "sinh": sp.sinh, "cosh": sp.cosh, "tanh": sp.tanh, "log": sp.log, "ln": sp.log,
            "atan": sp.atan, "arctan": sp.atan, "erf": sp.erf, "erfc": sp.erfc,
            "u": sp.Heaviside, "step": sp.Heaviside, "heaviside": sp.Heaviside,
            "delta": sp.DiracDelta, "dirac": sp.DiracDelta, "ramp": lambda x: x * sp.Heaviside(x)}

    def number(self, frac):
        return self.sp.Rational(frac.numerator, frac.denominator)

    def imag(self, frac):
        return self.number(frac) * self.sp.I

    def var(self):
        return self.var_symbol

    def constant(self, low):
        return self.sp.pi if low == "pi" else self.sp.E

    def param(self, name, tok, parser):
        if name in self.params:
            return self.params[name]
        from .._types import param_symbol
        return param_symbol(name)

    def add(self, a, b):
        return a + b

    def sub(self, a, b):
        return a - b

    def mul(self, a, b):
        return a * b

    def div(self, a, b):
        return a / b

    def neg(self, a):
        return -a

    def is_zero(self, a):
        return a == 0

    def is_whole(self, a):
        return bool(a.is_Integer and a >= 0)

    def pow(self, base, exponent, tok, parser):
        sp = self.sp
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

    def call(self, low, args, tok, parser):
        return self.funcs[low](*args)


def parse(text: str, params: Mapping[str, object] | None = None, *, var: str = "s"):
    """Read ``text`` into a SymPy expression in ``s`` (or ``t`` with ``var="t"``).

    ``params`` maps parameter names to values (numbers, or text such as
    ``"1/3"`` or ``"2*pi"``); names without a value stay symbolic.
    """
    if not isinstance(text, str):
        raise ExpressionSyntaxError("the expression must be text", str(text))
    from .._types import S, T
    symbol = S if var == "s" else T
    values = parse_params(params)
    functions = FUNCTIONS if var == "s" else TIME_FUNCTIONS
    parser = _Parser(text.strip(), symbol.name, functions, _SympyBuilder(values, symbol))
    expr = parser.parse()
    check_degree(expr, symbol)
    return expr


def check_param_name(name) -> str:
    """A parameter name as given, or ParameterError."""
    name = str(name).strip()
    if not re.fullmatch(r"[A-Za-z][A-Za-z0-9]*", name) or keyword.iskeyword(name):
        raise ParameterError(f"parameter name '{name}' is not a plain name (letters and digits)", name)
    low = name.lower()
    if name in ("s", "t", "i", "j") or low in CONSTANTS or low in TIME_FUNCTIONS \
            or low in RESERVED_NAMES or name in RESERVED_EXACT:
        raise ParameterError(f"'{name}' is reserved and cannot be a parameter", name)
    return name


def parse_params(params: Mapping[str, object] | None) -> dict:
    """Validate parameter names and turn their values into exact SymPy numbers."""
    out: dict = {}
    for name, value in (params or {}).items():
        name = check_param_name(name)
        out[name] = param_value(name, value)
    return out


def param_value(name: str, value):
    """One parameter value as an exact SymPy number.

    Text may be an SI-prefixed number (``'10k'``, ``'22n'``, ``'1.5meg'``: see ``sheetfuncs.units``)
    or a constant expression (``'1/3'``, ``'2*pi'``)."""
    import sympy as sp
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
            builder = _SympyBuilder({}, sp.Symbol("_novar"))
            expr = _Parser(value.strip(), "_novar", frozenset({"sqrt", "exp", "ln", "log"}),
                           builder).parse()
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


def degree_bound(expr, var) -> int:
    """An upper bound of the polynomial degree in ``var`` that expanding
    ``expr`` could reach (numerator or denominator), without expanding."""
    import sympy as sp
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


def check_degree(expr, var) -> None:
    d = degree_bound(expr, var)
    if d > MAX_DEGREE:
        raise LimitError("polynomial degree", d, MAX_DEGREE)
