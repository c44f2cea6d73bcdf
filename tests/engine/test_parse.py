"""The reader: engineer syntax in, SymPy out; anything else refused with a
message naming the token and its position.  Expected values are written with
SymPy's own constructors (an independent spelling of the same expression)."""
import pytest
import sympy as sp

from sheetfuncs._types import S, T, param_symbol
from sheetfuncs.engine.parse import parse
from sheetfuncs.errors import ExpressionSyntaxError, LimitError, ParameterError, SheetfuncsError

s = S


@pytest.mark.parametrize("text, expected", [
    ("2s", 2 * s),
    ("(s+1)(s+2)", (s + 1) * (s + 2)),
    ("4.7e-6s + 1", sp.Rational(47, 10_000_000) * s + 1),
    ("s^2 + 3s + 2", s**2 + 3 * s + 2),
    ("s**2", s**2),
    ("s^-1", 1 / s),
    ("-s^2", -(s**2)),
    ("2^3^2", sp.Integer(2) ** 9),          # right-associative as in mathematics
    ("exp(-0.5s)", sp.exp(-s / 2)),
    ("e^(-0.5s)", sp.exp(-s / 2)),
    ("sqrt(s)", sp.sqrt(s)),
    ("1/(s cosh(sqrt(s)))", 1 / (s * sp.cosh(sp.sqrt(s)))),
    ("pi s", sp.pi * s),
    ("0.1", sp.Rational(1, 10)),
    (".5s", s / 2),
    ("3 (s+1)", 3 * (s + 1)),
    ("sin(s) + cos(s) + tanh(s) + log(s) + sinh(s)", sp.sin(s) + sp.cos(s) + sp.tanh(s) + sp.log(s) + sp.sinh(s)),
])
def test_engineer_syntax(text, expected):
    assert sp.simplify(parse(text) - expected) == 0


def test_decimals_are_exact_so_repeated_poles_stay_repeated():
    # 0.2^2 = 0.04 exactly: s^2 + 0.4s + 0.04 = (s + 0.2)^2
    expr = parse("s^2 + 0.4s + 0.04")
    assert sp.expand(expr - (s + sp.Rational(1, 5)) ** 2) == 0
    assert sp.Poly(expr, s).factor_list()[1][0][1] == 2


def test_parameters_symbolic_or_substituted():
    assert parse("1/(s+a)") == 1 / (s + param_symbol("a"))
    assert parse("1/(R C s + 1)", {"R": 1000, "C": 4.7e-6}) == 1 / (sp.Rational(47, 10000) * s + 1)
    assert parse("1/(s+a)", {"a": "1/3"}) == 1 / (s + sp.Rational(1, 3))


def test_time_variable():
    assert parse("u(t-2) + t exp(-t)", var="t") == sp.Heaviside(T - 2) + T * sp.exp(-T)


@pytest.mark.parametrize("text, fragment", [
    ("s.__class__", "attribute"),
    ("__import__('os')", "underscore"),
    ("s[0]", "indexing"),
    ("'abc'", "quotes"),
    ("lambda", "reserved"),
    ("import", "reserved"),
    ("s = 3", "'='"),
    ("(s+1", "missing ')'"),
    ("s+1)", "unmatched ')'"),
    ("s+", "ends too early"),
    ("", "empty"),
    ("sin s", "parentheses"),
    ("sin(s, 2)", "one argument"),
    ("1/0", "division by zero"),
    ("3!", "factorial"),
    ("s @ s", "'@'"),
    ("1..2", "malformed"),
])
def test_refused_with_clear_message(text, fragment):
    with pytest.raises(ExpressionSyntaxError) as info:
        parse(text)
    assert fragment in str(info.value)
    assert "\n" not in str(info.value)


def test_error_names_position():
    with pytest.raises(ExpressionSyntaxError) as info:
        parse("s + s.real")
    assert info.value.position == 5
    assert "position 6" in str(info.value)


@pytest.mark.parametrize("text", ["s^999999999", "(s+1)^5000", "((s+1)^60)^60", "2^10^10",
                                  "s^61", "x" * 3000, "1" * 100])
def test_caps_refuse_quickly(text):
    with pytest.raises(LimitError):
        parse(text)


@pytest.mark.parametrize("params", [{"s": 1}, {"_a": 1}, {"a": "s+1"}, {"a": None},
                                    {"a": float("nan")}, {"a": "abc"}, {"pi": 3}, {"a b": 1}])
def test_bad_parameters(params):
    with pytest.raises(ParameterError):
        parse("1/(s+a)", params)


def test_never_evaluates_python():
    # would create a file if anything were evaluated
    with pytest.raises(SheetfuncsError):
        parse("open('/tmp/sheetfuncs_pwned','w')")
    import os
    assert not os.path.exists("/tmp/sheetfuncs_pwned")


# ------------------------------------------------------------ inputs read as meant
@pytest.mark.parametrize("text, fragment", [
    ("1/(s+1)e^-2s", "parentheses, e.g. e^(-2s)"),       # not s*e^-2/(s+1)
    ("10^-3s", "parentheses"),
    ("s²+1", "write powers with ^"),
    ("1/(0,5s+1)", "use a decimal point (0.5)"),
    ("1e999/s", "outside the range of double precision"),
    ("1/(s+1e-320)", "outside the range of double precision"),
    ("1/(s+nan)", "reserved"), ("1/(s+inf)", "reserved"), ("1/(s+oo)", "reserved"),
    ("1/(s+zoo)", "reserved"), ("1/(s+I)", "reserved"), ("1/(s+j)", "imaginary unit"),
])
def test_inputs_that_would_be_misread_are_refused_with_a_hint(text, fragment):
    with pytest.raises(SheetfuncsError) as info:
        parse(text)
    assert fragment in str(info.value)


def test_e_power_with_grouped_exponent_still_reads():
    assert parse("e^(-2s)/(s+1)") == sp.exp(-2 * s) / (s + 1)
    assert parse("(s+1)^2(s+2)") == (s + 1) ** 2 * (s + 2)        # an implicit product after ^2


def test_imaginary_unit_after_a_number():
    # conjugate factors multiply out to a real F(s): read exactly, inverted as usual
    import sheetfuncs as sf
    F = parse("1/((s+1+2j)(s+1-2j))")
    assert sp.simplify(F - 1 / ((s + 1) ** 2 + 4)) == 0
    a = sf.invert("1/((s+1+2j)(s+1-2j))").to_dict()
    b = sf.invert("1/(s^2+2s+5)").to_dict()
    assert a["terms"] == b["terms"]
    with pytest.raises(SheetfuncsError, match="complex coefficient"):
        sf.invert("1/(s+2j)")


@pytest.mark.parametrize("name", ["nan", "inf", "oo", "zoo", "I", "E", "S", "N", "j", "i"])
def test_reserved_parameter_names(name):
    with pytest.raises(ParameterError):
        parse("1/(s+a)", {name: 1})


def test_time_constant_named_T_and_inertia_named_J_are_fine():
    assert parse("1/(T s + 1)", {"T": 2}) == 1 / (2 * s + 1)
    assert parse("1/(J s^2 + b s)", {"J": 2, "b": 1}) == 1 / (2 * s ** 2 + s)
