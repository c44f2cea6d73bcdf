"""Bad input may only ever raise SheetfuncsError (never a foreign exception)."""
import pytest

import sheetfuncs as sf

BAD_EXPRESSIONS = [
    "", " ", "s+", "(", ")", "1/0", "s/(s-s)", "0", "s^(1/2)^(1/2)", "exp(exp(exp(s)))",
    "sin(", "2..3", "1e999999", "s^s", "log(0)", "1/(s^2+a s+b)", "exp(s)", "1/(1-exp(s))",
    "sqrt(-1)", "s^-70", "(s+1)^-61", "tan(s)", "atan(s)", "erf(s)", "1/(s cosh(sqrt(s))) + a",
    "x" * 5000, "\x00", "１/s", "s\n+1", "1/(s+1)#", "1/(s+1)}", "s**-**2", "2*-*s",
]


@pytest.mark.parametrize("text", BAD_EXPRESSIONS)
def test_invert_raises_only_our_errors(text):
    try:
        sf.invert(text)
    except sf.SheetfuncsError as exc:
        assert str(exc) and "\n" not in str(exc)


@pytest.mark.parametrize("text", BAD_EXPRESSIONS[:20])
def test_figures_and_sample_raise_only_our_errors(text):
    for call in (lambda: sf.figures(text), lambda: sf.sample(text, [0.5, 1.0])):
        try:
            call()
        except sf.SheetfuncsError as exc:
            assert str(exc)


@pytest.mark.parametrize("value", [None, 3.5, [1, 2], {"a": 1}, object()])
def test_non_text_inputs(value):
    try:
        sf.invert(value)
    except sf.SheetfuncsError:
        pass


# found by fuzzing the cell functions: unknown names, improper non-rational F, divergent inversion
@pytest.mark.parametrize("text", ["a2", "se^2", "(s^2+s+1)(s+1)^7^-1", "1e-3e^exp(-2s)", "1e-3ae*e22"])
def test_figures_fuzz_cases_give_our_errors_or_values(text):
    from sheetfuncs import cellfuncs as cf
    for out in (cf.figures_block(text), cf.poles_table(text), cf.response(text, 1.0)):
        flat = [v for row in out for v in row] if isinstance(out, list) else [out]
        assert not any(isinstance(v, str) and "internal error" in v for v in flat), out
